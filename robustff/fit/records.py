"""Plant step-test records: reading a historian CSV export, cleaning it, and checking it is usable.

A record is the input (controller output or measured disturbance) and the output (controlled
variable) of one bump test on a uniform time grid. Reading never guesses silently: missing cells
drop their row with a warning, an irregular time grid is resampled with a warning, and anything
that makes the record unusable raises :class:`robustff.errors.DataError` naming the file, the
column and the bad value.
"""

from __future__ import annotations

import csv
import math
from dataclasses import dataclass, field
from datetime import datetime
from pathlib import Path

import numpy as np

from robustff.errors import DataError

__all__ = [
    "MISSING_TOKENS",
    "MIN_SAMPLES",
    "MIN_SAMPLES_AFTER_STEP",
    "StepRecord",
    "StepInfo",
    "read_record",
    "record_from_arrays",
    "locate_step",
    "check_settled",
    "noise_level",
]

#: Cell contents read as "no value" (the row is dropped with a warning).
MISSING_TOKENS = frozenset({"", "nan", "na", "n/a", "null", "none", "#n/a"})
#: Fewest samples a record may have.
MIN_SAMPLES = 20
#: Fewest samples after the input step.
MIN_SAMPLES_AFTER_STEP = 10
_IRREGULAR_TOLERANCE = 0.01  # relative spread of sample intervals accepted as uniform


@dataclass(frozen=True)
class StepRecord:
    """One test record on a uniform time grid.

    Parameters
    ----------
    times : ndarray, shape (N,)
        Sample times, data time units, uniformly spaced.
    input : ndarray, shape (N,)
        Input signal (e.g. controller output, %), absolute values.
    output : ndarray, shape (N,)
        Output signal (controlled variable), absolute values.
    source : str
        Where the record came from (file name), used in messages.
    input_name, output_name : str
        Column names.
    time_unit : str or None
        "s", "min" or "h" when known (timestamps are converted to seconds), else None.
    warnings : tuple of str
        What was done to the data while reading (rows dropped, resampling).
    """

    times: np.ndarray
    input: np.ndarray
    output: np.ndarray
    source: str = "data"
    input_name: str = "input"
    output_name: str = "output"
    time_unit: str | None = None
    warnings: tuple[str, ...] = field(default=())

    @property
    def sample_time(self) -> float:
        """Sample interval, data time units."""
        return float(self.times[1] - self.times[0])

    @property
    def size(self) -> int:
        """Number of samples N."""
        return int(self.times.shape[0])


@dataclass(frozen=True)
class StepInfo:
    """Where the input first moves and the steady state before it.

    Parameters
    ----------
    index : int
        First sample at the new input level (the input is held from this sample on).
    input_baseline, output_baseline : float
        Mean input and output before the step, signal units.
    input_change : float
        Largest input excursion from the baseline (signed), input units.
    single_step : bool
        True if the input stays near its new level to the end (a step, not a pulse or a sequence).
    """

    index: int
    input_baseline: float
    output_baseline: float
    input_change: float
    single_step: bool


def noise_level(signal: np.ndarray) -> float:
    """Robust standard deviation of white noise on a signal, from its first differences.

    Parameters
    ----------
    signal : ndarray, shape (N,)

    Returns
    -------
    float
        ``1.4826 * median|diff - median(diff)| / sqrt(2)``; insensitive to steps and slow trends.
    """
    diffs = np.diff(np.asarray(signal, dtype=float))
    if diffs.size == 0:
        return 0.0
    mad = np.median(np.abs(diffs - np.median(diffs)))
    return float(1.4826 * mad / math.sqrt(2.0))


def _find_column(header: list[str], wanted: str, path: str) -> int:
    names = [name.strip() for name in header]
    if wanted in names:
        return names.index(wanted)
    lowered = [name.lower() for name in names]
    if wanted.strip().lower() in lowered:
        return lowered.index(wanted.strip().lower())
    raise DataError(f"{path}: no column '{wanted}'; the columns are: {', '.join(names)}")


