"""Percentiles with distribution-free confidence intervals, metric summaries, paired comparisons.

Percentile estimates use ``numpy.percentile(method="linear")``. Their confidence intervals are
distribution-free: ``[X_(r), X_(s)]`` from order statistics, whose coverage for the true
p-quantile is ``P(r <= B <= s - 1)`` with ``B ~ Binomial(n, p)`` for any continuous distribution
(Source: David and Nagaraja, Order Statistics, 3rd ed. 2003, section 7.1 [from memory]).
``scipy.special`` is imported inside the functions that need it.
"""

from __future__ import annotations

import functools
import math
from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np

from robustff.errors import DataError
from robustff.jsonvalues import json_float
from robustff.stats._validation import (
    as_vector,
    check_confidence,
    check_percentiles,
    finite_values,
    paired_arrays,
)

__all__ = [
    "DEFAULT_PERCENTILES",
    "PercentileEstimate",
    "MetricSummary",
    "percentile_key",
    "order_statistic_coverage",
    "order_statistic_interval",
    "percentile_table",
    "summarize",
    "paired_comparison",
    "metric_ratio",
]

DEFAULT_PERCENTILES: tuple[float, ...] = (5.0, 10.0, 50.0, 90.0, 95.0, 99.0)


def percentile_key(percentile: float) -> str:
    """Key of a percentile in exported tables: 5 -> ``"p5"``, 2.5 -> ``"p2.5"``."""
    return f"p{percentile:g}"


@dataclass(frozen=True)
class PercentileEstimate:
    """One percentile with its distribution-free confidence interval.

    Attributes
    ----------
    percentile : float
        Percentile in percent (0..100).
    value : float
        ``numpy.percentile(..., method="linear")`` of the samples used; NaN if none.
    low, high : float
        Interval ``[X_(r), X_(s)]`` (same unit as the metric).
    coverage : float
        Achieved coverage probability of the interval for the true percentile.
    exact : bool
        True if the interval reaches the requested confidence; False when there are too few
        samples and ``low, high`` are the sample minimum and maximum (coverage below the target).
    n : int
        Number of samples used (finite values).
    """

    percentile: float
    value: float
    low: float
    high: float
    coverage: float
    exact: bool
    n: int

    def to_dict(self) -> dict:
        """JSON-friendly dict (NaN becomes None)."""
        return {
            "percentile": self.percentile,
            "value": json_float(self.value),
            "low": json_float(self.low),
            "high": json_float(self.high),
            "coverage": json_float(self.coverage),
            "exact": self.exact,
            "n": self.n,
        }


def order_statistic_coverage(n: int, p: float, r: int, s: int) -> float:
    """Coverage of ``[X_(r), X_(s)]`` (1-based ranks, r < s) for the true p-quantile.

    Parameters
    ----------
    n : int
        Sample size.
    p : float
        Quantile as a fraction (0..1).
    r, s : int
        1-based ranks of the lower and upper order statistics, ``1 <= r < s <= n``.

    Returns
    -------
    float
        ``P(r <= B <= s-1)`` with ``B ~ Binomial(n, p)``.
    """
    from scipy.special import bdtr

    if not (1 <= r < s <= n):
        raise DataError(f"order-statistic ranks need 1 <= r < s <= n, got r={r}, s={s}, n={n}")
    lower = float(bdtr(r - 1, n, p)) if r >= 1 else 0.0
    return float(bdtr(s - 1, n, p)) - lower


def order_statistic_interval(n: int, p: float, confidence: float = 0.95) -> tuple[int, int, float]:
    """Shortest rank pair ``(r, s)`` whose coverage of the p-quantile is at least ``confidence``.

    Among the pairs with the fewest ranks between them, the one with the most equal tail
    probabilities ``P(B < r)`` and ``P(B >= s)`` is chosen (near-symmetric around ``n p``).
    The answer depends only on ``(n, p, confidence)`` and costs a binomial distribution function
    over ``n + 1`` points, so it is remembered for the last few hundred arguments (a study asks
    the same question for every metric and arm).

    Parameters
    ----------
    n : int
        Sample size (>= 0).
    p : float
        Quantile as a fraction (0..1).
    confidence : float
        Required coverage.

    Returns
    -------
    r, s : int
        1-based ranks; ``(0, 0)`` when no pair within ``1..n`` reaches the confidence.
    coverage : float
        Achieved coverage (for ``(0, 0)``: the coverage of ``[X_(1), X_(n)]``, 0 if n < 2).
    """
    check_confidence(confidence)
    return _interval_ranks(int(n), float(p), float(confidence))


#: Above this sample size only ranks within ``_WINDOW_SD`` binomial standard deviations of
#: ``n p`` are searched (see :func:`_interval_ranks`).
_WINDOW_FROM = 20_000
_WINDOW_SD = 40.0


