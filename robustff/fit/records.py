"""Plant step-test records: reading a historian CSV export, cleaning it, and checking it is usable.

A record is the input (controller output or measured disturbance) and the output (controlled
variable) of one bump test on a uniform time grid. Reading never guesses silently: a missing time
or input drops its row with a warning (the input is interpolated across and marked as not
measured), a missing output stays NaN and is left out of the fit, an irregular time grid is
resampled with a warning, and anything that makes the record unusable raises
:class:`robustff.errors.DataError` naming the file, the column and the bad value.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from robustff.case.table import MISSING_TOKENS, read_columns
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
    "check_output_coverage",
    "filled_output",
    "noise_level",
]

#: Fewest samples a record may have.
MIN_SAMPLES = 20
#: Fewest samples after the input step.
MIN_SAMPLES_AFTER_STEP = 10
_IRREGULAR_TOLERANCE = 0.01  # relative spread of sample intervals accepted as uniform
_MAX_MAGNITUDE = 1e100  # squares and sums over a record of any length stay finite below this


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
        Output signal (controlled variable), absolute values; NaN where it was not recorded.
    source : str
        Where the record came from (file name), used in messages.
    input_name, output_name : str
        Column names.
    time_unit : str or None
        "s", "min" or "h" when known (timestamps are converted to seconds), else None.
    warnings : tuple of str
        What was done to the data while reading (rows dropped, resampling).
    input_measured : ndarray of bool, shape (N,), optional
        False where the input was interpolated across dropped rows; None if all was measured.
    """

    times: np.ndarray
    input: np.ndarray
    output: np.ndarray
    source: str = "data"
    input_name: str = "input"
    output_name: str = "output"
    time_unit: str | None = None
    warnings: tuple[str, ...] = field(default=())
    input_measured: np.ndarray | None = None

    @property
    def output_measured(self) -> np.ndarray:
        """True where the output was recorded, shape (N,)."""
        return np.isfinite(self.output)

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
        NaN entries (gaps) are skipped.

    Returns
    -------
    float
        ``1.4826 * median|diff - median(diff)| / sqrt(2)``; insensitive to steps and slow trends.
    """
    diffs = np.diff(np.asarray(signal, dtype=float))
    diffs = diffs[np.isfinite(diffs)]  # differences across a gap in the output are unknown
    if diffs.size == 0:
        return 0.0
    mad = np.median(np.abs(diffs - np.median(diffs)))
    return float(1.4826 * mad / math.sqrt(2.0))


def read_record(
    path: str | Path,
    input_column: str,
    output_column: str,
    time_column: str | None = None,
    sample_time: float | None = None,
    time_unit: str | None = None,
    *,
    separator: str | None = None,
    decimal: str | None = None,
    time_format: str | None = None,
) -> StepRecord:
    """Read one bump-test record from a CSV file with a header row.

    Parameters
    ----------
    path : str or Path
        CSV file; comma, semicolon or tab separated, decimal point or comma, UTF-8 or
        Windows-1252 (see :func:`robustff.case.table.read_columns`); lines starting with ``#``
        are ignored.
    input_column, output_column : str
        Column names (matched exactly, then ignoring case).
    time_column : str, optional
        Column of sample times: numbers in the data's time unit, or timestamps (ISO 8601 or
        day-first; then the time unit is seconds). Exactly one of ``time_column`` and
        ``sample_time`` is needed.
    sample_time : float, optional
        Fixed sample interval, data time units; row ``i`` of the file is at ``i * sample_time``.
    time_unit : str, optional
        Time unit of the data, if known.
    separator, decimal, time_format : str, optional
        Force the field separator, the decimal mark or the strftime format of the timestamps
        (all detected when None).

    Returns
    -------
    StepRecord
        Rows with a missing time or input are dropped (the input is interpolated across them,
        and marked as not measured); a missing output stays NaN and is left out of the fit.

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
    table = read_columns(path, [input_column, output_column], time_column=time_column,
                         separator=separator, decimal=decimal, time_format=time_format)
    u, y = table.values[input_column], table.values[output_column]
    if time_column is None:
        times = np.arange(u.size) * float(sample_time)  # type: ignore[arg-type]
    else:
        times = table.values[time_column]
        time_unit = "s" if table.dated else time_unit
    warnings = list(table.notes)
    keep = ~(np.isnan(times) | np.isnan(u))
    if not np.all(keep):
        warnings.append(f"{path}: dropped {np.sum(~keep)} rows with missing values "
                        f"(lines {_lines_shown(table.line_numbers[~keep])})")
    gaps = np.isnan(y) & keep
    if np.any(gaps):
        warnings.append(f"{path}: {np.sum(gaps)} missing output values (lines "
                        f"{_lines_shown(table.line_numbers[gaps])}) are left out of the fit")
    times, u, y = times[keep], u[keep], y[keep]
    if table.dated and times.size:
        times = times - times[0]
    return record_from_arrays(
        times, u, y, source=str(path), input_name=input_column, output_name=output_column,
        time_unit=time_unit, warnings=tuple(warnings),
    )


