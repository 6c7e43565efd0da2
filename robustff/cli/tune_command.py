"""``robustff tune``: feedforward settings that stay good across the uncertainty of a case."""

from __future__ import annotations

import argparse
import json
import math
import sys
import textwrap
import time
from dataclasses import replace
from pathlib import Path

from robustff import CAUTION
from robustff.cli.arguments import positive_int, sample_count, seed_value
from robustff.cli.exit_codes import EXIT_OK
from robustff.errors import CaseError
from robustff.jsonvalues import json_float

__all__ = ["register", "execute", "result_to_dict", "robust_case"]

_OBJECTIVE_TITLES = {
    "p90": "P{p:g} of IAE with feedforward",
    "cvar": "CVaR{a:g} of IAE with feedforward (mean of the worst {w:g} %)",
    "harm": "probability that feedforward is worse (IAE), with a median improvement",
}


def register(subparsers: argparse._SubParsersAction) -> None:
    parser = subparsers.add_parser(
        "tune", help="search robust feedforward settings and write them to a case file",
        description="Search the feedforward gain factor, lead, lag and delay that minimise a "
                    "risk-aware objective over the uncertainty of CASE, re-check the result on "
                    "fresh samples, and write a case file with the chosen settings.",
    )
    parser.add_argument("case", metavar="CASE.toml", help="case file")
    parser.add_argument("--objective", choices=("p90", "cvar", "harm"), default="p90",
                        help="p90: 90th percentile of IAE (default); cvar: mean of the worst "
                             "10 %% of IAE; harm: probability that feedforward is worse")
    parser.add_argument("--samples", type=sample_count,
                        help="perturbed plants per sample set (default: the case's)")
    parser.add_argument("--seed", type=seed_value,
                        help="seed of the optimisation samples (default: the case's); the "
                             "fresh re-check uses seed + 1")
    parser.add_argument("--jobs", type=positive_int, help="threads (default: all cores)")
    parser.add_argument("--out", metavar="DIR",
                        help="folder for the tuned case file (default: results/<case name>-tune)")
    parser.add_argument("--sobol", nargs="?", const=512, type=positive_int, metavar="N",
                        help="also compute first-order and total Sobol indices of the IAE ratio "
                             "(base sample size N, default 512; N x (parameters + 2) plants)")
    parser.add_argument("--json", action="store_true",
                        help="print one JSON object instead of the tables")
    parser.set_defaults(func=execute)


def _design_dict(settings, figures: dict) -> dict:
    return {
        "structure": settings.structure, "gain": settings.gain,
        "gain_factor": settings.gain_factor, "lead": settings.lead, "lag": settings.lag,
        "delay": settings.delay,
        "objective_value": json_float(figures["optimisation"].objective),
        "objective_fresh": json_float(figures["fresh"].objective),
        "optimisation": figures["optimisation"].to_dict(),
        "fresh": figures["fresh"].to_dict(),
    }


def result_to_dict(result, case_file: Path | None = None) -> dict:
    """The JSON object of ``robustff tune --json`` (one key per design, null rule when none)."""
    return {
        "objective": result.objective,
        "nominal": _design_dict(result.nominal, result.figures["nominal"]),
        "robust": _design_dict(result.robust, result.figures["robust"]),
        "rule": (_design_dict(result.rule, result.figures["rule"])
                 if result.rule is not None else None),
        "feedback_only_iae": {label: {"p50": json_float(p50), "p90": json_float(p90)}
                              for label, (p50, p90) in result.feedback_iae.items()},
        "searched": {name: [float(lo), float(hi)] for name, lo, hi in
                     zip(result.space.names, result.space.low, result.space.high, strict=True)},
        "samples": result.samples, "seed": result.seed, "fresh_seed": result.fresh_seed,
        "evaluations": result.evaluations,
        "screening": {"samples": result.screened, "evaluations": result.screening_evaluations},
        "excluded_unstable_feedback": result.excluded,
        "optimiser": result.message,
        "recommended": result.recommended,
        "verdict": result.verdict.to_dict(),
        "improvement_interval90": [json_float(v) for v in result.improvement_interval],
        "sensitivity": [row.to_dict() for row in result.sensitivity],
        "case_file": str(case_file) if case_file is not None else None,
        "caution": CAUTION,
    }


def robust_case(case, result):
    """The case with the recommended feedforward settings written into ``[feedforward]``
    (with several disturbances into ``[feedforward.NAME]`` of the tuned one, the headline).

    That is the search's winner when the verdict recommends it, else the nominal settings
    (written explicitly); None when the verdict recommends neither design.
    """
    chosen = result.recommended_settings
    if chosen is None:
        return None
    searched = {name: getattr(chosen, name) for name in result.space.names}
    if len(case.disturbance_inputs) > 1:
        item = case.headline_input
        tuned = replace(case.feedforward_of(item), **searched)
        return case.with_disturbance_input(item.name, replace(item, feedforward=tuned))
    return replace(case, feedforward=replace(case.feedforward, **searched))


def _objective_title(args: argparse.Namespace) -> str:
    return _OBJECTIVE_TITLES[args.objective].format(p=90.0, a=0.9, w=10.0)


