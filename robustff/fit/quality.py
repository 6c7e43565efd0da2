"""Does a fitted model describe its record? Warnings for a poor fit.

Four checks, each a sentence for the engineer when it fails:

* residual size against the noise level: the RMSE of data minus fit against the standard
  deviation of the output before the step (a straight line removed; the first-difference noise
  estimate when fewer than ``MIN_BASELINE`` samples precede the step). A model that describes
  the response leaves residuals of about the noise level; more than ``NOISE_RATIO`` times it
  means a systematic misfit (common practice, no source);
* whiteness of the residuals: the lag-1 autocorrelation and the Ljung-Box portmanteau statistic
  ``Q = n (n + 2) sum_k r_k^2 / (n - k)`` over ``LJUNG_BOX_LAGS`` lags, compared with the
  chi-square distribution of that many degrees of freedom (Source: Ljung and Box, "On a measure
  of lack of fit in time series models", Biometrika 65 (1978) 297-303, eq. 2.2; from memory).
  Plant noise is seldom white, so moderate correlation is expected (the bootstrap allows for
  it); a lag-1 autocorrelation above ``STRONG_CORRELATION`` means the residuals are mostly a
  slow, systematic error;
* intervals of zero width, or a value stuck at its search bound: the data do not determine the
  parameter (often swapped ``--input`` and ``--output`` columns);
* an integrating model on a record whose output levels off: the process is self-regulating.
"""

from __future__ import annotations

import math

import numpy as np

from robustff.fit.records import StepInfo, StepRecord, noise_level
from robustff.fit.result import FitResult

__all__ = [
    "NOISE_RATIO",
    "STRONG_CORRELATION",
    "LJUNG_BOX_LAGS",
    "MIN_BASELINE",
    "baseline_noise",
    "ljung_box",
    "poor_fit_warnings",
]

NOISE_RATIO = 3.0
STRONG_CORRELATION = 0.9
LJUNG_BOX_LAGS = 10
MIN_BASELINE = 10


def baseline_noise(record: StepRecord, step: StepInfo) -> float:
    """Standard deviation of the output before the step (output units), a straight line removed.

    With fewer than :data:`MIN_BASELINE` measured samples before the step, the first-difference
    estimate :func:`robustff.fit.records.noise_level` of the whole output instead.
    """
    before = record.output[: step.index]
    known = np.isfinite(before)
    if int(np.sum(known)) < MIN_BASELINE:
        return noise_level(record.output)
    t = record.times[: step.index][known]
    y = before[known]
    coefficients = np.polyfit(t - t[0], y, 1)
    return float(np.std(y - np.polyval(coefficients, t - t[0]), ddof=2))


