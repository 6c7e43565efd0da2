"""``robustff fit``: models and their uncertainty from bump-test records (CSV)."""

from __future__ import annotations

import argparse
import json
import math
from typing import Any

from robustff import CAUTION
from robustff.errors import DataError
from robustff.plant.models import MODEL_KINDS

__all__ = ["register", "run_fit", "result_json"]

_TIME_UNITS = ("s", "min", "h")
_SEPARATORS = {",": ",", ";": ";", "tab": "\t", "\t": "\t"}


def register(subparsers: Any) -> None:
    """Add the ``fit`` sub-command."""
    parser = subparsers.add_parser(
        "fit",
        help="fit FOPDT/SOPDT/IPDT models to bump-test data, with confidence intervals",
        description="Fit a model to one or more recorded step or pulse tests of the same loop "
        "(least squares on the simulated response, exact dead time) and propose the "
        "uncertainty of its parameters.",
    )
    parser.add_argument("data", nargs="+", metavar="DATA.csv",
                        help="CSV files with a header row")
    parser.add_argument("--input", required=True, metavar="COL", help="input column (valve %%)")
    parser.add_argument("--output", required=True, metavar="COL", help="output column (the CV)")
    timing = parser.add_mutually_exclusive_group(required=True)
    timing.add_argument("--time", metavar="COL", help="time column (numbers or ISO timestamps)")
    timing.add_argument("--sample-time", type=float, metavar="DT", help="fixed sample interval")
    parser.add_argument("--time-unit", choices=_TIME_UNITS, help="time unit of the data")
    parser.add_argument("--separator", choices=tuple(_SEPARATORS), metavar="SEP",
                        help="field separator: ',' ';' or 'tab' (default: detected)")
    parser.add_argument("--decimal", choices=(".", ","), metavar="MARK",
                        help="decimal mark: '.' or ',' (default: detected)")
    parser.add_argument("--time-format", metavar="FMT",
                        help="strftime format of the timestamps, e.g. '%%d.%%m.%%Y %%H:%%M:%%S' "
                        "(default: ISO 8601 or day-first dd.mm.yyyy / dd/mm/yyyy)")
    parser.add_argument("--model", choices=MODEL_KINDS, default="fopdt")
    parser.add_argument("--method", choices=("least-squares", "two-point"), default="least-squares")
    parser.add_argument("--ci", choices=("bootstrap", "jacobian", "none"), default="bootstrap",
                        help="how the 95%% intervals are computed (default: bootstrap)")
    parser.add_argument("--resamples", type=int, default=200, help="bootstrap resamples (200)")
    parser.add_argument("--seed", type=int, default=0, help="bootstrap seed (0)")
    parser.add_argument("--hold", choices=("zoh", "linear"), default="zoh",
                        help="input between samples: held (zoh, default) or linear")
    parser.add_argument("--json", action="store_true", help="print the result as JSON")
    parser.add_argument("--plot", metavar="FILE", help="write data vs fit to FILE.png or FILE.svg")
    parser.add_argument("--template", metavar="CASE.toml", help="case to copy into --case-out")
    parser.add_argument("--block", default="process", metavar="BLOCK",
                        help="which model of the case the data describe: process (default), "
                             "disturbance, or disturbance.NAME in a case that names its "
                             "disturbances")
    parser.add_argument("--case-out", metavar="OUT.toml", help="write the fitted case here")
    parser.set_defaults(func=run_fit)


def _fit_files(args: argparse.Namespace) -> list[Any]:
    from robustff.fit.least_squares import fit_record
    from robustff.fit.records import read_record

    results = []
    for path in args.data:
        record = read_record(path, args.input, args.output, time_column=args.time,
                             sample_time=args.sample_time, time_unit=args.time_unit,
                             separator=_SEPARATORS.get(args.separator or "", None),
                             decimal=args.decimal, time_format=args.time_format)
        try:
            results.append(fit_record(record, args.model, args.method, args.ci,
                                      args.resamples, args.seed, args.hold))
        except DataError as exc:
            if path in str(exc):
                raise
            raise DataError(f"{path}: {exc}") from None
    return results


def _check_args(args: argparse.Namespace) -> None:
    if (args.template is None) != (args.case_out is None):
        raise DataError("--template and --case-out go together: give both to write a case")
    if args.resamples < 0:
        raise DataError(f"--resamples must be >= 0, got {args.resamples}")
    if args.resamples == 0 and args.ci == "bootstrap":
        raise DataError(
            "--resamples 0 computes no bootstrap interval, so no uncertainty could be proposed; "
            "give --resamples 200 (the default), or --ci none to fit the model alone"
        )
    if args.sample_time is not None and not args.sample_time > 0:
        raise DataError(f"--sample-time must be positive, got {args.sample_time}")
    if args.plot and not args.plot.lower().endswith((".png", ".svg")):
        raise DataError(f"{args.plot}: the plot file must end in .png or .svg")


