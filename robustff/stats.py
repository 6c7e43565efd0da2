"""Statistics of Monte Carlo results: percentiles with intervals, harm probability, convergence.

Pure functions on arrays (samples along axis 0); no file I/O. ``scipy.special`` is imported inside
the functions that need it, so importing this module costs only numpy.

Conventions
-----------
* A sample whose metric is NaN or +-inf is *unstable* (the closed loop diverged). Summaries exclude
  such samples and report how many they used; :func:`probability_worse` counts a sample unstable
  only with feedforward as "feedforward worse" (see there).
* Percentile estimates use ``numpy.percentile(method="linear")``. Their confidence intervals are
  distribution-free: ``[X_(r), X_(s)]`` from order statistics, whose coverage for the true
  p-quantile is ``P(r <= B <= s - 1)`` with ``B ~ Binomial(n, p)`` for any continuous distribution
  (Source: David and Nagaraja, Order Statistics, 3rd ed. 2003, section 7.1 [from memory]).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np

from robustff.errors import DataError

__all__ = [
    "PercentileEstimate",
    "MetricSummary",
    "HarmEstimate",
    "ConvergenceCheck",
    "percentile_key",
    "order_statistic_coverage",
    "order_statistic_interval",
    "percentile_table",
    "summarize",
    "paired_comparison",
    "wilson_interval",
    "clopper_pearson_interval",
    "probability_worse",
    "samples_for_probability",
    "zero_failure_bound",
    "convergence_for_probability",
    "convergence_for_percentile",
    "convergence_check",
    "ratio_histogram",
    "envelope_from_histogram",
]

DEFAULT_PERCENTILES: tuple[float, ...] = (5.0, 10.0, 50.0, 90.0, 95.0, 99.0)


def _json_float(x: float) -> float | None:
    """Return ``x`` as a float, or None where it is NaN/inf (JSON has no NaN)."""
    x = float(x)
    return x if math.isfinite(x) else None


def _z_value(confidence: float) -> float:
    """Two-sided standard normal quantile for a confidence level (1.96 for 0.95)."""
    from scipy.special import ndtri

    _check_confidence(confidence)
    return float(ndtri(0.5 + confidence / 2.0))


def _check_confidence(confidence: float) -> None:
    if not (0.0 < confidence < 1.0):
        raise DataError(f"confidence level must lie strictly between 0 and 1, got {confidence!r}")


def _as_vector(values: np.ndarray, what: str) -> np.ndarray:
    arr = np.asarray(values, dtype=float)
    if arr.ndim != 1:
        raise DataError(f"{what} must be a 1-D array of samples, got shape {arr.shape}")
    return arr


def _check_percentiles(percentiles: Sequence[float]) -> list[float]:
    out = [float(p) for p in percentiles]
    if not out:
        raise DataError("at least one percentile is needed, e.g. 5, 50, 95")
    bad = [p for p in out if not (0.0 <= p <= 100.0)]
    if bad:
        raise DataError(f"percentiles must lie between 0 and 100, got {bad}")
    return out


def percentile_key(percentile: float) -> str:
    """Key of a percentile in exported tables: 5 -> ``"p5"``, 2.5 -> ``"p2.5"``."""
    return f"p{percentile:g}"


# --------------------------------------------------------------------------- percentiles


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
            "value": _json_float(self.value),
            "low": _json_float(self.low),
            "high": _json_float(self.high),
            "coverage": _json_float(self.coverage),
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
    from scipy.special import bdtr

    _check_confidence(confidence)
    if n < 2:
        return 0, 0, 0.0
    k = np.arange(n + 1)
    cdf = bdtr(k, n, p)  # cdf[j] = P(B <= j), j = 0..n
    r = np.arange(1, n + 1)
    below = np.where(r >= 1, cdf[r - 1], 0.0)  # P(B < r) = P(B <= r-1)
    # smallest s-1 with cdf[s-1] >= confidence + below (tiny slack for rounding)
    idx = np.searchsorted(cdf, confidence + below - 1e-12, side="left")
    s = idx + 1
    valid = (s <= n) & (s > r)
    if not np.any(valid):
        return 0, 0, float(cdf[n - 1] - cdf[0])
    r, s, below = r[valid], s[valid], below[valid]
    width = s - r
    above = 1.0 - cdf[s - 1]
    order = np.lexsort((np.abs(below - above), width))
    best = order[0]
    return int(r[best]), int(s[best]), float(cdf[s[best] - 1] - below[best])


def _finite(values: np.ndarray, what: str) -> np.ndarray:
    arr = _as_vector(values, what)
    return arr[np.isfinite(arr)]


def _estimate(
    sorted_values: np.ndarray, percentile: float, confidence: float
) -> PercentileEstimate:
    n = sorted_values.size
    if n == 0:
        nan = float("nan")
        return PercentileEstimate(percentile, nan, nan, nan, 0.0, False, 0)
    value = float(np.percentile(sorted_values, percentile, method="linear"))
    r, s, coverage = order_statistic_interval(n, percentile / 100.0, confidence)
    if r == 0:
        low, high = float(sorted_values[0]), float(sorted_values[-1])
        return PercentileEstimate(percentile, value, low, high, coverage, False, n)
    low, high = float(sorted_values[r - 1]), float(sorted_values[s - 1])
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
    plist = _check_percentiles(percentiles)
    _check_confidence(confidence)
    data = np.sort(_finite(values, "metric values"))
    return {percentile_key(p): _estimate(data, p, confidence) for p in plist}


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
            "mean": _json_float(self.mean),
            "std": _json_float(self.std),
            "n": self.n,
            "n_excluded": self.n_excluded,
        }
        for key, est in self.percentiles.items():
            out[key] = _json_float(est.value)
            out[f"{key}_{ci}"] = [_json_float(est.low), _json_float(est.high)]
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
    arr = _as_vector(values, "metric values")
    data = arr[np.isfinite(arr)]
    mean = float(np.mean(data)) if data.size else float("nan")
    std = float(np.std(data, ddof=1)) if data.size > 1 else float("nan")
    table = percentile_table(data, percentiles, confidence)
    return MetricSummary(mean, std, int(data.size), int(arr.size - data.size), confidence, table)


def _paired(fb: np.ndarray, fbff: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    a = _as_vector(fb, "feedback-only metric")
    b = _as_vector(fbff, "feedback-plus-feedforward metric")
    if a.shape != b.shape:
        raise DataError(
            f"paired metrics need one value per sample in both arms, got {a.size} and {b.size}"
        )
    return a, b


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
        ``"improvement"``, ``"ratio"``: ndarray (n,) (NaN where either arm is NaN/inf; ratio
        also NaN where ``fb == 0``); ``"improvement_summary"``, ``"ratio_summary"``:
        :class:`MetricSummary`. A ratio below 1 means feedforward helped.
    """
    a, b = _paired(fb, fbff)
    both = np.isfinite(a) & np.isfinite(b)
    improvement = np.where(both, a - b, np.nan)
    ok = both & (a != 0.0)
    ratio = np.full(a.shape, np.nan)
    np.divide(b, a, out=ratio, where=ok)
    return {
        "improvement": improvement,
        "ratio": ratio,
        "improvement_summary": summarize(improvement, percentiles, confidence),
        "ratio_summary": summarize(ratio, percentiles, confidence),
    }