def ljung_box(residuals: np.ndarray, lags: int = LJUNG_BOX_LAGS) -> tuple[float, float, float]:
    """Lag-1 autocorrelation, Ljung-Box Q over ``lags`` lags, and its chi-square p-value.

    Parameters
    ----------
    residuals : ndarray, shape (N,)
        Missing values (NaN) are dropped first.

    Returns
    -------
    (r1, q, p) : float
        ``r1`` is NaN and ``p`` is 1 when the residuals are constant or too short.
    """
    from scipy.stats import chi2

    r = np.asarray(residuals, dtype=float)
    r = r[np.isfinite(r)]
    n = r.size
    lags = min(lags, n // 5)
    r = r - r.mean() if n else r
    c0 = float(r @ r)
    if lags < 1 or c0 <= 0.0:
        return math.nan, 0.0, 1.0
    rho = np.array([float(r[k:] @ r[:-k]) / c0 for k in range(1, lags + 1)])
    q = float(n * (n + 2) * np.sum(rho**2 / (n - np.arange(1, lags + 1))))
    return float(rho[0]), q, float(chi2.sf(q, lags))


def _zero_width(result: FitResult) -> list[str]:
    names = []
    for name, estimate in result.estimates.items():
        if estimate.ci95 is None:
            continue
        low, high = estimate.ci95
        if high - low <= 1e-9 * max(abs(estimate.value), 1e-300):
            names.append(name)
    return names


def _levels_off(result: FitResult, step: StepInfo) -> tuple[float, float] | None:
    """(observed, model) output slopes over the last quarter when an integrating model is fitted
    to an output that levels off (observed below a quarter of the model's); else None."""
    model, record = result.model, result.record
    if not model.integrating:
        return None
    start = step.index + 3 * (record.size - step.index) // 4
    t, y = record.times[start:], record.output[start:]
    known = np.isfinite(y)
    if int(np.sum(known)) < 5:
        return None
    observed = float(np.polyfit(t[known], y[known], 1)[0])
    input_now = float(np.mean(record.input[start:])) - step.input_baseline
    expected = model.gain * input_now
    if expected == 0.0 or abs(observed) >= 0.25 * abs(expected):
        return None
    return observed, expected


def poor_fit_warnings(result: FitResult, step: StepInfo,
                      bounds: dict[str, tuple[float, float]] | None = None) -> list[str]:
    """Sentences saying why the fitted model does not describe its record (empty when it does).

    Parameters
    ----------
    result : FitResult
    step : StepInfo
        The located input step (its index splits the baseline from the response).
    bounds : dict of str to (low, high), optional
        Search bounds of the time parameters (data time units); a value on a bound is reported.
    """
    record, source = result.record, result.record.source
    out_unit = f"in the unit of {record.output_name}"
    warnings = []
    noise = baseline_noise(record, step)
    scale = max(float(np.nanmax(np.abs(record.output))), 1e-300)
    ratio = result.rmse / noise if noise > 1e-12 * scale else math.inf
    if ratio > NOISE_RATIO and result.rmse > 1e-9 * scale:
        times = "the output is noise-free before the step" if math.isinf(ratio) else \
            f"{ratio:.3g} times the noise level {noise:.3g} {out_unit} before the step"
        warnings.append(
            f"{source}: poor fit: the residuals (RMSE {result.rmse:.3g} {out_unit}) are {times}; "
            f"the {result.model.kind.upper()} model does not describe the response (another "
            "model kind, or swapped --input and --output?)")
    r1, q, p = ljung_box(record.output - result.fitted)
    if math.isfinite(r1) and r1 > STRONG_CORRELATION:
        lags = min(LJUNG_BOX_LAGS, int(np.sum(np.isfinite(record.output))) // 5)
        p_text = "p < 0.001" if p < 0.001 else f"p = {p:.2g}"
        warnings.append(
            f"{source}: the residuals are far from white (lag-1 autocorrelation {r1:.2f}, "
            f"Ljung-Box Q = {q:.4g} over {lags} lags, {p_text}): the fit misses part of the "
            "response, or the output drifts during the test")
    zero = _zero_width(result)
    if zero:
        which = (f"the 95 % interval of {zero[0]} has" if len(zero) == 1
                 else f"the 95 % intervals of {', '.join(zero)} have")
        warnings.append(
            f"{source}: {which} zero width: the data do not determine "
            f"{'it' if len(zero) == 1 else 'them'} (is the input step visible in the output? "
            "are --input and --output swapped?); no uncertainty is proposed from a zero width")
    time_unit = record.time_unit or "time units"
    for name, (low, high) in (bounds or {}).items():
        value = result.estimates[name].value if name in result.estimates else math.nan
        if not math.isfinite(value):
            continue
        if value <= low * (1 + 1e-6) and low > 0.0:
            warnings.append(
                f"{source}: {name} = {value:.4g} {time_unit} is on the lower search bound: the "
                "data show no such lag (a model kind with fewer lags fits as well)")
        elif value >= high * (1 - 1e-6):
            warnings.append(
                f"{source}: {name} = {value:.4g} {time_unit} is on the upper search bound "
                f"({high:.3g} {time_unit}): the record is too short to determine it")
    slopes = _levels_off(result, step)
    if slopes is not None:
        warnings.append(
            f"{source}: an integrating model on an output that levels off (slope "
            f"{slopes[0]:.3g} over the last quarter against the model's {slopes[1]:.3g}, "
            f"{record.output_name} per {record.time_unit or 'time unit'}): the process is "
            "self-regulating; fit --model fopdt or sopdt")
    return warnings
