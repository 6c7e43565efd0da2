"""Recorded disturbance traces: a historian export replayed through the disturbance path.

A ``kind = "disturbance-record"`` event names a CSV file (relative to the case file), its time
and value columns, the time unit of a numeric time column and the baseline the trace is taken
from. :func:`read_disturbance_record` reads it with the one historian reader
(:func:`robustff.case.table.read_columns`), converts the times to the case's time unit, bridges
gaps and returns the deviation trace; :func:`record_profile` puts it on the simulation's
internal step grid. Both return notes for the engineer about what was assumed.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from robustff.case.table import read_columns
from robustff.errors import DataError

__all__ = ["RECORD_BASELINES", "RECORD_GAPS", "SECONDS_PER_UNIT", "RecordSpec",
           "DisturbanceRecord", "read_disturbance_record", "record_profile",
           "record_window_note"]

#: What the trace is a deviation from: its first value or its mean over the record.
RECORD_BASELINES: tuple[str, ...] = ("first", "mean")
#: How missing values are bridged: straight line between neighbours, or the last value held.
RECORD_GAPS: tuple[str, ...] = ("interpolate", "hold")
#: Seconds in one time unit of a case or record.
SECONDS_PER_UNIT: dict[str, float] = {"s": 1.0, "min": 60.0, "h": 3600.0}
#: A time step this many times the median step counts as a gap in the record (for the notes).
_GAP_FACTOR = 3.0


@dataclass(frozen=True)
class RecordSpec:
    """The record keys of a ``disturbance-record`` event, as written in the case file.

    Parameters
    ----------
    file : str
        CSV path as written (relative to the case file's folder, or absolute).
    time_column, value_column : str
        Column names in the file.
    time_unit : str or None
        Unit of a numeric time column (``"s"``, ``"min"``, ``"h"``); None: the case's. Ignored
        for timestamps (they are read as seconds).
    baseline : {"first", "mean"}
        The trace replayed is the value minus its first value or minus its mean.
    gaps : {"interpolate", "hold"}
        Missing values bridged by a straight line or by holding the last value.
    """

    file: str
    time_column: str
    value_column: str
    time_unit: str | None = None
    baseline: str = "first"
    gaps: str = "interpolate"


@dataclass(frozen=True)
class DisturbanceRecord:
    """A record read and ready to replay.

    Parameters
    ----------
    spec : RecordSpec
    path : Path
        The file read.
    times : ndarray, shape (M,)
        Time since the first row, case time units, increasing.
    values : ndarray, shape (M,)
        Deviation from the baseline, disturbance units, gaps already bridged.
    baseline_value : float
        The value subtracted (the first value or the mean), disturbance units.
    notes : tuple of str
        What was detected or bridged.
    """

    spec: RecordSpec
    path: Path
    times: np.ndarray = field(compare=False, repr=False)
    values: np.ndarray = field(compare=False, repr=False)
    baseline_value: float = 0.0
    notes: tuple[str, ...] = ()

    @property
    def folder(self) -> Path | None:
        """The folder a relative ``spec.file`` was read from (None for an absolute one)."""
        if Path(self.spec.file).is_absolute():
            return None
        return self.path.parents[len(Path(self.spec.file).parts) - 1]  # path = folder / file

    @property
    def length(self) -> float:
        """Time from the first to the last row, case time units."""
        return float(self.times[-1] - self.times[0])

    @property
    def largest_deviation(self) -> float:
        """The deviation of largest magnitude (with its sign), disturbance units."""
        return float(self.values[int(np.argmax(np.abs(self.values)))])


def _bridge(values: np.ndarray, times: np.ndarray, gaps: str) -> np.ndarray:
    """Missing values (NaN) replaced by linear interpolation or the last valid value."""
    valid = ~np.isnan(values)
    if gaps == "interpolate":
        return np.interp(times, times[valid], values[valid])
    last = np.maximum.accumulate(np.where(valid, np.arange(values.size), 0))
    return values[last]


def _gap_notes(name: str, times: np.ndarray, missing: np.ndarray, gaps: str,
               unit: str) -> list[str]:
    """One note per run of missing values and per long interval between rows."""
    how = "interpolated linearly" if gaps == "interpolate" else "last value held"
    notes = []
    edges = np.flatnonzero(np.diff(np.concatenate(([0], missing.astype(np.int8), [0]))))
    for begin, end in zip(edges[::2], edges[1::2], strict=True):
        notes.append(f"{name}: {end - begin} missing value(s) from {times[begin]:g} to "
                     f"{times[end - 1]:g} {unit} after the record's start; {how}")
    steps = np.diff(times)
    if steps.size >= 2:
        typical = float(np.median(steps))
        for k in np.flatnonzero(steps > _GAP_FACTOR * typical)[:5]:
            notes.append(f"{name}: no rows from {times[k]:g} to {times[k + 1]:g} {unit} (rows are "
                         f"{typical:g} {unit} apart elsewhere); {how}")
    return notes


def read_disturbance_record(spec: RecordSpec, base_dir: Path, case_time_unit: str
                            ) -> DisturbanceRecord:
    """Read a recorded disturbance trace.

    Parameters
    ----------
    spec : RecordSpec
    base_dir : Path
        Folder a relative ``spec.file`` is taken from (the case file's).
    case_time_unit : str
        The case's time unit; record times are converted to it.

    Returns
    -------
    DisturbanceRecord

    Raises
    ------
    DataError
        The file cannot be read, a column is missing or holds a bad cell, fewer than two rows
        have both a time and a value, or the times do not increase.
    """
    path = Path(spec.file)
    if not path.is_absolute():
        path = base_dir / path
    columns = read_columns(path, [spec.value_column], time_column=spec.time_column)
    raw_times = columns.values[spec.time_column]
    values = columns.values[spec.value_column]
    notes = list(columns.notes)
    source_unit = "s" if columns.dated else (spec.time_unit or case_time_unit)
    keep = ~np.isnan(raw_times)
    if not np.all(keep):
        notes.append(f"{path.name}: {int(np.sum(~keep))} row(s) without a time left out")
    lines = columns.line_numbers[keep]
    times = raw_times[keep] * (SECONDS_PER_UNIT[source_unit] / SECONDS_PER_UNIT[case_time_unit])
    values = values[keep]
    if times.size and not np.all(np.diff(times) > 0):
        k = int(np.argmax(np.diff(times) <= 0)) + 1
        raise DataError(f"{path}, line {lines[k]}: column '{spec.time_column}' does not increase "
                        "(each row must be later than the one before)")
    missing = np.isnan(values)
    if times.size - int(np.sum(missing)) < 2:
        raise DataError(f"{path}: fewer than two rows have both a time and a value in "
                        f"'{spec.value_column}'; a record needs at least two")
    times = times - times[0]
    notes += _gap_notes(path.name, times, missing, spec.gaps, case_time_unit)
    first_valid = int(np.argmax(~missing))
    if first_valid > 0:
        notes.append(f"{path.name}: the first {first_valid} value(s) are missing; the first "
                     "value read is used before it")
    values = _bridge(values, times, spec.gaps)
    if first_valid > 0:
        values[:first_valid] = values[first_valid]
    base = float(values[0]) if spec.baseline == "first" else float(_time_mean(times, values))
    return DisturbanceRecord(spec, path, times, values - base, base, tuple(notes))


def _time_mean(times: np.ndarray, values: np.ndarray) -> float:
    """Time average of a piecewise-linear trace (rows need not be equally spaced)."""
    return float(np.trapezoid(values, times) / (times[-1] - times[0]))


def record_profile(record: DisturbanceRecord, grid: np.ndarray, at: float) -> np.ndarray:
    """The record on a time grid, starting at ``at``.

    Parameters
    ----------
    record : DisturbanceRecord
    grid : ndarray, shape (n,)
        Times of the simulation's internal steps, case time units.
    at : float
        When the record's first row is placed in the window, case time units.

    Returns
    -------
    ndarray, shape (n,)
        Zero before ``at``, the record interpolated linearly between rows, and its last
        deviation held after its end; disturbance units.
    """
    local = grid - at
    profile = np.interp(local, record.times, record.values, left=0.0, right=record.values[-1])
    profile[local < 0.0] = 0.0
    return profile


def record_window_note(record: DisturbanceRecord, at: float, duration: float, step: float,
                       unit: str) -> str | None:
    """What happens where the window and the record do not end together (None if they do).

    Parameters
    ----------
    record : DisturbanceRecord
    at : float
        Start of the record in the window, case time units.
    duration : float
        The simulated window, case time units (its last scan is at ``duration - step``).
    step : float
        The scan period, case time units: a window ending within one scan after the record is
        taken as covering it.
    unit : str
        The case's time unit, for the text.
    """
    end = at + record.length
    tolerance = 1e-9 * max(abs(end), 1.0)
    if duration > end + step + tolerance:
        return (f"{record.path.name}: the window ({duration:g} {unit}) runs past the record's "
                f"end at {end:g} {unit}; its last deviation ({record.values[-1]:g}) is held")
    if duration < end - tolerance:
        return (f"{record.path.name}: the window ends at {duration:g} {unit}, before the record "
                f"(its end at {end:g} {unit}); the rest of the record is not replayed")
    return None
