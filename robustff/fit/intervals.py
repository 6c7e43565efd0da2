"""Confidence intervals for fitted step-test models: residual bootstrap and Jacobian.

Residual bootstrap: the fitted response plus resampled noise makes a new record, which is
refitted; the 2.5 and 97.5 percentiles of the refitted parameters are the 95 % interval
(percentile bootstrap; Source: Efron and Tibshirani, An Introduction to the Bootstrap, 1993,
chapters 9 and 13; from memory). Plant noise is rarely white, so the residuals are described by
an autoregression (order by AIC, zero when they look white) and its innovations are resampled
and filtered again: the sieve bootstrap (Source: Buhlmann, "Sieve bootstrap for time series",
Bernoulli 3 (1997) 123-148; from memory). Residuals are inflated by sqrt(N / (N - p)) for the
p fitted parameters.

Jacobian: ``cov = s^2 (J^T J)^-1`` at the optimum with a Student t quantile (valid for white
noise and a locally linear model).
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np

from robustff.errors import DataError
from robustff.fit.projection import Problem, solve, to_model
from robustff.fit.records import StepInfo, StepRecord
from robustff.fit.response import simulate_response
from robustff.fit.result import FitResult, ParameterEstimate, model_parameters
from robustff.fit.two_point import two_point_estimate
from robustff.plant.kinds import model_kind
from robustff.plant.models import MODEL_PARAMETERS, TransferModel

__all__ = ["finish_fit", "two_point_result", "fit_autoregression", "resample_residuals"]


def fit_autoregression(residuals: np.ndarray, max_order: int = 6) -> tuple[np.ndarray, np.ndarray]:
    """AR model of the residuals, order chosen by AIC (0 when they look white).

    Parameters
    ----------
    residuals : ndarray, shape (N,)

    Returns
    -------
    (coefficients, innovations) : ndarray shape (p,), ndarray shape (N - p,)
        ``r_k = sum_i a_i r_{k-i} + e_k``; innovations are centred.
    """
    r = residuals - residuals.mean()
    n = r.size
    best = (n * math.log(max(float(r @ r) / n, 1e-300)), np.zeros(0), r)
    for order in range(1, max_order + 1):
        lagged = np.column_stack([r[order - i - 1 : n - i - 1] for i in range(order)])
        target = r[order:]
        coef, *_ = np.linalg.lstsq(lagged, target, rcond=None)
        innovations = target - lagged @ coef
        aic = target.size * math.log(max(float(innovations @ innovations) / target.size, 1e-300))
        aic += 2 * order + order * math.log(n) / 2  # lean towards low orders
        if aic < best[0] and np.all(np.abs(np.roots(np.r_[1.0, -coef])) < 0.98):
            best = (aic, coef, innovations - innovations.mean())
    return best[1], best[2]


def resample_residuals(coefficients: np.ndarray, innovations: np.ndarray, n: int,
                       rng: np.random.Generator) -> np.ndarray:
    """One sieve-bootstrap noise series of length ``n``: resampled innovations through the AR
    filter, after a burn-in (shape (n,))."""
    from scipy.signal import lfilter

    burn = 0 if coefficients.size == 0 else 20 * coefficients.size + 50
    draws = innovations[rng.integers(0, innovations.size, n + burn)]
    if coefficients.size == 0:
        return draws
    return lfilter([1.0], np.r_[1.0, -coefficients], draws)[burn:]


def _percentile_ci(samples: np.ndarray) -> list[tuple[float, float]]:
    low, high = np.percentile(samples, [2.5, 97.5], axis=0)
    return [(float(a), float(b)) for a, b in zip(low, high, strict=True)]


def _canonical(kind: str, p: np.ndarray) -> np.ndarray:
    """Two lags in decreasing order (the response is symmetric in them)."""
    if len(model_kind(kind).lag_parameters) == 2 and p[1] > p[0]:
        return np.array([p[1], p[0], p[2]])
    return p


def _bootstrap(problem: Problem, fitted: np.ndarray, residuals: np.ndarray, p: np.ndarray,
               low: np.ndarray, high: np.ndarray, resamples: int, seed: int) -> np.ndarray:
    """Refitted (gain, lags..., dead time) per resample: shape (resamples, 1 + len(p))."""
    known = np.isfinite(residuals)  # missing outputs stay missing in every resample
    n = int(np.sum(known))
    scaled = residuals[known] * math.sqrt(n / max(1, n - p.size - 2))
    coefficients, innovations = fit_autoregression(scaled)
    rng = np.random.default_rng(seed)
    out = np.empty((resamples, 1 + p.size))
    for i in range(resamples):
        y_star = fitted + resample_residuals(coefficients, innovations, residuals.size, rng)
        y_star[~known] = np.nan
        p_star, _ = solve(problem, y_star, [p], low, high)
        p_star = _canonical(problem.kind, p_star)
        out[i, 0] = problem.linear(p_star, y_star)[0]
        out[i, 1:] = p_star
    return out


def _jacobian_ci(problem: Problem, y: np.ndarray, gain: float, p: np.ndarray,
                 low: np.ndarray, high: np.ndarray) -> list[tuple[float, float]]:
    """Linearised 95 % intervals for (gain, lags..., dead time)."""
    from scipy.stats import t as student

    base_resp = problem.response(p)
    columns = [base_resp]
    for j in range(p.size):
        step = max(1e-6 * abs(p[j]), 1e-6 * problem.h)
        hi, lo = p.copy(), p.copy()
        hi[j] = min(p[j] + step, high[j])
        lo[j] = max(p[j] - step, low[j])
        columns.append(gain * (problem.response(hi) - problem.response(lo)) / (hi[j] - lo[j]))
    known = np.isfinite(y)  # missing outputs add no rows
    jac = np.column_stack(columns + [np.ones_like(y)])[known]
    r = problem.linear(p, y)[2][known]
    dof = max(1, r.size - jac.shape[1])
    cov = (r @ r / dof) * np.linalg.pinv(jac.T @ jac)
    half = student.ppf(0.975, dof) * np.sqrt(np.maximum(np.diag(cov), 0.0))
    values = np.concatenate([[gain], p])
    return [(float(v - w), float(v + w)) for v, w in zip(values, half[:-1], strict=True)]


def _estimates(model: TransferModel, cis: list[tuple[float, float]] | None,
               order: tuple[str, ...]) -> dict[str, ParameterEstimate]:
    """Map intervals given in ``order`` onto the model's parameter names."""
    values = model_parameters(model)
    by_name = dict(zip(order, cis, strict=True)) if cis is not None else {}
    return {name: ParameterEstimate(v, by_name.get(name)) for name, v in values.items()}


