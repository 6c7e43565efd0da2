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

import dataclasses
import math

import numpy as np

from robustff.errors import DataError
from robustff.fit.intervals import finish_fit, two_point_result
from robustff.fit.projection import Problem, solve
from robustff.fit.quality import poor_fit_warnings
from robustff.fit.records import (
    StepInfo,
    StepRecord,
    check_output_coverage,
    check_settled,
    locate_step,
)
from robustff.fit.result import FitResult, ParameterEstimate
from robustff.fit.two_point import two_point_estimate, two_point_times
from robustff.plant.kinds import FOPDT, model_kind
from robustff.plant.models import MODEL_KINDS, TransferModel

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


def _bounds(kind: str, duration: float, h: float) -> tuple[np.ndarray, np.ndarray]:
    lag_low, lag_high = 0.02 * h, 20.0 * duration
    n_lags = len(model_kind(kind).lag_parameters)
    low = [lag_low] * n_lags + [0.0]
    high = [lag_high] * n_lags + [0.8 * duration]
    return np.asarray(low, dtype=float), np.asarray(high, dtype=float)


def _start_vector(model: TransferModel) -> np.ndarray:
    return np.array([getattr(model, name) for name in model.spec.time_parameters], dtype=float)


def _grid_starts(problem: Problem, y: np.ndarray, low: np.ndarray, high: np.ndarray,
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
        return _judged(_checked(two_point_result(record, step, kind, ci_method, resamples, seed,
                                                 warnings), step), step, None)
    u = _deviation_input(record, step)
    h = record.sample_time
    duration = float(record.times[-1] - record.times[step.index])
    low, high = _bounds(kind, duration, h)
    problem = Problem(kind, u, h, hold)
    y = record.output
    starts = _grid_starts(problem, y, low, high, duration)
    if step.single_step:
        try:
            starts.insert(0, _start_vector(two_point_estimate(record, step, kind)))
        except DataError as exc:
            warnings.append(f"{record.source}: no two-point start ({exc})")
    if problem.n_lags == 2:
        starts.extend(_sopdt_starts(problem, y, starts, low, high))
    p, _ = solve(problem, y, starts, low, high)
    result = _checked(finish_fit(record, step, problem, p, y, low, high, ci_method, resamples,
                                 seed, warnings), step)
    names = model_kind(kind).time_parameters
    bounds = {name: (float(lo), float(hi)) for name, lo, hi in zip(names, low, high, strict=True)}
    return _judged(result, step, bounds)


def _judged(result: FitResult, step: StepInfo,
            bounds: dict[str, tuple[float, float]] | None) -> FitResult:
    """The result with its poor-fit warnings (:func:`robustff.fit.quality.poor_fit_warnings`)."""
    return dataclasses.replace(result, poor_fit=tuple(poor_fit_warnings(result, step, bounds)))


def _checked(result: FitResult, step: StepInfo) -> FitResult:
    """Refuse a fit with non-finite numbers or whose response is hidden by output gaps."""
    values = [result.rmse, *(e.value for e in result.estimates.values())]
    values += [v for e in result.estimates.values() if e.ci95 is not None for v in e.ci95]
    if not (all(math.isfinite(v) for v in values) and np.all(np.isfinite(result.fitted))):
        raise DataError(
            f"{result.record.source}: the fit gives infinite or undefined numbers (values too "
            "large or too small for floating point?); scale the signals to engineering units"
        )
    model = result.model
    check_output_coverage(result.record, step, model.dead_time, model.total_lag)
    return result


def _sopdt_starts(problem: Problem, y: np.ndarray, starts: list[np.ndarray], low: np.ndarray,
                  high: np.ndarray) -> list[np.ndarray]:
    """SOPDT starts from an FOPDT fit split into two lags in a few ratios."""
    fo = Problem(FOPDT.name, problem.u, problem.h, problem.hold)
    fo_low, fo_high = low[[0, 2]], high[[0, 2]]
    p_fo, _ = solve(fo, y, [s[[0, 2]] + np.array([s[1], 0.0]) for s in starts[:2]],
                     fo_low, fo_high)
    tau, theta = p_fo
    out = []
    for ratio in (0.15, 0.4, 0.8):
        tau2 = ratio * tau
        out.append(np.array([tau - tau2 / 2, tau2, max(0.0, theta - tau2 / 2)]))
    return out