def _read_rows(path: Path) -> tuple[list[str], list[tuple[int, list[str]]]]:
    try:
        text = path.read_text(encoding="utf-8-sig")
    except FileNotFoundError:
        raise DataError(f"{path}: file not found") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise DataError(f"{path}: cannot read the file ({exc})") from None
    lines = [(number, line) for number, line in enumerate(text.splitlines(), start=1)]
    lines = [(n, line) for n, line in lines if line.strip() and not line.lstrip().startswith("#")]
    if not lines:
        raise DataError(f"{path}: the file is empty")
    try:
        dialect: type[csv.Dialect] | csv.Dialect = csv.Sniffer().sniff(lines[0][1], ",;\t")
    except csv.Error:
        dialect = csv.excel
    rows = list(csv.reader([line for _, line in lines], dialect))
    numbered = [(lines[i][0], rows[i]) for i in range(1, len(rows))]
    return rows[0], numbered


def _parse_number(cell: str) -> float | None:
    """A float, or None for a missing value; raises ValueError for anything else."""
    text = cell.strip()
    if text.lower() in MISSING_TOKENS:
        return None
    value = float(text)
    return None if math.isnan(value) else value


def _parse_time(cell: str) -> float | None:
    """A number, or an ISO timestamp converted to seconds since the epoch."""
    try:
        return _parse_number(cell)
    except ValueError:
        return datetime.fromisoformat(cell.strip()).timestamp()


def _numeric_columns(
    path: Path, columns: dict[str, str | None]
) -> tuple[dict[str, np.ndarray], list[int], bool]:
    """Parse the named columns: arrays, dropped line numbers, whether times were dates."""
    header, rows = _read_rows(path)
    index = {role: _find_column(header, name, str(path)) for role, name in columns.items() if name}
    values: dict[str, list[float]] = {role: [] for role in index}
    dropped: list[int] = []
    dated = False
    for line_number, row in rows:
        parsed: dict[str, float] = {}
        for role, col in index.items():
            cell = row[col] if col < len(row) else ""
            try:
                value = _parse_time(cell) if role == "time" else _parse_number(cell)
            except ValueError:
                raise DataError(
                    f"{path}, line {line_number}: column '{header[col].strip()}' has the "
                    f"non-numeric value '{cell.strip()}'; clean the export (blank cells are "
                    "dropped with a warning)"
                ) from None
            if value is None:
                break
            dated = dated or (role == "time" and not _is_number(cell))
            parsed[role] = value
        else:
            for role, value in parsed.items():
                values[role].append(value)
            continue
        dropped.append(line_number)
    return {role: np.asarray(v, dtype=float) for role, v in values.items()}, dropped, dated


def _is_number(cell: str) -> bool:
    try:
        float(cell)
    except ValueError:
        return False
    return True