# --------------------------------------------------------------------------- harm probability


def wilson_interval(k: int, n: int, confidence: float = 0.95) -> tuple[float, float]:
    """Wilson score interval for a binomial proportion ``k / n`` (no continuity correction).

    Source: Wilson, "Probable inference, the law of succession, and statistical inference",
    JASA 22 (1927) 209-212 [from memory]; agrees with ``scipy.stats.binomtest(k, n)
    .proportion_ci(method="wilson")``.
    """
    if n <= 0:
        return 0.0, 1.0
    z = _z_value(confidence)
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

    _check_confidence(confidence)
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
            "probability": _json_float(self.probability),
            f"ci{self.confidence * 100:g}": [_json_float(self.low), _json_float(self.high)],
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
    a, b = _paired(fb, fbff)
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


# --------------------------------------------------------------------------- convergence


@dataclass(frozen=True)
class ConvergenceCheck:
    """Whether the sample count was enough for the reported precision.

    Attributes
    ----------
    enough : bool
        True if the samples used reach the target precision.
    samples_needed : int
        Estimated number of samples that would reach it.
    message : str
        One sentence for the engineer.
    n : int
        Samples used.
    """

    enough: bool
    samples_needed: int
    message: str
    n: int

    def to_dict(self) -> dict:
        return {
            "enough": self.enough,
            "samples_needed": self.samples_needed,
            "n": self.n,
            "message": self.message,
        }


def samples_for_probability(p: float, half_width: float, confidence: float = 0.95) -> int:
    """Samples for a probability ``p`` to within ``+- half_width``: ``z^2 p (1-p) / E^2``.

    Source: normal approximation to the binomial, e.g. Cochran, Sampling Techniques, 3rd ed.
    1977, eq. 4.2 [from memory]; 385 for p = 0.5, E = 0.05 at 95 %.
    """
    if not (0.0 < half_width < 1.0):
        raise DataError(f"target half-width must lie between 0 and 1, got {half_width!r}")
    z = _z_value(confidence)
    return max(1, math.ceil(z * z * p * (1.0 - p) / (half_width * half_width)))


