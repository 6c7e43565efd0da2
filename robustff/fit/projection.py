"""The variable-projection problem of a step-test fit, and its bounded multi-start solver.

Gain and output baseline enter the model response linearly, so for given lags and dead time they
are solved by linear least squares (:meth:`Problem.linear`); ``scipy.optimize.least_squares`` then
searches only the lags and the dead time, within bounds (:func:`solve`). Used by the fit itself
(:mod:`robustff.fit.least_squares`) and by the bootstrap refits of its intervals
(:mod:`robustff.fit.intervals`).
"""

from __future__ import annotations

import math

import numpy as np

from robustff.errors import DataError
from robustff.fit.response import unit_response
from robustff.plant.kinds import model_kind
from robustff.plant.models import TransferModel

__all__ = ["Problem", "solve", "to_model"]


class Problem:
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
        known = np.isfinite(y)
        if not known.all():  # missing outputs are left out: zero residual there
            gain, base, r = _gain_and_baseline(s[known], y[known])
            residual = np.zeros_like(y)
            residual[known] = r
            return gain, base, residual
        return _gain_and_baseline(s, y)


def _gain_and_baseline(s: np.ndarray, y: np.ndarray) -> tuple[float, float, np.ndarray]:
    """Linear least squares of ``y ~ gain * s + baseline``; returns (gain, baseline, residual)."""
    s_mean, y_mean = s.mean(), y.mean()
    sc = s - s_mean
    denom = float(sc @ sc)
    gain = float(sc @ (y - y_mean)) / denom if denom > 0 else 0.0
    base = float(y_mean - gain * s_mean)
    return gain, base, y - gain * s - base


def to_model(kind: str, gain: float, p: np.ndarray) -> TransferModel:
    spec = model_kind(kind)
    # lags in decreasing order: the response is symmetric in them
    lags = sorted((float(tau) for tau in p[: len(spec.lag_parameters)]), reverse=True)
    values = dict(zip(spec.lag_parameters, lags, strict=True))
    return TransferModel(kind, gain, values.get("time_constant", 0.0),
                         values.get("time_constant_2", 0.0), float(p[-1]))


def solve(problem: Problem, y: np.ndarray, starts: list[np.ndarray], low: np.ndarray,
           high: np.ndarray) -> tuple[np.ndarray, float]:
    """Least squares from each start; returns the best nonlinear parameters and cost."""
    from scipy.optimize import least_squares

    best_p, best_cost = starts[0], math.inf
    scale = np.maximum(np.abs(high - low) * 1e-3, problem.h * 1e-3)
    for start in starts:
        x0 = np.clip(start, low, high)
        x0 = np.minimum(np.maximum(x0, low + 1e-9 * scale), high - 1e-9 * scale)
        try:
            sol = least_squares(lambda p: problem.linear(p, y)[2], x0, bounds=(low, high),
                                x_scale=np.maximum(np.abs(x0), scale * 10), diff_step=1e-5)
        except ValueError as exc:  # residuals or Jacobian not finite (overflow)
            raise DataError(f"the fit gives infinite or undefined numbers ({exc})") from None
        if sol.cost < best_cost:
            best_p, best_cost = sol.x, float(sol.cost)
    return best_p, best_cost