def finish_fit(record: StepRecord, step: StepInfo, problem: Problem, p: np.ndarray,
               y: np.ndarray, low: np.ndarray, high: np.ndarray, ci_method: str,
               resamples: int, seed: int, warnings: list[str]) -> FitResult:
    """Build the :class:`FitResult` of a least-squares fit, with intervals."""
    p = _canonical(problem.kind, p)
    gain, base, residuals = problem.linear(p, y)
    known = np.isfinite(y)
    residuals = np.where(known, residuals, np.nan)  # a missing output has no residual
    model = to_model(problem.kind, gain, p)
    fitted = np.where(known, y - residuals, gain * problem.response(p) + base)
    cis: list[tuple[float, float]] | None = None
    if ci_method == "bootstrap" and resamples > 0:
        cis = _percentile_ci(_bootstrap(problem, fitted, residuals, p, low, high, resamples, seed))
    elif ci_method == "jacobian":
        cis = _jacobian_ci(problem, y, gain, p, low, high)
    _warn_poor_fit(record, model, step, warnings)
    return FitResult(model, _estimates(model, cis, model.spec.parameter_names), "least-squares",
                     ci_method if cis is not None else "none", base, step.input_baseline,
                     fitted, float(np.sqrt(np.nanmean(residuals**2))), record, tuple(warnings))


def _warn_poor_fit(record: StepRecord, model: TransferModel, step: StepInfo,
                   warnings: list[str]) -> None:
    after = float(record.times[-1] - record.times[step.index])
    settle = model.dead_time + 4.0 * model.total_lag
    if not model.integrating and settle > after:
        warnings.append(
            f"{record.source}: the record after the step ({after:g}) is shorter than the fitted "
            f"settling time (dead time + 4 lags = {settle:.3g}); the gain is extrapolated"
        )
    if model.dead_time < 0.5 * record.sample_time:
        warnings.append(f"{record.source}: the dead time is below half a sample "
                        f"({record.sample_time:g}); it is poorly determined")


def two_point_result(record: StepRecord, step: StepInfo, kind: str, ci_method: str,
                     resamples: int, seed: int, warnings: list[str]) -> FitResult:
    """The two-point (or IPDT slope-line) estimate alone, with bootstrap intervals if asked."""
    if len(model_kind(kind).lag_parameters) > 1:
        raise DataError("the two-point method gives FOPDT (or IPDT) models only; use --model "
                        "fopdt, or the least-squares fit for SOPDT")
    if not step.single_step:
        raise DataError(f"{record.source}: the two-point method needs a single step in the input "
                        "(this input returns or moves again); use the least-squares fit")
    model = two_point_estimate(record, step, kind)
    u = record.input - step.input_baseline
    fitted = step.output_baseline + simulate_response(model, u, record.sample_time)
    residuals = record.output - fitted
    cis = None
    if ci_method == "jacobian":
        warnings.append("the two-point method has no Jacobian; intervals by bootstrap instead")
    if ci_method != "none" and resamples > 0:
        samples = _two_point_bootstrap(record, step, kind, fitted, residuals, resamples, seed)
        cis = _percentile_ci(samples)
    return FitResult(model, _estimates(model, cis, model_kind(kind).parameter_names), "two-point",
                     "bootstrap" if cis is not None else "none", step.output_baseline,
                     step.input_baseline, fitted, float(np.sqrt(np.nanmean(residuals**2))),
                     record, tuple(warnings))


def _two_point_bootstrap(record: StepRecord, step: StepInfo, kind: str, fitted: np.ndarray,
                         residuals: np.ndarray, resamples: int, seed: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    known = np.isfinite(residuals)  # missing outputs stay missing in every resample
    coefficients, innovations = fit_autoregression(residuals[known])
    out = np.empty((resamples, len(MODEL_PARAMETERS[kind])))
    for i in range(resamples):
        y_star = fitted + resample_residuals(coefficients, innovations, residuals.size, rng)
        y_star[~known] = np.nan
        rec = dataclasses.replace(record, output=y_star)
        baseline = float(np.nanmean(y_star[: step.index]))
        step_star = dataclasses.replace(step, output_baseline=baseline)
        try:
            model = two_point_estimate(rec, step_star, kind)
        except DataError:
            out[i] = np.nan
            continue
        out[i] = [getattr(model, name) for name in model.spec.parameter_names]
    out = out[np.all(np.isfinite(out), axis=1)]
    if out.shape[0] < resamples // 2:
        raise DataError(f"{record.source}: the two-point method fails on most noisy resamples; "
                        "use the least-squares fit")
    return out
