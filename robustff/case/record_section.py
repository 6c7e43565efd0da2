"""Reading ``disturbance-record`` events and the window they set when ``duration`` is left out."""

from __future__ import annotations

import math
from dataclasses import replace
from pathlib import Path

from robustff.case.fields import Problems, Table, join
from robustff.case.record import (
    RECORD_BASELINES,
    RECORD_GAPS,
    SECONDS_PER_UNIT,
    RecordSpec,
    read_disturbance_record,
)
from robustff.case.schema import Case, Event, SimulationSpec
from robustff.errors import DataError

__all__ = ["RECORD_KEYS", "read_record_event", "records_cover", "has_record_events",
           "records_folder", "covering_duration"]

#: Keys of a ``disturbance-record`` event.
RECORD_KEYS: tuple[str, ...] = ("kind", "at", "file", "time_column", "value_column",
                                "time_unit", "baseline", "gaps", "disturbance")


def has_record_events(raw: dict[str, object]) -> bool:
    """True if the raw case holds at least one ``disturbance-record`` event."""
    events = raw.get("event")
    return isinstance(events, list) and any(
        isinstance(item, dict) and item.get("kind") == "disturbance-record" for item in events)


def read_record_event(problems: Problems, table: Table, at: float | None,
                      base_dir: Path | None, time_unit: str | None) -> Event | None:
    """The event of a ``[[event]]`` table of kind ``disturbance-record``, its file read.

    Parameters
    ----------
    problems : Problems
    table : Table
        The event's table (its keys already checked against :data:`RECORD_KEYS`).
    at : float or None
        Its start time as read, case time units (None when refused).
    base_dir : Path or None
        Folder of the case file (relative ``file`` paths start there); None: the working folder.
    time_unit : str or None
        The case's time unit (None when refused: the file is then not read).

    Returns
    -------
    Event or None
        None when a key or the file is refused (the problem is recorded, naming the key).
    """
    before = len(problems)
    file = table.text("file")
    if file is not None and not file.strip():
        problems.add(join(table.path, "file"), "must name a CSV file", file)
    time_column = table.text("time_column")
    value_column = table.text("value_column")
    record_unit = table.text("time_unit", None, choices=tuple(SECONDS_PER_UNIT))
    baseline = table.text("baseline", "first", choices=RECORD_BASELINES)
    gaps = table.text("gaps", "interpolate", choices=RECORD_GAPS)
    if len(problems) > before or None in (file, time_column, value_column, baseline, gaps, at,
                                          time_unit):
        return None
    spec = RecordSpec(file, time_column, value_column, record_unit, baseline, gaps)  # type: ignore[arg-type]
    try:
        record = read_disturbance_record(spec, base_dir or Path.cwd(), time_unit)  # type: ignore[arg-type]
    except DataError as exc:
        problems.add(join(table.path, "file"), f"cannot be replayed: {exc}", file)
        return None
    return Event("disturbance-record", at, record.largest_deviation, record=record)  # type: ignore[arg-type]


def records_cover(problems: Problems, simulation: SimulationSpec,
                  events: tuple[Event, ...], max_steps: int, unit: str
                  ) -> SimulationSpec | None:
    """The window with ``duration`` set to cover every record, when it was left out.

    The duration becomes a whole number of scans whose last scan is at or just after the end of
    the latest record (``at`` plus its length); the same limit on internal steps as for a
    written duration applies.
    """
    if not math.isnan(simulation.duration):
        return simulation
    duration = covering_duration(events, simulation.step)
    if duration is None:  # only possible when a record was refused (the problem is listed)
        return None
    step = simulation.step
    if duration / step * simulation.substeps > max_steps:
        problems.add("simulation.duration", f"left out, so the window covers the record(s): "
                     f"{duration:g} {unit} at a step of {step:g} {unit} give "
                     f"{duration / step * simulation.substeps:,.0f} internal steps; at most "
                     f"{max_steps:,} are allowed (use a longer step, or give a shorter duration)")
        return None
    return replace(simulation, duration=duration)


def covering_duration(events: tuple[Event, ...], step: float) -> float | None:
    """The window a case gets when it leaves ``duration`` out: a whole number of scans whose
    last scan is at or just after the end of the latest record (time units); None without a
    record."""
    ends = [event.at + event.record.length for event in events if event.record is not None]
    if not ends:
        return None
    # the last scan is at duration - step: one scan past the latest record's last row
    duration = (math.floor(max(ends) / step + 1e-9) + 1) * step
    return max(duration, 2 * step)


def records_folder(case: Case) -> Path | None:
    """The folder the case's relative record files were read from, else its file's folder.

    Reading the case's text again with this ``base_dir`` finds the same record files.
    """
    for event in case.events:
        if event.record is not None and event.record.folder is not None:
            return event.record.folder
    return case.source_path.parent if case.source_path is not None else None
