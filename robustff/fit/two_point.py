"""First estimates from a step test: the two-point method, or a slope line for IPDT.

The estimate is the least-squares fit's first start and, on its own, the ``two-point`` fit
method (:func:`robustff.fit.intervals.two_point_result` adds its bootstrap intervals).
"""

from __future__ import annotations

import numpy as np

from robustff.errors import DataError
from robustff.fit.records import (
    StepInfo,
    StepRecord,
    filled_output,
)
from robustff.plant.kinds import model_kind
from robustff.plant.models import TransferModel

__all__ = ["two_point_times", "two_point_estimate"]


def _first_crossing(times: np.ndarray, signal: np.ndarray, level: float) -> float:
    """Time at which ``signal`` first reaches ``level``, linearly interpolated (time units)."""
    above = np.nonzero(signal >= level)[0]
    if above.size == 0 or above[0] == 0:
        raise DataError(
            f"the response never crosses {level:.4g}: cannot apply the two-point method"
        )
    k = int(above[0])
    t0, t1, s0, s1 = times[k - 1], times[k], signal[k - 1], signal[k]
    return float(t0 + (level - s0) * (t1 - t0) / (s1 - s0))


def two_point_times(t28: float, t63: float, step_time: float = 0.0) -> tuple[float, float]:
    """Time constant and dead time from the 28.3 % and 63.2 % response times.

    Smith's method: ``tau = 1.5 (t63 - t28)``, ``theta = t63 - tau`` with times measured from
    the step (Source: Seborg, Edgar and Mellichamp, Process Dynamics and Control, chapter on
    process identification from step tests; from memory).

    Parameters
    ----------
    t28, t63 : float
        Times at which the response reaches 28.3 % and 63.2 % of its final change, time units.
    step_time : float
        Time of the input step, time units.

    Returns
    -------
    (time_constant, dead_time) : tuple of float
        Time units; the dead time is clipped at zero.
    """
    tau = 1.5 * (t63 - t28)
    return tau, max(0.0, t63 - step_time - tau)


def _smoothed(signal: np.ndarray, width: int) -> np.ndarray:
    if width <= 1:
        return signal
    kernel = np.ones(width) / width
    padded = np.concatenate([np.full(width // 2, signal[0]), signal, np.full(width, signal[-1])])
    return np.convolve(padded, kernel, mode="same")[width // 2 : width // 2 + signal.size]


def two_point_estimate(record: StepRecord, step: StepInfo, kind: str = "fopdt") -> TransferModel:
    """A first estimate from a step test by the two-point method (or a slope line for IPDT).

    Parameters
    ----------
    record : StepRecord
    step : StepInfo
        From :func:`robustff.fit.records.locate_step`.
    kind : {"fopdt", "sopdt", "ipdt"}
        For SOPDT the FOPDT estimate is split into two lags (half rule in reverse).

    Raises
    ------
    DataError
        If the output never reaches the 28.3 % / 63.2 % levels.
    """
    t, y = record.times, filled_output(record) - step.output_baseline  # graphical: gaps filled
    t_step = float(t[step.index])  # the new input level is held from this sample
    tail = max(3, (record.size - step.index) // 10)
    spec = model_kind(kind)
    if spec.integrating:
        return _slope_line_estimate(record, step, t_step, kind)
    final = float(np.mean(y[-tail:]))
    width = max(1, min(9, (record.size - step.index) // 40))
    sign_y = np.sign(final) if final != 0 else 1.0
    ys = _smoothed(y, width) * sign_y
    t28 = _first_crossing(t, ys, 0.283 * abs(final))
    t63 = _first_crossing(t, ys, 0.632 * abs(final))
    tau, theta = two_point_times(t28, t63, t_step)
    tau = max(tau, 0.05 * record.sample_time)
    gain = final / step.input_change
    if len(spec.lag_parameters) == 2:
        tau2 = 0.3 * tau
        return TransferModel(kind, gain, tau - tau2 / 2, tau2, max(0.0, theta - tau2 / 2))
    return TransferModel(kind, gain, tau, 0.0, theta)


def _slope_line_estimate(record: StepRecord, step: StepInfo, t_step: float,
                         kind: str) -> TransferModel:
    """IPDT estimate: a line through the second half of the response; dead time where it
    leaves the baseline."""
    half = step.index + (record.size - step.index) // 2
    t, y = record.times[half:], filled_output(record)[half:] - step.output_baseline
    slope, intercept = np.polyfit(t, y, 1)
    gain = float(slope) / step.input_change
    theta = (-intercept / slope - t_step) if slope != 0 else 0.0
    return TransferModel(kind, gain, 0.0, 0.0, float(max(0.0, theta)))

