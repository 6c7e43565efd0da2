"""Fitting FOPDT, SOPDT and IPDT models to bump-test records, with confidence intervals.

The main method is a least-squares simulation-error fit: the model's exact sampled response to the
recorded input (:mod:`robustff.fit.response`, fractional dead time) is matched to the
recorded output. Gain and output baseline enter linearly and are solved by linear least squares
inside the loop (variable projection), so ``scipy.optimize.least_squares`` only searches the lags
and the dead time, within bounds, from several starts: the two-point method's estimate and the
best points of a coarse grid. The response is continuous but has kinks in the dead time (where
the delayed input crosses a sample), which finite-difference Jacobians and multi-start handle.

Confidence intervals come from a residual bootstrap (moving blocks when the residuals are
correlated) with a fixed seed, or from the Jacobian at the optimum.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from robustff.errors import DataError
from robustff.fit.records import StepInfo, StepRecord, check_settled, locate_step
from robustff.fit.response import unit_response
from robustff.plant.kinds import FOPDT, model_kind
from robustff.plant.models import MODEL_KINDS, MODEL_PARAMETERS, TransferModel

__all__ = [
    "FIT_METHODS",
    "CI_METHODS",
    "ParameterEstimate",
    "FitResult",
    "two_point_times",
    "two_point_estimate",
    "fit_record",
]

FIT_METHODS: tuple[str, ...] = ("least-squares", "two-point")
CI_METHODS: tuple[str, ...] = ("bootstrap", "jacobian", "none")
#: How a grid start's lag is split over a kind's lags, by the number of lags.
_LAG_SPLIT: dict[int, tuple[float, ...]] = {0: (), 1: (1.0,), 2: (0.75, 0.25)}


@dataclass(frozen=True)
class ParameterEstimate:
    """A fitted parameter: best value and 95 % confidence interval (None if not computed)."""

    value: float
    ci95: tuple[float, float] | None = None


@dataclass(frozen=True)
class FitResult:
    """A model fitted to one record.

    Parameters
    ----------
    model : TransferModel
        Best-fit model (times in the data's time unit).
    estimates : dict of str to ParameterEstimate
        One entry per name in ``MODEL_PARAMETERS[model.kind]``.
    method, ci_method : str
        How the model and the intervals were obtained.
    output_baseline, input_baseline : float
        Steady state before the step, signal units (output baseline is fitted).
    fitted : ndarray, shape (N,)
        Fitted output on the record's time grid, absolute output units.
    rmse : float
        Root-mean-square of data minus fit, output units.
    record : StepRecord
    warnings : tuple of str
    """

    model: TransferModel
    estimates: dict[str, ParameterEstimate]
    method: str
    ci_method: str
    output_baseline: float
    input_baseline: float
    fitted: np.ndarray
    rmse: float
    record: StepRecord
    warnings: tuple[str, ...] = field(default=())


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
    t, y = record.times, record.output - step.output_baseline
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
    t, y = record.times[half:], record.output[half:] - step.output_baseline
    slope, intercept = np.polyfit(t, y, 1)
    gain = float(slope) / step.input_change
    theta = (-intercept / slope - t_step) if slope != 0 else 0.0
    return TransferModel(kind, gain, 0.0, 0.0, float(max(0.0, theta)))


def _bounds(kind: str, duration: float, h: float) -> tuple[np.ndarray, np.ndarray]:
    lag_low, lag_high = 0.02 * h, 20.0 * duration
    n_lags = len(model_kind(kind).lag_parameters)
    low = [lag_low] * n_lags + [0.0]
    high = [lag_high] * n_lags + [0.8 * duration]
    return np.asarray(low, dtype=float), np.asarray(high, dtype=float)


class _Problem:
    """Variable-projection residuals for one record: nonlinear parameters are lags and delay."""

    def __init__(self, kind: str, u: np.ndarray, h: float, hold: str) -> None:
        self.kind, self.u, self.h, self.hold = kind, u, h, hold
        self.n_lags = len(model_kind(kind).lag_parameters)

    def response(self, p: np.ndarray) -> np.ndarray:
        # p holds the kind's lags then the dead time; lags it does not have are zero
        lags = (*p[: self.n_lags], 0.0, 0.0)
        return unit_response(self.kind, lags[0], lags[1], p[-1], self.u, self.h, self.hold)

    def linear(self, p: np.ndarray, y: np.ndarray) -> tuple[float, float, np.ndarray]:
        """Best gain and baseline for the lags/delay ``p``; returns (gain, baseline, residual)."""
        s = self.response(p)
        s_mean, y_mean = s.mean(), y.mean()
        sc = s - s_mean
        denom = float(sc @ sc)
        gain = float(sc @ (y - y_mean)) / denom if denom > 0 else 0.0
        base = float(y_mean - gain * s_mean)
        return gain, base, y - gain * s - base


def _to_model(kind: str, gain: float, p: np.ndarray) -> TransferModel:
    spec = model_kind(kind)
    # lags in decreasing order: the response is symmetric in them
    lags = sorted((float(tau) for tau in p[: len(spec.lag_parameters)]), reverse=True)
    values = dict(zip(spec.lag_parameters, lags, strict=True))
    return TransferModel(kind, gain, values.get("time_constant", 0.0),
                         values.get("time_constant_2", 0.0), float(p[-1]))


def _start_vector(model: TransferModel) -> np.ndarray:
    return np.array([getattr(model, name) for name in model.spec.time_parameters], dtype=float)


def _grid_starts(problem: _Problem, y: np.ndarray, low: np.ndarray, high: np.ndarray,
                 duration: float, count: int = 2) -> list[np.ndarray]:
    """The best few points of a coarse grid over lags and dead time."""
    lags = np.geomspace(max(low[0], 0.5 * problem.h), 0.7 * duration, 7)
    delays = np.linspace(0.0, 0.4 * duration, 7)
    candidates = []
    split = _LAG_SPLIT[problem.n_lags]
    for lag in lags if split else [0.0]:  # a kind without lags needs no lag grid
        for delay in delays:
            p = np.array([*(fraction * lag for fraction in split), delay])
            p = np.clip(p, low, high)
            _, _, r = problem.linear(p, y)
            candidates.append((float(r @ r), p))
    candidates.sort(key=lambda item: item[0])
    return [p for _, p in candidates[:count]]


def _solve(problem: _Problem, y: np.ndarray, starts: list[np.ndarray], low: np.ndarray,
           high: np.ndarray) -> tuple[np.ndarray, float]:
    """Least squares from each start; returns the best nonlinear parameters and cost."""
    from scipy.optimize import least_squares

    best_p, best_cost = starts[0], math.inf
    scale = np.maximum(np.abs(high - low) * 1e-3, problem.h * 1e-3)
    for start in starts:
        x0 = np.clip(start, low, high)
        x0 = np.minimum(np.maximum(x0, low + 1e-9 * scale), high - 1e-9 * scale)
        sol = least_squares(lambda p: problem.linear(p, y)[2], x0, bounds=(low, high),
                            x_scale=np.maximum(np.abs(x0), scale * 10), diff_step=1e-5)
        if sol.cost < best_cost:
            best_p, best_cost = sol.x, float(sol.cost)
    return best_p, best_cost


def _deviation_input(record: StepRecord, step: StepInfo) -> np.ndarray:
    return record.input - step.input_baseline


def fit_record(
    record: StepRecord,
    kind: str = "fopdt",
    method: str = "least-squares",
    ci_method: str = "bootstrap",
    resamples: int = 200,
    seed: int = 0,
    hold: str = "zoh",
) -> FitResult:
    """Fit a model to one bump-test record.

    Parameters
    ----------
    record : StepRecord
    kind : {"fopdt", "sopdt", "ipdt"}
    method : {"least-squares", "two-point"}
        ``"two-point"`` needs a single step and gives an FOPDT (or IPDT slope-line) estimate.
    ci_method : {"bootstrap", "jacobian", "none"}
        Residual bootstrap (``resamples`` refits, ``seed``) or the linearised covariance.
    hold : {"zoh", "linear"}
        How the input behaves between samples.

    Returns
    -------
    FitResult

    Raises
    ------
    DataError
        Unusable data (see :func:`locate_step`, :func:`check_settled`) or a failed fit.
    """
    if kind not in MODEL_KINDS:
        raise DataError(f"unknown model '{kind}'; choose one of {', '.join(MODEL_KINDS)}")
    if method not in FIT_METHODS or ci_method not in CI_METHODS:
        raise DataError(f"unknown fit method '{method}' or interval method '{ci_method}'")
    step = locate_step(record)
    warnings = list(record.warnings)
    if not model_kind(kind).integrating:
        check_settled(record, step)
    if method == "two-point":
        from robustff.fit.intervals import two_point_result

        return two_point_result(record, step, kind, ci_method, resamples, seed, warnings)
    u = _deviation_input(record, step)
    h = record.sample_time
    duration = float(record.times[-1] - record.times[step.index])
    low, high = _bounds(kind, duration, h)
    problem = _Problem(kind, u, h, hold)
    y = record.output
    starts = _grid_starts(problem, y, low, high, duration)
    if step.single_step:
        try:
            starts.insert(0, _start_vector(two_point_estimate(record, step, kind)))
        except DataError as exc:
            warnings.append(f"{record.source}: no two-point start ({exc})")
    if problem.n_lags == 2:
        starts.extend(_sopdt_starts(problem, y, starts, low, high))
    p, _ = _solve(problem, y, starts, low, high)
    from robustff.fit.intervals import finish_fit

    return finish_fit(record, step, problem, p, y, low, high, ci_method, resamples, seed, warnings)


def _sopdt_starts(problem: _Problem, y: np.ndarray, starts: list[np.ndarray], low: np.ndarray,
                  high: np.ndarray) -> list[np.ndarray]:
    """SOPDT starts from an FOPDT fit split into two lags in a few ratios."""
    fo = _Problem(FOPDT.name, problem.u, problem.h, problem.hold)
    fo_low, fo_high = low[[0, 2]], high[[0, 2]]
    p_fo, _ = _solve(fo, y, [s[[0, 2]] + np.array([s[1], 0.0]) for s in starts[:2]],
                     fo_low, fo_high)
    tau, theta = p_fo
    out = []
    for ratio in (0.15, 0.4, 0.8):
        tau2 = ratio * tau
        out.append(np.array([tau - tau2 / 2, tau2, max(0.0, theta - tau2 / 2)]))
    return out


def model_parameters(model: TransferModel) -> dict[str, float]:
    """The fitted parameters in :data:`MODEL_PARAMETERS` order."""
    return {name: float(getattr(model, name)) for name in MODEL_PARAMETERS[model.kind]}
