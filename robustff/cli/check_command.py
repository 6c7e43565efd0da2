"""``robustff check``: validate a case file and show what it describes.

Prints the title, signals, nominal models, events, uncertainty table, study settings and the
controller and feedforward designed from the nominal models. A bad case raises
:class:`~robustff.errors.CaseError`, which the command line prints (exit status 2).
"""

from __future__ import annotations

import argparse
import json
from typing import TYPE_CHECKING, Any

from robustff import CAUTION
from robustff.case import Case, load_case
from robustff.case.text import printable_title
from robustff.errors import CaseError

if TYPE_CHECKING:
    from robustff.design.case_review import CaseReview

__all__ = ["register", "run_check", "check_lines", "check_json", "parameter_unit", "refuse_errors",
           "warning_lines"]


def register(subparsers: Any) -> None:
    """Add the ``check`` sub-command."""
    parser = subparsers.add_parser(
        "check",
        help="validate a case file and show its models, uncertainty and designed controller",
        description="Read a case file, report every problem in it (exit status 2), or print the "
        "nominal models, the uncertainty table, the study settings and the controller and "
        "feedforward designed from the nominal models (exit status 0).",
    )
    parser.add_argument("case", metavar="CASE.toml", help="the case file")
    parser.add_argument("--json", action="store_true",
                        help="print the nominal path models (and a balance plant's steady "
                        "state) as JSON instead of the text summary")
    parser.set_defaults(func=run_check)


def run_check(args: argparse.Namespace) -> int:
    """Validate ``args.case`` and print its summary; returns the exit status.

    A case that cannot run raises :class:`~robustff.errors.CaseError` (exit status 2); one that
    runs but looks wrong prints ``warning:`` lines and exits 0.
    """
    case = load_case(args.case)
    review = refuse_errors(case)
    if getattr(args, "json", False):
        print(json.dumps(check_json(case, review), indent=2))
        return 0
    for line in check_lines(case, review):
        print(line)
    return 0


def check_json(case: Case, review: CaseReview) -> dict[str, object]:
    """What ``robustff check --json`` prints: the path models with units (``process`` and
    each disturbance with ``gain``, ``time_constant``, ``dead_time``), a balance plant's steady
    state, the warnings and the caution."""
    from robustff.design.path_models import path_summary, steady_state
    from robustff.jsonvalues import json_safe

    paths = path_summary(case)
    result: dict[str, object] = {
        "case": case.title, "file": str(case.source_path) if case.source_path else None,
        "time_unit": case.time_unit,
        "plant": case.balance.kind if case.balance is not None else "transfer-function",
    }
    if case.balance is not None:
        result["steady_state"] = steady_state(case)
    result["process"] = paths.pop("process")
    result["disturbances"] = paths
    result["warnings"] = [finding.text() for finding in review.warnings]
    result["caution"] = CAUTION
    return json_safe(result)  # type: ignore[return-value]


def refuse_errors(case: Case) -> CaseReview:
    """The case review; raises CaseError (one line per problem, naming the key) if it cannot run."""
    from robustff.design.case_review import review_case

    review = review_case(case)
    if review.errors:
        where = f"{case.source_path}: " if case.source_path is not None else ""
        raise CaseError([f"{where}{finding.text()}" for finding in review.errors])
    return review


def warning_lines(review: CaseReview) -> list[str]:
    """``warning: key: message`` lines of a case review."""
    return [f"warning: {finding.text()}" for finding in review.warnings]


def check_lines(case: Case, review: CaseReview | None = None) -> list[str]:
    """The summary printed by ``robustff check``, one string per line."""
    if review is None:
        review = refuse_errors(case)
    lines = [f"Case: {printable_title(case.title)}", f"Time unit: {case.time_unit}"]
    if case.source_path is not None:
        lines.insert(1, f"File: {case.source_path}")
    lines += _signal_lines(case) + _model_lines(case) + _installed_lines(case)
    lines += _event_lines(case)
    lines += _uncertainty_lines(case) + _study_lines(case) + _design_lines(case, review)
    warnings = warning_lines(review)
    verdict = (f"OK: the case is valid and runs ({len(warnings)} warning"
               f"{'' if len(warnings) == 1 else 's'} above)." if warnings
               else "OK: the case is valid.")
    if warnings:
        lines += ["", *warnings]
    lines += ["", verdict, CAUTION]
    return lines


