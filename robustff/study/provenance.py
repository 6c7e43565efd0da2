"""What a reviewer needs to reproduce a study: the ``reproducibility`` entry of ``summary.json``.

The case file (name, path and the SHA-256 of the bytes that were read), the whole case as run
(as case-file text, with the sample count and seed actually used and any ``--designs`` set
merged in), the nominal models with units, the controller settings in the case's own terms,
the simulated window, the uncertainty table with each distribution in words, the correlations,
the sampling plan, the command line, library versions, the date and time with its time zone and
the host. The command line is given by the caller (the CLI passes ``sys.argv``); the core never
reads it.
"""

from __future__ import annotations

import datetime
import platform
import socket
from collections.abc import Sequence
from dataclasses import asdict, replace
from importlib import metadata

import numpy as np

from robustff.case import Case, Event, StudySpec, case_to_toml
from robustff.case.sampling import describe_distribution, distribution_bounds
from robustff.plant.models import MODEL_PARAMETERS
from robustff.study.runner import StudyResult
from robustff.study.summary_types import (
    CaseFile,
    CorrelationRow,
    EventRow,
    ModelParameterRow,
    NotSettled,
    Reproducibility,
    UncertaintyRow,
)

__all__ = ["reproducibility", "not_settled", "REPORTED_LIBRARIES"]

#: Libraries besides those of ``versions`` whose version is recorded (the report, plots,
#: case files and workbook depend on them).
REPORTED_LIBRARIES: tuple[str, ...] = ("matplotlib", "tomlkit", "openpyxl", "control", "pandas")

_EVENT_WORDS = {
    "disturbance-step": "step of the measured disturbance",
    "disturbance-ramp": "ramp of the measured disturbance",
    "disturbance-noise": "filtered noise on the measured disturbance",
    "setpoint-step": "setpoint step",
    "disturbance-record": "recorded trace of the measured disturbance",
}


def _case_file(case: Case) -> CaseFile | None:
    if case.source_path is None:
        return None
    path = case.source_path
    size = path.stat().st_size if path.exists() else None
    return {"name": path.name, "path": str(path), "sha256": case.source_sha256, "bytes": size}