def run_fit(args: argparse.Namespace) -> int:
    """Fit every file, print the result, and write the plot and case if asked."""
    from robustff.fit.spread import combine_fits

    _check_args(args)
    results = _fit_files(args)
    proposals = combine_fits(results)
    time_unit = results[0].record.time_unit
    notes: list[str] = []
    if args.plot:
        from robustff.output.fit_plot import save_fit_plot

        save_fit_plot(results, args.plot, time_unit)
    if args.case_out:
        from robustff.fit.write_case import write_fitted_case

        nominal = _nominal_model(results, proposals)
        notes = write_fitted_case(args.template, args.case_out, args.block, nominal, proposals,
                                  time_unit)
        notes.append(_written_note(args.case_out, args.block, proposals))
    if len(results) == 1 and any(proposal.has_spread for proposal in proposals.values()):
        notes.append(
            "one test only: the proposed spread is the statistical error of this fit, not the "
            "drift of the plant between operating points; widen it from experience or fit tests "
            "taken at other throughputs"
        )
    if args.json:
        print(json.dumps(result_json(results, proposals, notes), indent=2))
    else:
        print(_human(results, proposals, notes))
    return 0


def _written_note(path: str, block: str, proposals: dict[str, Any]) -> str:
    """What the fitted case holds: the model block, and which parameters got an uncertainty."""
    spread = [name for name, proposal in proposals.items() if proposal.has_spread]
    certain = [name for name, proposal in proposals.items() if not proposal.has_spread]
    if not spread:
        return (f"wrote {path} ([{block}] only: no [uncertainty] entries for it, the fit gives "
                "no spread; add the uncertainty by hand before a study)")
    text = f"wrote {path} ([{block}] and [uncertainty] entries for {', '.join(spread)}"
    if certain:
        text += f"; {', '.join(certain)} left certain: the fit gives no spread for them"
    return text + ")"


def _nominal_model(results: list[Any], proposals: dict[str, Any]) -> Any:
    from dataclasses import replace

    model = results[0].model
    return replace(model, **{name: proposal.value for name, proposal in proposals.items()})


def _number(value: float) -> float | None:
    return float(f"{value:.6g}") if math.isfinite(value) else None


def _estimates_json(result: Any) -> dict[str, Any]:
    out: dict[str, Any] = {}
    for name, est in result.estimates.items():
        ci = None if est.ci95 is None else [_number(est.ci95[0]), _number(est.ci95[1])]
        out[name] = {"value": _number(est.value), "ci95": ci}
    return out


def result_json(results: list[Any], proposals: dict[str, Any], notes: list[str]) -> dict[str, Any]:
    """The JSON document printed by ``--json`` (times in the data's time unit)."""
    first = results[0]
    out: dict[str, Any] = {"model": first.model.kind}
    if len(results) == 1:
        out.update(_estimates_json(first))
    else:
        for name, proposal in proposals.items():
            cis = [r.estimates[name].ci95 or (r.estimates[name].value,) * 2 for r in results]
            out[name] = {"value": _number(proposal.value),
                         "ci95": [_number(min(c[0] for c in cis)), _number(max(c[1] for c in cis))]}
    for name, proposal in proposals.items():
        out[name]["uncertainty"] = proposal.to_dict()
    warnings = [w for r in results for w in r.warnings]
    poor_fit = [w for r in results for w in r.poor_fit]
    out.update({
        "time_unit": first.record.time_unit, "method": first.method, "ci_method": first.ci_method,
        "rmse": _number(max(r.rmse for r in results)),
        "files": [{"path": r.record.source, "rmse": _number(r.rmse),
                   "sample_time": _number(r.record.sample_time),
                   "input_baseline": _number(r.input_baseline),
                   "output_baseline": _number(r.output_baseline), **_estimates_json(r)}
                  for r in results],
        "warnings": warnings, "poor_fit": poor_fit, "notes": notes,
    })
    return out


def _human(results: list[Any], proposals: dict[str, Any], notes: list[str]) -> str:
    from robustff.fit.result import describe_fit, fit_units

    unit = results[0].record.time_unit or "time units"
    lines = []
    for r in results:
        units = fit_units(r)
        lines.append(f"{r.record.source}: {describe_fit(r)}")
        lines.append(f"  method {r.method}, 95 % intervals by {r.ci_method}, "
                     f"RMSE {r.rmse:.4g} {units['output']}, sample time "
                     f"{r.record.sample_time:g} {units['time']}")
        for name, est in r.estimates.items():
            ci = "" if est.ci95 is None else f"   95 % CI [{est.ci95[0]:.4g}, {est.ci95[1]:.4g}]"
            lines.append(f"  {name:<16}{est.value:>12.4g}{ci}   {units[name]}")
    lines.append(f"Proposed uncertainty ({len(results)} file(s), times in {unit}):")
    for name, proposal in proposals.items():
        text = (json.dumps(proposal.to_dict()) if proposal.has_spread
                else "none: no spread from the fit (left certain)")
        lines.append(f"  {name:<16}{text}")
    for text in [w for r in results for w in r.warnings] + notes:
        lines.append(f"note: {text}")
    for text in [w for r in results for w in r.poor_fit]:
        lines.append(f"warning: {text}")
    lines.append(CAUTION)
    return "\n".join(lines)