def read_record(
    path: str | Path,
    input_column: str,
    output_column: str,
    time_column: str | None = None,
    sample_time: float | None = None,
    time_unit: str | None = None,
) -> StepRecord:
    """Read one bump-test record from a CSV file with a header row.

    Parameters
    ----------
    path : str or Path
        CSV file; comma, semicolon or tab separated; lines starting with ``#`` are ignored.
    input_column, output_column : str
        Column names (matched exactly, then ignoring case).
    time_column : str, optional
        Column of sample times: numbers in the data's time unit, or ISO timestamps (then the
        time unit is seconds). Exactly one of ``time_column`` and ``sample_time`` is needed.
    sample_time : float, optional
        Fixed sample interval, data time units; row ``i`` of the file is at ``i * sample_time``
        (rows dropped for missing values leave a gap that is interpolated).
    time_unit : str, optional
        Time unit of the data, if known.

    Returns
    -------
    StepRecord

    Raises
    ------
    DataError
        Missing file or column, non-numeric cells, too few samples, times not increasing.
    """
    path = Path(path)
    if (time_column is None) == (sample_time is None):
        raise DataError(f"{path}: give either a time column or a fixed sample time (not both)")
    if sample_time is not None and not sample_time > 0:
        raise DataError(f"{path}: the sample time must be positive, got {sample_time}")
    wanted = {"time": time_column, "input": input_column, "output": output_column}
    data, dropped, dated = _numeric_columns(path, wanted)
    warnings: list[str] = []
    if dropped:
        shown = ", ".join(str(n) for n in dropped[:8]) + (" ..." if len(dropped) > 8 else "")
        warnings.append(f"{path}: dropped {len(dropped)} rows with missing values (lines {shown})")
    if time_column is None:
        rows_kept = _kept_row_positions(path, dropped, data["input"].size)
        times = rows_kept * float(sample_time)  # type: ignore[arg-type]
    else:
        times = data["time"]
        if dated:
            time_unit = "s"
            times = times - times[0] if times.size else times
    return record_from_arrays(
        times, data["input"], data["output"], source=str(path), input_name=input_column,
        output_name=output_column, time_unit=time_unit, warnings=tuple(warnings),
    )


def _kept_row_positions(path: Path, dropped: list[int], kept: int) -> np.ndarray:
    """Row positions (0-based, data rows only) of the rows that were kept."""
    _, rows = _read_rows(path)
    gone = set(dropped)
    positions = [i for i, (line_number, _) in enumerate(rows) if line_number not in gone]
    return np.asarray(positions[:kept], dtype=float)


def record_from_arrays(
    times: np.ndarray,
    input_signal: np.ndarray,
    output_signal: np.ndarray,
    *,
    source: str = "data",
    input_name: str = "input",
    output_name: str = "output",
    time_unit: str | None = None,
    warnings: tuple[str, ...] = (),
) -> StepRecord:
    """Check arrays and put them on a uniform time grid.

    Parameters
    ----------
    times, input_signal, output_signal : array_like, shape (N,)
        Sample times (data time units, strictly increasing) and the two signals.

    Returns
    -------
    StepRecord
        Resampled by linear interpolation at the median interval if the grid is irregular
        (with a warning).

    Raises
    ------
    DataError
        Too few samples, non-finite values, times not strictly increasing.
    """
    t = np.asarray(times, dtype=float)
    u = np.asarray(input_signal, dtype=float)
    y = np.asarray(output_signal, dtype=float)
    if not (t.shape == u.shape == y.shape and t.ndim == 1):
        raise DataError(f"{source}: times, input and output must be 1-D and equally long")
    if t.size < MIN_SAMPLES:
        raise DataError(
            f"{source}: the record is too short ({t.size} usable samples; at least {MIN_SAMPLES} "
            "are needed)"
        )
    if not (np.all(np.isfinite(t)) and np.all(np.isfinite(u)) and np.all(np.isfinite(y))):
        raise DataError(f"{source}: the record holds infinite or missing values")
    steps = np.diff(t)
    if np.any(steps <= 0):
        bad = int(np.argmax(steps <= 0)) + 1
        raise DataError(
            f"{source}: times must increase; sample {bad + 1} (time {t[bad]:g}) does not come "
            f"after time {t[bad - 1]:g}"
        )
    warn = list(warnings)
    dt = float(np.median(steps))
    if np.max(np.abs(steps - dt)) > _IRREGULAR_TOLERANCE * dt:
        n = int(math.floor((t[-1] - t[0]) / dt + 1e-9)) + 1
        grid = t[0] + dt * np.arange(n)
        u, y = np.interp(grid, t, u), np.interp(grid, t, y)
        warn.append(
            f"{source}: irregular sample times (intervals {steps.min():g} to {steps.max():g}); "
            f"resampled to a uniform {dt:g} by linear interpolation"
        )
        t = grid
    else:
        t = t[0] + dt * np.arange(t.size)
    return StepRecord(t, u, y, source, input_name, output_name, time_unit, tuple(warn))