@functools.lru_cache(maxsize=512)
def _interval_ranks(n: int, p: float, confidence: float) -> tuple[int, int, float]:
    """:func:`order_statistic_interval` once its arguments are checked (remembered).

    For large ``n`` the search runs over the ranks within 40 standard deviations of ``n p``
    (the full range below ``_WINDOW_FROM``). The answer is the same: the binomial mass beyond
    that window is far below the rounding of the coverage, so a pair reaching past it is
    either short of the confidence or wider than the same pair cut at the window, and every
    probability is the same ``bdtr`` value the full search would use.
    """
    from scipy.special import bdtr

    if n < 2:
        return 0, 0, 0.0
    lo, hi = 0, n  # ranks j = lo..hi of cdf[j] = P(B <= j)
    if n > _WINDOW_FROM:
        centre, spread = n * p, math.sqrt(n * p * (1.0 - p))
        lo = max(0, math.floor(centre - _WINDOW_SD * spread) - 1)
        hi = min(n, math.ceil(centre + _WINDOW_SD * spread) + 1)
    cdf = bdtr(np.arange(lo, hi + 1), n, p)  # cdf[j - lo] = P(B <= j)
    r = np.arange(lo + 1, min(hi, n - 1) + 2)  # 1-based lower ranks, r - 1 within the window
    below = cdf[r - 1 - lo]  # P(B < r) = P(B <= r-1)
    # smallest s-1 with cdf[s-1] >= confidence + below (tiny slack for rounding)
    idx = np.searchsorted(cdf, confidence + below - 1e-12, side="left")
    s = lo + idx + 1
    valid = (idx < cdf.size) & (s <= n) & (s > r)
    if not np.any(valid):
        ends = bdtr(np.array([0, n - 1]), n, p)
        return 0, 0, float(ends[1] - ends[0])
    r, s, below = r[valid], s[valid], below[valid]
    width = s - r
    above = 1.0 - cdf[s - 1 - lo]
    order = np.lexsort((np.abs(below - above), width))
    best = order[0]
    return int(r[best]), int(s[best]), float(cdf[s[best] - 1 - lo] - below[best])


def _estimate(
    ordered: np.ndarray, percentile: float, value: float, confidence: float
) -> PercentileEstimate:
    """One percentile of ``ordered``, whose entries at the ranks needed (the interval ends, the
    minimum and the maximum) already sit where a full sort would put them."""
    n = ordered.size
    if n == 0:
        nan = float("nan")
        return PercentileEstimate(percentile, nan, nan, nan, 0.0, False, 0)
    r, s, coverage = order_statistic_interval(n, percentile / 100.0, confidence)
    if r == 0:
        low, high = float(ordered[0]), float(ordered[-1])
        return PercentileEstimate(percentile, value, low, high, coverage, False, n)
    low, high = float(ordered[r - 1]), float(ordered[s - 1])
    return PercentileEstimate(percentile, value, low, high, coverage, True, n)


def percentile_table(
    values: np.ndarray, percentiles: Sequence[float], confidence: float = 0.95
) -> dict[str, PercentileEstimate]:
    """Percentiles of a metric with distribution-free confidence intervals.

    Parameters
    ----------
    values : ndarray, shape (n,)
        One metric value per sample (metric unit). NaN/inf (unstable samples) are excluded.
    percentiles : sequence of float
        Percentiles in percent, each in 0..100.
    confidence : float
        Confidence level of the intervals (default 0.95).

    Returns
    -------
    dict
        ``{percentile_key(p): PercentileEstimate}`` in the order given; each estimate carries
        the number of samples used, ``n``.
    """
    return _table_of_finite(finite_values(values, "metric values"), percentiles, confidence)


def _table_of_finite(data: np.ndarray, percentiles: Sequence[float],
                     confidence: float) -> dict[str, PercentileEstimate]:
    # percentile_table on finite values the caller no longer needs: reordered in place.
    plist = check_percentiles(percentiles)
    check_confidence(confidence)
    n = data.size
    if n == 0:
        return {percentile_key(p): _estimate(data, p, float("nan"), confidence) for p in plist}
    # Only a few order statistics are needed: a partial sort (introselect) at those ranks puts
    # exactly the same numbers there as a full sort, at a fraction of its cost for large n.
    # overwrite_input: data is this function's to reorder (the order statistics do not depend
    # on the order it is left in by the partial sort), so numpy makes no copy of its own
    levels = np.percentile(data, plist, method="linear", overwrite_input=True)
    ranks = {0, n - 1}
    for p in plist:
        r, s, _ = order_statistic_interval(n, p / 100.0, confidence)
        if r > 0:
            ranks.update((r - 1, s - 1))
    data.partition(sorted(ranks))
    return {percentile_key(p): _estimate(data, p, float(level), confidence)
            for p, level in zip(plist, levels, strict=True)}