def _lines_shown(lines: np.ndarray) -> str:
    shown = ", ".join(str(int(n)) for n in lines[:8])
    return shown + (" ..." if lines.size > 8 else "")


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
        Too few samples, infinite or missing times or inputs, too few recorded outputs, times
        not strictly increasing.
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
    if not (np.all(np.isfinite(t)) and np.all(np.isfinite(u)) and not np.any(np.isinf(y))):
        raise DataError(f"{source}: the record holds infinite or missing values")
    largest = max(float(np.max(np.abs(u))), float(np.nanmax(np.abs(y), initial=0.0)))
    if largest > _MAX_MAGNITUDE:
        raise DataError(
            f"{source}: values as large as {largest:.3g} cannot be fitted (sums of squares "
            f"overflow beyond {_MAX_MAGNITUDE:g}); scale the signals to engineering units"
        )
    if np.sum(np.isfinite(y)) < MIN_SAMPLES:
        raise DataError(f"{source}: the output is recorded at only {np.sum(np.isfinite(y))} "
                        f"samples; at least {MIN_SAMPLES} are needed")
    steps = np.diff(t)
    if np.any(steps <= 0):
        bad = int(np.argmax(steps <= 0)) + 1
        raise DataError(
            f"{source}: times must increase; sample {bad + 1} (time {t[bad]:g}) does not come "
            f"after time {t[bad - 1]:g}"
        )
    warn = list(warnings)
    dt = float(np.median(steps))
    measured = None
    if np.max(np.abs(steps - dt)) > _IRREGULAR_TOLERANCE * dt:
        n = int(math.floor((t[-1] - t[0]) / dt + 1e-9)) + 1
        grid = t[0] + dt * np.arange(n)
        u, y = np.interp(grid, t, u), _interp_with_gaps(grid, t, y)
        measured = _near_a_sample(grid, t, 0.5 * dt)  # farther than half a sample: a guess
        warn.append(
            f"{source}: irregular sample times (intervals {steps.min():g} to {steps.max():g}); "
            f"resampled to a uniform {dt:g} by linear interpolation"
        )
        t = grid
    else:
        t = t[0] + dt * np.arange(t.size)
    return StepRecord(t, u, y, source, input_name, output_name, time_unit, tuple(warn), measured)


def _near_a_sample(grid: np.ndarray, t: np.ndarray, distance: float) -> np.ndarray:
    """True where a grid point lies within ``distance`` of an original sample time."""
    after = np.clip(np.searchsorted(t, grid), 0, t.size - 1)
    before = np.clip(after - 1, 0, t.size - 1)
    return np.minimum(np.abs(t[after] - grid), np.abs(t[before] - grid)) <= distance


def _interp_with_gaps(grid: np.ndarray, t: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Linear interpolation of ``y`` onto ``grid``, NaN where a neighbour is missing."""
    out = np.interp(grid, t, np.nan_to_num(y))
    known = np.isfinite(y).astype(float)
    # a grid point between two recorded samples has full weight; anything less touches a gap
    return np.where(np.interp(grid, t, known) > 1.0 - 1e-9, out, np.nan)


def filled_output(record: StepRecord) -> np.ndarray:
    """The output with its gaps filled by linear interpolation in time (for graphical methods
    and starting values only, never for the least-squares residuals), shape (N,)."""
    y, known = record.output, record.output_measured
    if np.all(known):
        return y
    return np.interp(record.times, record.times[known], y[known])


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
    _check_measured_at_step(record, index)
    u0, y0 = float(np.mean(u[:index])), float(np.nanmean(y[:index]))
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


def _check_measured_at_step(record: StepRecord, index: int) -> None:
    """Refuse a step whose time is a guess (input interpolated there) or with no baseline."""
    if record.input_measured is not None and not np.all(record.input_measured[index - 1:index + 1]):
        raise DataError(
            f"{record.source}: the input '{record.input_name}' is missing at the step (near time "
            f"{record.times[index]:g}), so the step time is unknown; the record cannot be fitted"
        )
    if not np.any(record.output_measured[:index]):
        raise DataError(f"{record.source}: the output '{record.output_name}' is missing before "
                        "the step, so its steady state is unknown")


def check_output_coverage(record: StepRecord, step: StepInfo, dead_time: float,
                          lag: float) -> None:
    """Refuse a fit whose output gaps hide the response to the step.

    The response is decided within one dead time plus one time constant after the step; if more
    than half of the output samples there are missing, the dead time could lie anywhere in the
    gap (common practice, no source).

    Parameters
    ----------
    record : StepRecord
    step : StepInfo
    dead_time, lag : float
        Fitted dead time and total lag, data time units.

    Raises
    ------
    DataError
        Most of the output after the step is missing.
    """
    t_step = record.times[step.index]
    window = (record.times >= t_step) & (record.times <= t_step + dead_time + max(lag, 0.0))
    window[step.index : step.index + 2] = True  # at least the step sample and the next
    missing = float(np.mean(~record.output_measured[window]))
    if missing > 0.5:
        raise DataError(
            f"{record.source}: the output '{record.output_name}' is missing for {missing:.0%} of "
            f"the first dead time + time constant after the step (time {t_step:g} to "
            f"{t_step + dead_time + lag:.4g}); the gap hides the response, so the dead time "
            "cannot be identified"
        )


def _check_response(record: StepRecord, output_baseline: float, index: int) -> None:
    y = record.output
    noise_y = noise_level(y)
    after = y[index:][np.isfinite(y[index:])]
    if after.size == 0:
        raise DataError(f"{record.source}: the output '{record.output_name}' is missing after "
                        "the step")
    response = float(np.max(np.abs(after - output_baseline)))
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
    known = np.isfinite(y)
    t, y = t[known], y[known]
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
    excursion = float(np.nanmax(np.abs(record.output[step.index:] - step.output_baseline)))
    if abs(drift) > 0.2 * excursion + 3.0 * stderr * span:
        raise DataError(
            f"{record.source}: the output never settles: over the last {span:g} time units it "
            f"still moves by {drift:.4g} (total change so far {change:.4g}); record longer, or "
            "fit an integrating model (--model ipdt)"
        )