def zero_failure_bound(n: int, confidence: float = 0.95) -> float:
    """Upper bound on a probability after zero events in ``n`` independent samples.

    ``1 - (1 - confidence)^(1/n)``; about ``3/n`` at 95 % ("rule of three"). Fifty-nine
    event-free runs bound the probability below 5 % (Wilks 1941 [from memory]).
    """
    _check_confidence(confidence)
    if n < 1:
        return 1.0
    return 1.0 - (1.0 - confidence) ** (1.0 / n)


def convergence_for_probability(
    harm: HarmEstimate, *, half_width: float = 0.02, confidence: float = 0.95
) -> ConvergenceCheck:
    """Was N enough to state the probability of harm to ``+- half_width``?

    Uses ``p`` from the estimate; with zero (or all) harmful samples ``p`` is replaced by the
    one-sided bound ``1 - (1 - confidence)^(1/N)`` (zero failures in N runs; Wilks 1941
    [from memory]), so that an all-clear run of few samples is not called precise.
    """
    n = harm.n
    if n == 0:
        p_eff = 0.5
    else:
        p_bound = zero_failure_bound(n, confidence)
        p_eff = harm.probability
        if harm.count == 0:
            p_eff = p_bound
        elif harm.count == n:
            p_eff = 1.0 - p_bound
    needed = samples_for_probability(p_eff, half_width, confidence)
    enough = n >= needed
    level = f"{confidence * 100:g} %"
    prob = "n/a" if n == 0 else f"{harm.probability:.3f}"
    verdict = "enough" if enough else "not enough"
    msg = (
        f"Probability that feedforward is worse: {prob} from {n} samples; {n} samples are "
        f"{verdict} for +-{half_width:g} at {level} (about {needed} needed)."
    )
    return ConvergenceCheck(enough, needed, msg, n)


def _min_samples_for_interval(p: float, confidence: float, start: int) -> int:
    """Smallest n (>= start) for which an order-statistic interval of the p-quantile exists."""

    def exists(n: int) -> bool:
        return order_statistic_interval(n, p, confidence)[0] > 0

    lo, hi = max(2, start), max(2, start)
    while not exists(hi):  # doubling, then bisection (existence grows with n)
        lo, hi = hi + 1, 2 * hi
    while lo < hi:
        mid = (lo + hi) // 2
        lo, hi = (lo, mid) if exists(mid) else (mid + 1, hi)
    return hi


def _relative_half_width(est: PercentileEstimate) -> float:
    """Half-width of a percentile interval divided by |value| (inf when no scale)."""
    half = 0.5 * (est.high - est.low)
    if est.n == 0 or not math.isfinite(half):
        return float("inf")
    scale = abs(est.value)
    if scale > 0:
        return half / scale
    return 0.0 if half == 0 else float("inf")


def convergence_for_percentile(
    values: np.ndarray,
    percentiles: Sequence[float] = (50.0, 90.0),
    *,
    relative_half_width: float = 0.05,
    confidence: float = 0.95,
) -> ConvergenceCheck:
    """Was N enough for percentile intervals no wider than ``+- relative_half_width`` x value?

    The interval half-width shrinks like ``1/sqrt(N)`` (asymptotic normality of sample
    quantiles), so the samples needed are ``N (h / target)^2`` for the widest percentile
    (and at least the count for which an order-statistic interval exists).
    """
    if not (relative_half_width > 0.0):
        raise DataError(f"relative half-width must be positive, got {relative_half_width!r}")
    table = percentile_table(values, percentiles, confidence)
    n = next(iter(table.values())).n
    needed, worst_key, worst_rel = 1, "", -1.0
    for key, est in table.items():
        rel = _relative_half_width(est)
        if math.isfinite(rel):
            need = math.ceil(n * (rel / relative_half_width) ** 2)
        else:
            need = 2 * max(n, 50)  # no usable scale yet: ask for more, then check again
        if not est.exact:
            need = max(need, _min_samples_for_interval(est.percentile / 100, confidence, n))
        needed = max(needed, need)
        if rel > worst_rel:
            worst_key, worst_rel = key, rel
    inexact = [key.upper() for key, est in table.items() if not est.exact]
    enough = not inexact and worst_rel <= relative_half_width
    verdict = "enough" if enough else "not enough"
    level = f"{confidence * 100:g} %"
    if inexact:
        msg = (
            f"{n} samples are too few for a {level} interval at {', '.join(inexact)}; "
            f"about {needed} are needed for +-{relative_half_width * 100:g} %."
        )
        return ConvergenceCheck(False, needed, msg, n)
    msg = (
        f"Percentile intervals from {n} samples: the widest ({worst_key.upper()}) is +-"
        f"{worst_rel * 100:.1f} % of its value, so {n} samples are {verdict} for "
        f"+-{relative_half_width * 100:g} % (about {needed} needed)."
    )
    return ConvergenceCheck(enough, needed, msg, n)