def _signal_lines(case: Case) -> list[str]:
    s = case.signals
    return [
        "",
        "Signals:",
        f"  controlled variable:  {s.controlled.label()}",
        f"  controller output:    {s.output.label()}",
        *([] if case.disturbances else [f"  measured disturbance: {s.disturbance.label()}"]),
    ]


def parameter_unit(case: Case, key: str) -> str:
    """Engineering unit of a plant parameter such as ``"process.gain"``."""
    return case.parameter_unit(key)


def _model_lines(case: Case) -> list[str]:
    if case.balance is not None:
        return _balance_lines(case)
    s, unit = case.signals, case.time_unit
    sensor = case.sensor
    if case.disturbances:
        return ["", "Nominal models:",
                f"  process ({s.output.name} -> {s.controlled.name}): "
                f"{case.process.describe(unit)}; gain in {parameter_unit(case, 'process.gain')}",
                *_disturbance_lines(case)]
    return [
        "",
        "Nominal models:",
        f"  process     ({s.output.name} -> {s.controlled.name}): {case.process.describe(unit)}"
        f"; gain in {parameter_unit(case, 'process.gain')}",
        f"  disturbance ({s.disturbance.name} -> {s.controlled.name}): "
        f"{case.disturbance.describe(unit)}; gain in {parameter_unit(case, 'disturbance.gain')}",
        f"  sensor of the disturbance: time constant {sensor.time_constant:g} {unit}, "
        f"noise std {sensor.noise_std:g} {s.disturbance.unit}".rstrip(),
    ]


def _disturbance_lines(case: Case) -> list[str]:
    """Each named disturbance: its path, and its transmitter or that it is not measured."""
    unit, lines = case.time_unit, []
    for item in case.disturbance_inputs:
        lines.append(f"  disturbance {item.name} [{item.unit or 'no unit given'}] -> "
                     f"{case.signals.controlled.name}: {item.model.describe(unit)}; gain in "
                     f"{parameter_unit(case, item.key_prefix + '.gain')}")
        if item.measured:
            lines.append(f"    measured: transmitter time constant "
                         f"{item.sensor.time_constant:g} {unit}, noise std "
                         f"{item.sensor.noise_std:g} {item.unit}".rstrip())
        else:
            lines.append("    not measured (no feedforward: feedback alone handles it)")
    return lines


def _balance_lines(case: Case) -> list[str]:
    """A balance plant: its parameters, the steady state and the linearised paths there."""
    from robustff.design.path_models import path_summary, steady_state

    assert case.balance is not None
    plant, unit = case.balance.plant, case.time_unit
    lines = ["", f"Plant from balances ({plant.KIND}):"]
    for parameter in plant.PARAMETERS:
        lines.append(f"  {parameter.name} = {getattr(plant, parameter.name):.6g} "
                     f"{parameter.unit_text(unit)} ({parameter.meaning})")
    measured = ", ".join(case.balance.measured) or "none"
    lines += [f"  measured by the feedforward: {measured}", "",
              "Steady state at the nominal operating point:"]
    for name, row in steady_state(case).items():
        lines.append(f"  {name} = {row['value']:.6g} {row['unit']} ({row['meaning']})")
    lines += ["", "Nominal models: linearised at the nominal operating point (what a small bump "
              "test there would give):"]
    for path, entry in path_summary(case).items():
        lines.append(f"  {path:<18} gain {entry['gain']:.5g} {entry['gain_unit']}, time constant "
                     f"{entry['time_constant']:.4g} {unit}, dead time {entry['dead_time']:.4g} "
                     f"{unit}")
    if case.sensor.time_constant > 0.0:
        lines.append(f"  transmitters of the measured inputs: time constant "
                     f"{case.sensor.time_constant:g} {unit}")
    return lines


