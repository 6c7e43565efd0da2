"""Probability that feedforward makes a metric worse, with a binomial confidence interval.

Unstable samples (NaN/inf metric) count as described in :func:`probability_worse`.
``scipy.special`` is imported inside the functions that need it.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from robustff.errors import DataError
from robustff.jsonvalues import json_float
from robustff.stats._validation import check_confidence, paired_arrays, z_value

__all__ = [
    "HarmEstimate",
    "wilson_interval",
    "clopper_pearson_interval",
    "probability_worse",
]


def wilson_interval(k: int, n: int, confidence: float = 0.95) -> tuple[float, float]:
    """Wilson score interval for a binomial proportion ``k / n`` (no continuity correction).

    Source: Wilson, "Probable inference, the law of succession, and statistical inference",
    JASA 22 (1927) 209-212 [from memory]; agrees with ``scipy.stats.binomtest(k, n)
    .proportion_ci(method="wilson")``.
    """
    if n <= 0:
        return 0.0, 1.0
    z = z_value(confidence)
    phat = k / n
    denom = 1.0 + z * z / n
    centre = (phat + z * z / (2 * n)) / denom
    half = z / denom * math.sqrt(phat * (1 - phat) / n + z * z / (4 * n * n))
    return max(0.0, centre - half), min(1.0, centre + half)


def clopper_pearson_interval(k: int, n: int, confidence: float = 0.95) -> tuple[float, float]:
    """Clopper-Pearson ("exact") interval for a binomial proportion from beta quantiles.

    ``low = Beta(k, n-k+1).ppf(alpha/2)``, ``high = Beta(k+1, n-k).ppf(1-alpha/2)``; the beta
    quantile is ``scipy.special.betaincinv`` (what ``scipy.stats.beta.ppf`` evaluates).
    Source: Clopper and Pearson, Biometrika 26 (1934) 404-413 [from memory].
    """
    from scipy.special import betaincinv

    check_confidence(confidence)
    if n <= 0:
        return 0.0, 1.0
    alpha = 1.0 - confidence
    low = 0.0 if k == 0 else float(betaincinv(k, n - k + 1, alpha / 2))
    high = 1.0 if k == n else float(betaincinv(k + 1, n - k, 1 - alpha / 2))
    return low, high


@dataclass(frozen=True)
class HarmEstimate:
    """Estimated probability that feedforward makes a metric worse, with its interval.

    Attributes
    ----------
    probability : float
        ``count / n`` (NaN when ``n == 0``).
    low, high : float
        Confidence interval of the probability.
    count : int
        Samples where feedforward was worse.
    n : int
        Samples counted (all except those unstable in both arms).
    method : str
        ``"wilson"`` or ``"clopper-pearson"``.
    confidence : float
        Confidence level.
    """

    probability: float
    low: float
    high: float
    count: int
    n: int
    method: str = "wilson"
    confidence: float = 0.95

    def to_dict(self) -> dict:
        """``{"probability", "ci95": [lo, hi], "count", "n", "method"}`` (JSON-friendly)."""
        return {
            "probability": json_float(self.probability),
            f"ci{self.confidence * 100:g}": [json_float(self.low), json_float(self.high)],
            "count": self.count,
            "n": self.n,
            "method": self.method,
        }


def probability_worse(
    fb: np.ndarray,
    fbff: np.ndarray,
    *,
    tolerance: float = 0.0,
    method: str = "wilson",
    confidence: float = 0.95,
) -> HarmEstimate:
    """Probability that feedforward makes a metric worse than feedback alone.

    A sample counts as worse when ``fbff > fb + tolerance * |fb|`` (both finite). Unstable
    samples (NaN/inf metric): unstable only with feedforward -> worse; unstable only without
    feedforward -> not worse; unstable in both arms -> excluded from ``n``.

    Parameters
    ----------
    fb, fbff : ndarray, shape (n,)
        The same metric per sample, feedback only and feedback plus feedforward (lower is better).
    tolerance : float
        Relative margin (0.05: feedforward must be more than 5 % worse to count).
    method : {"wilson", "clopper-pearson"}
        Interval method.
    confidence : float
        Confidence level of the interval.

    Returns
    -------
    HarmEstimate
    """
    if method not in ("wilson", "clopper-pearson"):
        raise DataError(f"interval method must be 'wilson' or 'clopper-pearson', got {method!r}")
    if not (math.isfinite(tolerance) and tolerance >= 0.0):
        raise DataError(f"tolerance must be a non-negative fraction, got {tolerance!r}")
    a, b = paired_arrays(fb, fbff)
    ok_a, ok_b = np.isfinite(a), np.isfinite(b)
    both = ok_a & ok_b
    worse_both = np.zeros(a.shape, dtype=bool)
    np.greater(b, a + tolerance * np.abs(a), out=worse_both, where=both)
    count = int(np.count_nonzero(worse_both) + np.count_nonzero(ok_a & ~ok_b))
    n = int(np.count_nonzero(ok_a | ok_b))
    interval = wilson_interval if method == "wilson" else clopper_pearson_interval
    low, high = interval(count, n, confidence)
    prob = count / n if n else float("nan")
    return HarmEstimate(prob, low, high, count, n, method, confidence)