def _library_versions() -> dict[str, str]:
    out: dict[str, str] = {}
    for name in REPORTED_LIBRARIES:
        try:
            out[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            out[name] = "not installed"
    return out


def _models(case: Case) -> list[ModelParameterRow]:
    rows: list[ModelParameterRow] = []
    blocks = [("process", case.process),
              *((item.key_prefix, item.model) for item in case.disturbance_inputs)]
    secondary = case.secondary
    if secondary is not None:  # the flow loop's path: secondary output (%) -> flow
        blocks.append(("secondary", secondary.model))
    for block, model in blocks:
        rows.append({"key": f"{block}.model", "value": model.kind, "unit": ""})
        for name in MODEL_PARAMETERS[model.kind]:
            key = f"{block}.{name}"
            rows.append({"key": key, "value": float(getattr(model, name)),
                         "unit": case.parameter_unit(key)})
    if secondary is not None:  # its PI controller, as the case gives it
        flow = case.signals.output.unit or "output unit"  # the flow is the primary's output
        units = {"closed_loop_time": case.time_unit, "kc": f"% per {flow}",
                 "ti": case.time_unit, "output_low": "%", "output_high": "%",
                 "output_bias": "%", "scans_per_primary": "-"}
        rows.append({"key": "secondary.tuning", "value": secondary.tuning, "unit": ""})
        for name, unit in units.items():
            value = getattr(secondary, name)
            if value is not None:
                rows.append({"key": f"secondary.{name}", "value": float(value), "unit": unit})
    for item in case.disturbance_inputs:
        if case.disturbances:
            rows.append({"key": f"{item.key_prefix}.measured",
                         "value": "true" if item.measured else "false", "unit": ""})
        if not item.measured:
            continue
        for name, value in asdict(item.sensor).items():
            if isinstance(value, int | float) and not isinstance(value, bool):
                key = f"{item.sensor_prefix}.{name}"
                rows.append({"key": key, "value": float(value),
                             "unit": case.parameter_unit(key)})
    if case.valve is not None:  # the installed valve, where the case has one
        for name, value in asdict(case.valve).items():
            key = f"valve.{name}"
            if isinstance(value, str):
                rows.append({"key": key, "value": value, "unit": ""})
            elif isinstance(value, int | float) and not isinstance(value, bool):
                rows.append({"key": key, "value": float(value),
                             "unit": case.parameter_unit(key)})
    return rows


def _events(case: Case) -> list[EventRow]:
    unit = case.time_unit
    rows: list[EventRow] = []
    for event in case.events:
        signal = case.signals.controlled if event.kind == "setpoint-step" else (
            case.signals.disturbance)
        size_unit = f" {signal.unit}" if signal.unit else ""
        words = (f"{_EVENT_WORDS.get(event.kind, event.kind)} at {event.at:g} {unit}, "
                 f"size {event.size:g}{size_unit}")
        if event.kind == "disturbance-ramp":
            words += f" over {event.duration:g} {unit}"
        if event.kind == "disturbance-noise":
            words += f" (standard deviation), filter time constant {event.time_constant:g} {unit}"
        if event.record is not None:
            words = _record_words(event, unit, size_unit)
        rows.append({"kind": event.kind, "at": event.at, "size": event.size,
                     "duration": event.duration, "time_constant": event.time_constant,
                     "words": words})
    return rows


def _record_words(event: Event, unit: str, size_unit: str) -> str:
    """A replayed record in words: its file, columns, baseline, length and largest deviation."""
    record = event.record
    assert record is not None
    spec = record.spec
    return (f"{_EVENT_WORDS[event.kind]} from {event.at:g} {unit}: file {spec.file}, column "
            f"'{spec.value_column}' over '{spec.time_column}', {record.length:g} {unit} long, "
            f"deviation from its {spec.baseline} value ({record.baseline_value:g}{size_unit}), "
            f"gaps {'interpolated' if spec.gaps == 'interpolate' else 'held'}; largest deviation "
            f"{event.size:g}{size_unit}")


def _uncertainty(case: Case) -> list[UncertaintyRow]:
    rows: list[UncertaintyRow] = []
    for parameter in case.uncertainty:
        nominal, unit = case.nominal_value(parameter.key), case.parameter_unit(parameter.key)
        low, high = distribution_bounds(parameter, nominal)
        distribution = parameter.distribution
        rows.append({
            "key": parameter.key, "unit": unit, "nominal": nominal,
            "kind": distribution.kind, "params": list(distribution.params),
            "clip": list(distribution.clip) if distribution.clip is not None else None,
            "words": describe_distribution(parameter, nominal, unit),
            "low": float(low), "high": float(high),
        })
    return rows


def _correlations(case: Case) -> list[CorrelationRow]:
    return [{"first": c.first, "second": c.second, "rank_correlation": c.rank_correlation}
            for c in case.correlations]


def not_settled(result: StudyResult) -> NotSettled:
    """Samples still outside the settling band at the end of the window, per arm.

    The settling time of such a sample is the whole time from the last step, ramp or setpoint
    event to the end of the window (see :mod:`robustff.engine.metrics`), so the count is of
    finite settling times within half an internal step of that.
    """
    scenario = result.scenario
    duration = result.case.simulation.duration
    last = float(scenario.segment_start[-1]) if scenario.segment_start.size else 0.0
    remaining = duration - last
    tolerance = 0.5 * result.case.simulation.internal_step
    settling = result.metrics["settling_time"]
    late = np.isfinite(settling) & (settling >= remaining - tolerance)
    counts = [int(late[:, arm].sum()) for arm in (0, 1)]
    return {"fb": counts[0], "fbff": counts[1], "window_after_last_event": remaining}


def reproducibility(
    result: StudyResult,
    command_line: Sequence[str] | None = None,
    now: datetime.datetime | None = None,
) -> Reproducibility:
    """The ``reproducibility`` entry of ``summary.json``.

    Parameters
    ----------
    result : StudyResult
    command_line : sequence of str, optional
        The command as typed (``sys.argv`` from the CLI; the studio passes its own); None when
        the study was run from Python.
    now : datetime, optional
        The time stamp (default: now, in the machine's local time zone).

    Returns
    -------
    Reproducibility
    """
    case = result.case
    stamp = now if now is not None and now.tzinfo is not None else (
        (now or datetime.datetime.now()).astimezone())  # naive: the machine's local zone
    as_run = replace(case, study=StudySpec(result.requested, result.seed, case.study.sampling))
    simulation = case.simulation
    return {
        "case_file": _case_file(case),
        "case_as_run": case_to_toml(as_run),
        "command_line": list(command_line) if command_line is not None else None,
        "created": stamp.isoformat(timespec="seconds"),
        "timezone": stamp.tzname() or "",
        "host": socket.gethostname(),
        "platform": platform.platform(),
        "libraries": _library_versions(),
        "models": _models(case),
        "controller_case_form": {key: value for key, value in asdict(case.feedback).items()
                                 if value is not None},
        "events": _events(case),
        "window": {"duration": simulation.duration, "scan_period": simulation.step,
                   "substeps": simulation.substeps, "internal_step": simulation.internal_step,
                   "time_unit": case.time_unit},
        "uncertainty": _uncertainty(case),
        "correlations": _correlations(case),
        "sampling": {"plan": case.study.sampling, "seed": result.seed,
                     "samples": result.samples, "requested": result.requested},
    }