def locate_step(record: StepRecord) -> StepInfo:
    """Find the input step and the steady state before it.

    Raises
    ------
    DataError
        No step in the input, a step at the first sample (no steady state before it), too few
        samples after the step, or an output that does not respond.
    """
    u, y = record.input, record.output
    noise_u = noise_level(u)
    excursion = u - u[0]
    largest = float(np.max(np.abs(excursion)))
    threshold = max(5.0 * noise_u, 1e-9 * max(1.0, float(np.max(np.abs(u)))))
    if largest <= threshold:
        raise DataError(
            f"{record.source}: no step in the input column '{record.input_name}' (it moves by "
            f"at most {largest:.4g}, within its noise of {noise_u:.3g}); a bump test needs a clear "
            "input change"
        )
    index = int(np.argmax(np.abs(excursion) > max(threshold, 0.3 * largest)))
    if index == 0:
        raise DataError(f"{record.source}: the input changes at the first sample; the record must "
                        "start at steady state before the step")
    u0, y0 = float(np.mean(u[:index])), float(np.mean(y[:index]))
    if record.size - index < MIN_SAMPLES_AFTER_STEP:
        raise DataError(
            f"{record.source}: the record is too short after the step ({record.size - index} "
            f"samples; at least {MIN_SAMPLES_AFTER_STEP} are needed)"
        )
    change_index = int(np.argmax(np.abs(u - u0)))
    change = float(u[change_index] - u0)
    tail = u[max(index, record.size - max(3, record.size // 10)):]
    single = bool(np.all(np.abs(tail - u0 - change) < 0.2 * abs(change) + 3 * noise_u))
    _check_response(record, y0, index)
    return StepInfo(index, u0, y0, change, single)


def _check_response(record: StepRecord, output_baseline: float, index: int) -> None:
    y = record.output
    noise_y = noise_level(y)
    response = float(np.max(np.abs(y[index:] - output_baseline)))
    if response <= 4.0 * noise_y + 1e-12 * max(1.0, abs(output_baseline)):
        raise DataError(
            f"{record.source}: the output column '{record.output_name}' does not respond to the "
            f"input step (largest change {response:.4g}, noise {noise_y:.3g})"
        )


def check_settled(record: StepRecord, step: StepInfo, fraction: float = 0.25) -> None:
    """Check that a self-regulating output has settled by the end of the record.

    The last ``fraction`` of the record after the step must show no drift larger than 20 % of the
    largest output excursion plus three standard errors of the drift estimate (common practice,
    no source). Skipped when the input still moves in that window.

    Raises
    ------
    DataError
        The output is still moving at the end of the record.
    """
    start = step.index + int((1.0 - fraction) * (record.size - step.index))
    t, y, u = record.times[start:], record.output[start:], record.input[start:]
    if t.size < 5 or np.ptp(u) > 3 * noise_level(record.input) + 1e-12 * abs(step.input_change):
        return
    design = np.column_stack([t - t.mean(), np.ones_like(t)])
    coef, *_ = np.linalg.lstsq(design, y, rcond=None)
    resid = y - design @ coef
    span = float(t[-1] - t[0])
    stderr = float(np.sqrt(resid @ resid / max(1, t.size - 2) / np.sum((t - t.mean()) ** 2)))
    drift = float(coef[0]) * span
    change = float(np.mean(y) - step.output_baseline)
    # compare with the largest excursion, so a pulse test that returns to baseline passes
    excursion = float(np.max(np.abs(record.output[step.index:] - step.output_baseline)))
    if abs(drift) > 0.2 * excursion + 3.0 * stderr * span:
        raise DataError(
            f"{record.source}: the output never settles: over the last {span:g} time units it "
            f"still moves by {drift:.4g} (total change so far {change:.4g}); record longer, or "
            "fit an integrating model (--model ipdt)"
        )