def _installed_lines(case: Case) -> list[str]:
    from robustff.design.installed_loop import installed_loop_lines
    from robustff.design.tuning import design_loop
    from robustff.errors import DesignError

    try:
        return installed_loop_lines(case, design_loop(case))
    except DesignError:
        return []  # the design's problem is reported with the design


def _event_lines(case: Case) -> list[str]:
    unit, s = case.time_unit, case.signals
    sim = case.simulation
    internal = (f", plant in {sim.substeps} internal steps per scan" if sim.substeps > 1 else "")
    lines = ["", f"Simulation: {sim.duration:g} {unit} window, controller scan period "
             f"{sim.step:g} {unit} ({sim.n_steps} scans{internal})", "Events:"]
    for event in case.events:
        moved = case.disturbance_named(event.disturbance)
        size_unit = (s.controlled.unit if event.kind == "setpoint-step"
                     else moved.unit if case.disturbances else s.disturbance.unit)
        text = f"  at {event.at:g} {unit}: {event.kind}, size {event.size:g} {size_unit}".rstrip()
        if case.disturbances and event.kind != "setpoint-step":
            text += f" (disturbance {moved.name})"
        if event.kind == "disturbance-ramp":
            text += f" over {event.duration:g} {unit}"
        if event.kind == "disturbance-noise":
            text += f" (standard deviation), filter time constant {event.time_constant:g} {unit}"
        if event.record is not None:
            text = (f"  from {event.at:g} {unit}: {event.kind}, {event.record.spec.file} "
                    f"('{event.record.spec.value_column}', {event.record.length:g} {unit}, "
                    f"largest deviation {f'{event.size:g} {size_unit}'.rstrip()})")
        lines.append(text)
    return lines


def _uncertainty_lines(case: Case) -> list[str]:
    from robustff.case.sampling import describe_distribution

    if not case.uncertainty:
        return ["", "Uncertainty: none (every sample is the nominal plant)"]
    rows = []
    for parameter in case.uncertainty:
        nominal = case.nominal_value(parameter.key)
        unit = parameter_unit(case, parameter.key)
        rows.append((parameter.key, describe_distribution(parameter, nominal, unit),
                     f"{nominal:g} {unit}".rstrip()))
    widths = [max(len(row[i]) for row in rows + [("parameter", "distribution", "nominal")])
              for i in range(3)]
    header = ("parameter", "distribution", "nominal")
    lines = ["", f"Uncertainty ({len(rows)} parameters):"]
    for row in [header, *rows]:
        cells = (cell.ljust(width) for cell, width in zip(row, widths, strict=True))
        lines.append(("  " + "  ".join(cells)).rstrip())
    for correlation in case.correlations:
        lines.append(f"  rank correlation {correlation.first} ~ {correlation.second}: "
                     f"{correlation.rank_correlation:g}")
    return lines


def _study_lines(case: Case) -> list[str]:
    study = case.study
    return ["", f"Study: {study.samples} samples, {study.sampling} sampling, seed {study.seed}"]


def _design_lines(case: Case, review: CaseReview) -> list[str]:
    from robustff.design.case_review import margin_line

    summary = ["  " + line for line in review.design.summary_lines(case)]
    if review.nominal_margins is not None:
        scan = f"as simulated, {case.simulation.step:g} {case.time_unit} scan period"
        summary.append("  " + margin_line(review.nominal_margins, case.time_unit, scan))
    if review.nominal_continuous_margins is not None:
        summary.append("  " + margin_line(review.nominal_continuous_margins, case.time_unit,
                                          "continuous controller"))
    return ["", "Design from the nominal models:", *summary]
