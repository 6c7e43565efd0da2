"""Whether the sample count was enough for a harm probability or a metric's percentiles."""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from robustff.errors import DataError
from robustff.stats._validation import check_confidence, z_value
from robustff.stats.harm import HarmEstimate, wilson_interval
from robustff.stats.percentiles import (
    PercentileEstimate,
    order_statistic_interval,
    percentile_table,
)

__all__ = [
    "ConvergenceCheck",
    "samples_for_probability",
    "wilson_reach",
    "wilson_samples_needed",
    "zero_failure_bound",
    "convergence_for_probability",
    "convergence_for_percentile",
    "convergence_check",
]


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
    z = z_value(confidence)
    return max(1, math.ceil(z * z * p * (1.0 - p) / (half_width * half_width)))


def zero_failure_bound(n: int, confidence: float = 0.95) -> float:
    """Upper bound on a probability after zero events in ``n`` independent samples.

    ``1 - (1 - confidence)^(1/n)``; about ``3/n`` at 95 % ("rule of three"). Fifty-nine
    event-free runs bound the probability below 5 % (Wilks 1941 [from memory]).
    """
    check_confidence(confidence)
    if n < 1:
        return 1.0
    return 1.0 - (1.0 - confidence) ** (1.0 / n)


def wilson_reach(p: float, n: float, confidence: float = 0.95) -> float:
    """How far the Wilson interval of a proportion ``p`` from ``n`` samples reaches from ``p``.

    ``max(high - p, p - low)`` of the Wilson score interval (Wilson 1927, the interval
    :func:`robustff.stats.harm.wilson_interval` reports) with ``k = p n`` events; for rare
    harm (small ``p``) this is the distance from the estimate up to the interval's upper bound.
    ``n`` may be fractional (the interval is a smooth function of it).
    """
    if n <= 0:
        return 1.0
    low, high = wilson_interval(p * n, n, confidence)  # type: ignore[arg-type]
    return max(high - p, p - low)


def wilson_samples_needed(p: float, half_width: float, confidence: float = 0.95) -> int:
    """Smallest sample count whose Wilson interval around ``p`` reaches no further than
    ``half_width`` from it (see :func:`wilson_reach`).

    With ``p = 0`` the interval is ``[0, z^2 / (n + z^2)]``, so ``n = z^2 (1/E - 1)``: 189 for
    E = 0.02 at 95 %. Unlike the normal approximation ``z^2 p (1-p) / E^2`` (about 10 samples
    for p = 0.001, whose Wilson interval is then 0 to 28 %), this never calls a handful of
    samples enough for a rare event.
    """
    if not (0.0 < half_width < 1.0):
        raise DataError(f"target half-width must lie between 0 and 1, got {half_width!r}")
    if not (0.0 <= p <= 1.0):
        raise DataError(f"probability must lie between 0 and 1, got {p!r}")
    check_confidence(confidence)
    low, high = 1, 1
    while wilson_reach(p, high, confidence) > half_width:  # doubling, then bisection
        low, high = high + 1, 2 * high
    while low < high:
        mid = (low + high) // 2
        low, high = (low, mid) if wilson_reach(p, mid, confidence) <= half_width else (mid + 1,
                                                                                       high)
    return high


_METHOD_NAMES = {"wilson": "Wilson", "clopper-pearson": "Clopper-Pearson"}

#: Below this estimated probability, harm is "rare" and the advice is phrased as an upper bound.
RARE_HARM = 0.05


def convergence_for_probability(
    harm: HarmEstimate, *, half_width: float = 0.02, confidence: float | None = None
) -> ConvergenceCheck:
    """Was N enough to state the probability of harm within ``half_width`` of the estimate?

    Judged on the interval the estimate reports (``harm.low``, ``harm.high``; Wilson unless
    asked otherwise): enough when neither end lies further than ``half_width`` from the estimate.
    The samples needed are :func:`wilson_samples_needed` at the estimated probability (zero harm
    included: the Wilson interval is not degenerate there). Rare harm (estimate below
    :data:`RARE_HARM`) is phrased as an upper bound: "at most x % at 95 % confidence".
    """
    n = harm.n
    confidence = harm.confidence if confidence is None else confidence
    level = f"{confidence * 100:g} %"
    if n == 0:
        msg = ("Probability that feedforward is worse: no usable samples (unstable in both arms); "
               "more samples will not help: fix the feedback design or the uncertainty ranges.")
        return ConvergenceCheck(False, wilson_samples_needed(0.5, half_width, confidence), msg, 0)
    p = harm.probability
    needed = wilson_samples_needed(p, half_width, confidence)
    reach = max(harm.high - p, p - harm.low)
    enough = reach <= half_width
    verdict = "enough" if enough else "not enough"
    points = f"{half_width * 100:g} percentage points"
    method = _METHOD_NAMES.get(harm.method, harm.method)
    if p < RARE_HARM:
        msg = (
            f"Feedforward is worse in {100 * p:.2g} % of plants ({harm.count} of {n} samples); "
            f"at {level} confidence at most {100 * harm.high:.2g} % (upper end of the "
            f"{method} interval). {n} samples are {verdict} to bound it within {points} "
            f"of the estimate (about {needed} needed)."
        )
    else:
        msg = (
            f"Probability that feedforward is worse: {p:.3f} from {n} samples, {level} "
            f"{method} interval {harm.low:.3f} to {harm.high:.3f}; {n} samples are "
            f"{verdict} for +-{points} (about {needed} needed)."
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