def _print_table(result, unit: str, iae: str) -> None:
    header = ["design", "gain factor", f"lead [{unit}]", f"lag [{unit}]", f"delay [{unit}]",
              "objective (optim.)", "objective (fresh)", f"P50 IAE [{iae}]", f"P90 IAE [{iae}]",
              "P(harm) [%]"]
    rows = [header]
    for name in ("nominal", "rule", "robust"):
        if name not in result.figures:
            continue
        settings = {"nominal": result.nominal, "rule": result.rule, "robust": result.robust}[name]
        fresh = result.figures[name]["fresh"]
        rows.append([
            {"nominal": "nominal ideal", "rule": "ISE lag rule", "robust": "robust optimum"}[name],
            f"{settings.gain_factor:.4g}", f"{settings.lead:.4g}", f"{settings.lag:.4g}",
            f"{settings.delay:.4g}", f"{result.figures[name]['optimisation'].objective:.4g}",
            f"{fresh.objective:.4g}", f"{fresh.iae_p50:.4g}", f"{fresh.iae_p90:.4g}",
            f"{100 * fresh.harm:.1f}",
        ])
    widths = [max(len(row[i]) for row in rows) for i in range(len(header))]
    for row in rows:
        print("  ".join(cell.ljust(w) if i == 0 else cell.rjust(w)
                        for i, (cell, w) in enumerate(zip(row, widths, strict=True))))


def _print_sensitivity(result) -> None:
    print("What drives the risk (nominal design; Spearman rank correlation, 95 % interval):")
    width = max([28, *(len(row.name) + 2 for row in result.sensitivity)])
    print(f"  {'parameter':<{width}}{'IAE ratio fbff/fb':>26}{'feedforward worse':>26}")
    for row in result.sensitivity:
        ratio = f"{row.rho:+.2f} [{row.low:+.2f}, {row.high:+.2f}]"
        harm = ("n/a" if not math.isfinite(row.rho_harm)
                else f"{row.rho_harm:+.2f} [{row.harm_low:+.2f}, {row.harm_high:+.2f}]")
        print(f"  {row.name:<{width}}{ratio:>26}{harm:>26}")


def _print_sobol(case, sobol) -> None:
    print("Sobol indices of the IAE ratio fbff/fb (nominal design; inputs taken as independent"
          + (", rank correlations ignored" if case.correlations else "") + "):")
    print(f"  {'parameter':<28}{'first order':>12}{'total':>10}")
    for name, first, total in sobol:
        print(f"  {name:<28}{first:>12.3f}{total:>10.3f}")


def _print_human(case, result, args, written: Path | None, warnings: list[str], elapsed: float,
                 sobol) -> None:
    print(case.title)
    print(f"Objective: {_objective_title(args)}; {result.samples} samples (seed {result.seed}), "
          f"re-checked on {result.samples} fresh samples (seed {result.fresh_seed}); "
          f"{result.evaluations_text}, {elapsed:.1f} s")
    tuned = (f"; the compensator of {case.headline_input.name} only, the other disturbances "
             "keep theirs" if len(case.disturbance_inputs) > 1 else "")
    print(f"Searched: {', '.join(result.space.names)} (feedback design fixed{tuned})")
    from robustff.tune.search import objective_unit

    iae = objective_unit(case, "p90")
    _print_table(result, case.time_unit, iae)
    fb50, fb90 = result.feedback_iae["fresh"]
    print(f"Feedback only (fresh samples): P50 IAE {fb50:.4g} {iae}, P90 IAE {fb90:.4g} {iae}. "
          "IAE and P(harm) columns are on the fresh samples.")
    print("The optimiser picks its winner on the optimisation samples, so 'objective (optim.)' "
          "flatters it; compare the fresh column.")
    if result.excluded:
        print(f"{result.excluded} samples are unstable with feedback alone and were left out.")
    print(textwrap.fill(result.verdict.reason, width=100))
    _print_sensitivity(result)
    if sobol is not None:
        _print_sobol(case, sobol)
    for warning in warnings:
        print(f"warning: {warning}")
    if written is None:
        print("No tuned case written: neither design meets the criteria of the case's "
              "[recommendation].")
    else:
        print(f"Tuned case written to {written}")
    print(CAUTION)


def _progress(done: int, budget: int) -> None:
    if done % 10 == 0 or done == budget:
        sys.stderr.write(f"tune: {done}/{budget} evaluations\n")
        sys.stderr.flush()


def execute(args: argparse.Namespace) -> int:
    from robustff.case import load_case, save_case
    from robustff.cli.memory_reuse import keep_large_blocks
    from robustff.tune.search import robust_search, sobol_sensitivity

    started = time.perf_counter()
    case = load_case(args.case)
    try:
        original = Path(args.case).read_text(encoding="utf-8")
    except OSError as exc:
        raise CaseError(f"{args.case}: cannot read the case file ({exc.strerror or exc})") from None
    # Beside, not inside, the run's result folder: `run` replaces that folder as a whole.
    out = Path(args.out) if args.out else Path("results") / f"{case.name}-tune"
    if out.exists() and not out.is_dir():
        raise CaseError(f"--out {out}: exists and is not a folder")
    keep_large_blocks()  # the search simulates the same chunks over and over
    result = robust_search(case, objective=args.objective, samples=args.samples, seed=args.seed,
                           jobs=args.jobs, progress=None if args.json else _progress)
    sobol = None
    if args.sobol:
        sobol = sobol_sensitivity(case, args.sobol, seed=args.seed, jobs=args.jobs)
    tuned = robust_case(case, result)
    written: Path | None = None
    warnings: list[str] = []
    if tuned is not None:
        try:
            out.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise CaseError(f"--out {out}: cannot create the folder "
                            f"({exc.strerror or exc})") from None
        written = out / f"{case.name}-robust.toml"
        warnings = save_case(tuned, written, original)
    if args.json:
        payload = result_to_dict(result, written)
        payload["warnings"] = warnings
        payload["sobol"] = (None if sobol is None else
                            [{"name": n, "first": f, "total": t} for n, f, t in sobol])
        print(json.dumps(payload, indent=2))
    else:
        _print_human(case, result, args, written, warnings, time.perf_counter() - started,
                     sobol)
    return EXIT_OK