@dataclass(frozen=True)
class MetricSummary:
    """Mean, standard deviation and percentiles (with intervals) of one metric in one arm.

    Attributes
    ----------
    mean, std : float
        Sample mean and standard deviation (ddof=1) of the finite values (metric unit).
    n : int
        Samples used (finite values).
    n_excluded : int
        Samples excluded as NaN/inf (unstable).
    confidence : float
        Confidence level of the percentile intervals.
    percentiles : dict
        ``{"p5": PercentileEstimate, ...}``.
    """

    mean: float
    std: float
    n: int
    n_excluded: int
    confidence: float
    percentiles: dict[str, PercentileEstimate] = field(default_factory=dict)

    def to_dict(self) -> dict:
        """``{"mean", "std", "n", "n_excluded", "p5": v, "p5_ci95": [lo, hi], ...}``."""
        ci = f"ci{self.confidence * 100:g}"
        out: dict = {
            "mean": json_float(self.mean),
            "std": json_float(self.std),
            "n": self.n,
            "n_excluded": self.n_excluded,
        }
        for key, est in self.percentiles.items():
            out[key] = json_float(est.value)
            out[f"{key}_{ci}"] = [json_float(est.low), json_float(est.high)]
        return out


def summarize(
    values: np.ndarray,
    percentiles: Sequence[float] = DEFAULT_PERCENTILES,
    confidence: float = 0.95,
) -> MetricSummary:
    """Summarise one metric: mean, std (ddof=1), percentiles with order-statistic intervals.

    Parameters
    ----------
    values : ndarray, shape (n,)
        One metric value per sample; NaN/inf (unstable samples) are excluded and counted.
    percentiles : sequence of float
        Percentiles in percent.
    confidence : float
        Confidence level of the percentile intervals.

    Returns
    -------
    MetricSummary
    """
    arr = as_vector(values, "metric values")
    data = arr[np.isfinite(arr)]
    mean = float(np.mean(data)) if data.size else float("nan")
    std = float(np.std(data, ddof=1)) if data.size > 1 else float("nan")
    table = _table_of_finite(data, percentiles, confidence)  # after the mean: reorders data
    return MetricSummary(mean, std, int(data.size), int(arr.size - data.size), confidence, table)


def metric_ratio(fb: np.ndarray, fbff: np.ndarray) -> np.ndarray:
    """Per-sample ratio ``fbff / fb`` of one metric (e.g. the IAE ratio); below 1 FF helped.

    Parameters
    ----------
    fb, fbff : ndarray, shape (n,)
        The same metric per sample (its unit cancels), feedback only and feedback plus
        feedforward.

    Returns
    -------
    ndarray, shape (n,)
        ``fbff / fb`` where ``fb > 0``; NaN where ``fb`` is zero, negative or NaN (no meaningful
        reference) and wherever ``fbff`` is NaN. Elsewhere IEEE division applies: an infinite
        ``fbff`` (an unstable sample in the tuning searches) gives inf, an infinite ``fb`` gives
        0 or NaN. The study's simulator reports unstable samples as NaN, so there the ratio is
        finite or NaN.
    """
    fb_arr, fbff_arr = np.asarray(fb, dtype=float), np.asarray(fbff, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.asarray(np.divide(fbff_arr, fb_arr))
    ratio[~(fb_arr > 0)] = np.nan  # in place: one array of the samples' size, not three
    return ratio


def paired_comparison(
    fb: np.ndarray,
    fbff: np.ndarray,
    percentiles: Sequence[float] = DEFAULT_PERCENTILES,
    confidence: float = 0.95,
) -> dict:
    """Per-sample improvement ``fb - fbff`` and ratio ``fbff / fb``, with their summaries.

    Parameters
    ----------
    fb, fbff : ndarray, shape (n,)
        The same metric per sample, feedback only and feedback plus feedforward.
    percentiles : sequence of float
        Percentiles in percent for the summaries.
    confidence : float
        Confidence level of the percentile intervals.

    Returns
    -------
    dict
        ``"improvement"``: ndarray (n,), NaN where either arm is NaN/inf; ``"ratio"``:
        ndarray (n,) from :func:`metric_ratio`; ``"improvement_summary"``,
        ``"ratio_summary"``: :class:`MetricSummary` (over the finite values). A ratio below 1
        means feedforward helped.
    """
    a, b = paired_arrays(fb, fbff)
    both = np.isfinite(a) & np.isfinite(b)
    improvement = np.subtract(a, b)
    improvement[~both] = np.nan  # in place: one array of the samples' size, not two
    ratio = metric_ratio(a, b)
    return {
        "improvement": improvement,
        "ratio": ratio,
        "improvement_summary": summarize(improvement, percentiles, confidence),
        "ratio_summary": summarize(ratio, percentiles, confidence),
    }
