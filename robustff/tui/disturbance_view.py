"""What the results show per disturbance: the compensators, where in frequency feedforward
helps, and the recorded traces (plain Python, no Textual; built in the worker thread).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:
    from robustff.case import Case
    from robustff.study import StudyResult

__all__ = ["FrequencyView", "RecordView", "compensator_lines", "frequency_views",
           "record_views", "setpoint_profile"]


@dataclass(frozen=True)
class FrequencyView:
    """The error ratio of one measured disturbance over frequency, across the plants.

    Attributes
    ----------
    disturbance : str
        Its name (``"disturbance"`` for the single one).
    omega : ndarray, shape (F,)
        Angular frequencies, rad per time unit.
    bands : dict of str to ndarray, shape (F,)
        ``"p5"``, ``"p50"``, ``"p95"`` of the ratio, dimensionless.
    crossover : float or None
        Highest frequency up to which feedforward helps in 90 % of the plants, rad per time
        unit; None when it helps at no frequency.
    words : str
        The crossover (and a record's Welch variance share) in words, as ``summary.json``.
    """

    disturbance: str
    omega: np.ndarray
    bands: dict[str, np.ndarray]
    crossover: float | None
    words: str


@dataclass(frozen=True)
class RecordView:
    """A recorded disturbance trace as replayed.

    Attributes
    ----------
    title : str
        The file and the disturbance it moves.
    times : ndarray, shape (M,)
        Simulated time of each row (the event's start plus the record's time), time units.
    values : ndarray, shape (M,)
        Deviation from the record's baseline, disturbance units.
    unit : str
        The disturbance's unit.
    """

    title: str
    times: np.ndarray
    values: np.ndarray
    unit: str


def compensator_lines(result: StudyResult) -> tuple[str, ...]:
    """With named disturbances, one line per disturbance's compensator: the feedforward lines
    of the design summary (the same words as the editor's design and ``robustff check``)."""
    case = result.case
    if not case.disturbances:
        return ()
    lines = [line for line in result.design.summary_lines(case)
             if line.startswith("Feedforward") or "compensators' outputs add" in line]
    return ("Compensators, from the nominal models:", *lines)


def frequency_views(result: StudyResult) -> tuple[FrequencyView, ...]:
    """The error-ratio bands of every measured disturbance (none without feedforward)."""
    from robustff.study.frequency import frequency_summary
    from robustff.study.summary import study_frequencies

    if not any(item.measured for item in result.case.disturbance_inputs):
        return ()
    return tuple(
        FrequencyView(found.disturbance, found.omega, found.bands, found.crossover,
                      frequency_summary(found, result.case)["words"])
        for found in study_frequencies(result))


def record_views(case: Case) -> tuple[RecordView, ...]:
    """Every ``disturbance-record`` event's trace, in event order."""
    views = []
    for event in case.events:
        record = event.record
        if record is None:
            continue
        item = case.disturbance_named(event.disturbance)
        unit = item.unit or case.signals.disturbance.unit
        baseline = "its first value" if record.spec.baseline == "first" else "its mean"
        title = (f"{item.label} record {record.spec.file} "
                 f"(deviation from {baseline}{', ' + unit if unit else ''})")
        views.append(RecordView(title, event.at + np.asarray(record.times, dtype=float),
                                np.asarray(record.values, dtype=float), unit))
    return tuple(views)


def setpoint_profile(case: Case, times: np.ndarray) -> np.ndarray:
    """The setpoint at ``times`` as a deviation from its start (the sum of the setpoint steps
    made by then), CV units, shape like ``times``."""
    profile = np.zeros(np.shape(times))
    for event in case.events:
        if event.kind == "setpoint-step":
            profile += np.where(np.asarray(times) >= event.at, event.size, 0.0)
    return profile