def convergence_check(subject: HarmEstimate | np.ndarray, **options) -> ConvergenceCheck:
    """Convergence of a harm probability (HarmEstimate) or of a metric's percentiles (array).

    Keyword options go to :func:`convergence_for_probability` or
    :func:`convergence_for_percentile`.
    """
    if isinstance(subject, HarmEstimate):
        return convergence_for_probability(subject, **options)
    return convergence_for_percentile(np.asarray(subject, dtype=float), **options)


# --------------------------------------------------------------------------- histograms


def ratio_histogram(
    ratio: np.ndarray, bins: int = 40, low: float | None = None, high: float | None = None
) -> tuple[np.ndarray, np.ndarray]:
    """Histogram of per-sample ratios ``fbff / fb``.

    NaN is dropped; finite values outside the range and +-inf are counted in the first/last bin.
    The default range is P1..P99 of the finite values, widened to include 1.0 (no change).

    Returns
    -------
    counts : ndarray of int, shape (bins,)
    edges : ndarray, shape (bins + 1,)
    """
    if bins < 1:
        raise DataError(f"number of histogram bins must be at least 1, got {bins}")
    arr = _as_vector(ratio, "ratio")
    arr = arr[~np.isnan(arr)]
    finite = arr[np.isfinite(arr)]
    if low is None or high is None:
        p1, p99 = np.percentile(finite, [1, 99]) if finite.size else (1.0, 1.0)
        low = min(float(p1), 1.0) if low is None else low
        high = max(float(p99), 1.0) if high is None else high
    if not (math.isfinite(low) and math.isfinite(high)) or high < low:
        raise DataError(f"histogram range must be finite with low <= high, got {low}, {high}")
    if high == low:
        pad = max(0.05 * abs(low), 0.05)
        low, high = low - pad, high + pad
    edges = np.linspace(low, high, bins + 1)
    idx = np.searchsorted(edges, arr, side="right") - 1
    idx = np.clip(idx, 0, bins - 1)  # out-of-range and +-inf into the end bins
    counts = np.bincount(idx, minlength=bins).astype(np.int64)
    return counts, edges


def envelope_from_histogram(
    counts: np.ndarray, edges: np.ndarray, percentiles: Sequence[float] = (5.0, 50.0, 95.0)
) -> np.ndarray:
    """Percentiles at each time from per-time histogram counts.

    Values are taken as uniformly spread inside each bin, so a percentile is interpolated
    linearly within the bin where the cumulative count crosses it (accurate to one bin width).

    Parameters
    ----------
    counts : ndarray of int, shape (T, B)
        Count of samples per bin at each time (out-of-range values already in the end bins).
    edges : ndarray, shape (B + 1,)
        Increasing bin edges (signal unit).
    percentiles : sequence of float
        Percentiles in percent.

    Returns
    -------
    ndarray, shape (len(percentiles), T)
        NaN at times with no counts.
    """
    plist = _check_percentiles(percentiles)
    c = np.asarray(counts, dtype=float)
    e = np.asarray(edges, dtype=float)
    if c.ndim != 2 or e.ndim != 1 or e.size != c.shape[1] + 1:
        raise DataError(
            f"histogram counts must be (times, bins) with bins + 1 edges, got {c.shape} "
            f"and {e.shape}"
        )
    if np.any(c < 0) or np.any(np.diff(e) <= 0):
        raise DataError("histogram counts must be non-negative and edges strictly increasing")
    n_bins = c.shape[1]
    cum = np.concatenate([np.zeros((c.shape[0], 1)), np.cumsum(c, axis=1)], axis=1)  # (T, B+1)
    total = cum[:, -1]
    out = np.full((len(plist), c.shape[0]), np.nan)
    rows = np.arange(c.shape[0])
    for i, p in enumerate(plist):
        # small positive floor so P0 lands in the first non-empty bin, not on an empty one
        target = np.clip(p / 100.0 * total, 1e-9 * total, total)
        j = np.clip(np.sum(cum < target[:, None], axis=1), 1, n_bins)  # crossing bin is j-1
        in_bin = c[rows, j - 1]
        frac = np.divide(
            target - cum[rows, j - 1], in_bin, out=np.zeros_like(target), where=in_bin > 0
        )
        out[i] = np.where(total > 0, e[j - 1] + np.clip(frac, 0, 1) * (e[j] - e[j - 1]), np.nan)
    return out
