"""Sample-size advice for the probability of harm, judged on the Wilson interval it reports."""

from __future__ import annotations

import math

import pytest

from robustff.stats.convergence import (
    convergence_for_probability,
    wilson_reach,
    wilson_samples_needed,
)
from robustff.stats.harm import HarmEstimate, probability_worse, wilson_interval

Z95 = 1.959963984540054  # two-sided 95 % normal quantile


def hand_wilson(p: float, n: float, z: float = Z95) -> tuple[float, float]:
    """Wilson score interval written out by hand.

    Source: Wilson, "Probable inference, the law of succession, and statistical inference",
    JASA 22 (1927) 209-212 [from memory]: the roots in P of (p - P)^2 = z^2 P (1 - P) / n,
    P = (p + z^2/(2n) +- z sqrt(p(1-p)/n + z^2/(4n^2))) / (1 + z^2/n).
    """
    centre = p + z * z / (2 * n)
    half = z * math.sqrt(p * (1 - p) / n + z * z / (4 * n * n))
    denom = 1 + z * z / n
    return (centre - half) / denom, (centre + half) / denom


def _estimate(count: int, n: int) -> HarmEstimate:
    low, high = wilson_interval(count, n)
    return HarmEstimate(count / n, low, high, count, n)


def test_hand_wilson_is_a_root_of_the_score_equation() -> None:
    # guards the hand formula itself: both ends solve (p - P)^2 = z^2 P (1 - P) / n
    for p, n in [(0.001, 10), (0.2, 1000), (0.0, 50)]:
        for end in hand_wilson(p, n):
            assert (p - end) ** 2 == pytest.approx(Z95**2 * end * (1 - end) / n, abs=1e-15)


def test_ten_samples_at_one_in_a_thousand_are_far_from_enough() -> None:
    # The defect: the normal approximation z^2 p (1-p) / E^2 gives about 10 samples here, and
    # with 10 samples the Wilson interval reaches 28 % (upper end by hand below).
    low, high = hand_wilson(0.001, 10)
    assert high == pytest.approx(0.28, abs=0.01)
    needed = wilson_samples_needed(0.001, 0.02)
    assert needed > 150
    # minimal: the far end of the hand-computed interval is within 0.02 at N, not at N - 1
    assert max(hand_wilson(0.001, needed)[1] - 0.001, 0.001 - hand_wilson(0.001, needed)[0]) \
        <= 0.02
    assert hand_wilson(0.001, needed - 1)[1] - 0.001 > 0.02


def test_zero_harm_needs_z_squared_times_one_over_e_minus_one() -> None:
    # With no harmful sample the Wilson interval is [0, z^2/(n + z^2)] (hand formula, p = 0),
    # so the upper end reaches E = 0.02 at n = z^2 (1/E - 1) = 188.2 -> 189 samples.
    assert hand_wilson(0.0, 189)[1] <= 0.02 < hand_wilson(0.0, 188)[1]
    assert wilson_samples_needed(0.0, 0.02) == math.ceil(Z95**2 * (1 / 0.02 - 1)) == 189


@pytest.mark.parametrize("p", [0.05, 0.2, 0.5, 0.9])
def test_samples_needed_is_the_smallest_n_of_the_hand_interval(p: float) -> None:
    needed = wilson_samples_needed(p, 0.02)

    def reach(n: int) -> float:
        low, high = hand_wilson(p, n)
        return max(high - p, p - low)

    assert reach(needed) <= 0.02 < reach(needed - 1)
    assert wilson_reach(p, needed) == pytest.approx(reach(needed), rel=1e-12)


def test_rare_harm_is_phrased_as_an_upper_bound() -> None:
    check = convergence_for_probability(_estimate(1, 1000))
    low, high = hand_wilson(0.001, 1000)
    assert f"at most {100 * high:.2g} %" in check.message  # 0.56 %
    assert "Wilson" in check.message and "1 of 1000" in check.message
    assert check.enough  # the upper end, 0.56 %, is within 2 points of 0.1 %
    few = convergence_for_probability(_estimate(0, 10))
    assert not few.enough and few.samples_needed == 189
    assert "at most 28 %" in few.message and "about 189 needed" in few.message


def test_common_harm_uses_the_reported_interval() -> None:
    check = convergence_for_probability(_estimate(200, 1000))
    assert not check.enough  # Wilson interval 0.176 to 0.226 reaches 0.026 above 0.2
    assert check.samples_needed == wilson_samples_needed(0.2, 0.02)
    assert "0.176 to 0.226" in check.message
    assert convergence_for_probability(_estimate(4000, 20000)).enough


def test_advice_judges_the_clopper_pearson_interval_when_that_is_reported() -> None:
    harm = probability_worse([1.0] * 95 + [1.0] * 5, [0.5] * 95 + [2.0] * 5,
                             method="clopper-pearson")
    check = convergence_for_probability(harm)
    assert "Clopper-Pearson" in check.message
    assert not check.enough  # 5 of 100: the exact interval reaches 11 %
