"""The robust search's verdict weighs harm: a P90-better design that harms too often is refused.

Closed-form case (tests/helpers/harm_case.py): matched process and disturbance paths, only the
disturbance gain Kd uncertain (uniform), so gain factor g makes IAE worse exactly on the plants
with Kd < g Kd0 / 2, and the P90-optimal g is the search's upper bound 1.5.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest
from harm_case import (
    KD0,
    KD_LOW_HARMFUL,
    KD_LOW_SAFE,
    harm_case_text,
    harm_probability,
)

from robustff.case import RecommendationSpec, parse_case
from robustff.case.sampling import sample
from robustff.study.recommendation import judge_design
from robustff.tune.search import robust_search
from robustff.tune.verdict import judge_fresh, tune_verdict

SAMPLES = 200


def _fresh_kd(case, result) -> np.ndarray:
    values, names = sample(case, result.samples, result.fresh_seed)
    return values[:, names.index("disturbance.gain")]


def test_p90_optimum_that_harms_more_than_allowed_is_not_recommended():
    case = parse_case(harm_case_text(KD_LOW_HARMFUL, max_harm=0.03, samples=SAMPLES))
    result = robust_search(case)
    g = result.robust.gain_factor
    # The search did its job on its own objective: the winner's P90 is lower on fresh samples
    # and clear of Monte Carlo noise, so the objective alone would have recommended it.
    assert g == pytest.approx(1.5, abs=0.02)
    fresh = result.figures
    assert fresh["robust"]["fresh"].iae_p90 < fresh["nominal"]["fresh"].iae_p90
    assert result.verdict.clear and result.improvement_interval[0] > 0.0
    # Per fresh plant the harm flag is Kd < g Kd0 / 2 (closed form), so the counts are exact.
    kd = _fresh_kd(case, result)
    robust, nominal = result.verdict.designs["robust"], result.verdict.designs["nominal"]
    assert robust["harm_count"] == int(np.sum(kd < g * KD0 / 2.0)) > 0
    assert nominal["harm_count"] == int(np.sum(kd < KD0 / 2.0)) == 0
    assert robust["harm_n"] == nominal["harm_n"] == SAMPLES
    # The closed-form probability (g = 1.5: 6.25 %) lies in the reported 95 % interval.
    low, high = robust["harm_ci95"]
    assert low <= harm_probability(g, KD_LOW_HARMFUL) <= high
    # Wilson bound: Source: Wilson, "Probable inference, the law of succession, and statistical
    # inference", JASA 22 (1927) 209-212; scipy.stats.binomtest(...).proportion_ci("wilson").
    from scipy.stats import binomtest

    wilson = binomtest(robust["harm_count"], SAMPLES).proportion_ci(method="wilson")
    assert high == pytest.approx(wilson.high, rel=1e-9)
    assert high > 0.03 and not robust["passes"] and nominal["passes"]
    assert result.recommended == "nominal"
    assert result.recommended_settings == result.nominal
    reason = result.verdict.reason
    assert reason.startswith("Recommended: keep the nominal design")
    assert f"harm bound {100 * high:.1f} % > 3.0 %" in reason
    assert f"P(harm) {100 * robust['harm_count'] / SAMPLES:.1f} %" in reason
    assert f"{robust['harm_count']} of {SAMPLES} plants" in reason


def test_neither_design_recommended_when_both_miss_and_the_reason_says_why():
    # 200 harm-free plants bound the harm at 3.84 / 203.84 = 1.9 % (Wilson, k = 0), above 1 %.
    case = parse_case(harm_case_text(KD_LOW_HARMFUL, max_harm=0.01, samples=SAMPLES))
    result = robust_search(case)
    assert result.recommended == "none" and result.recommended_settings is None
    nominal = result.verdict.designs["nominal"]
    assert nominal["harm_count"] == 0
    assert nominal["harm_ci95"][1] == pytest.approx(1.959964 ** 2 / (SAMPLES + 1.959964 ** 2))
    reason = result.verdict.reason
    assert reason.startswith("Not recommended: neither design meets the criteria")
    assert "The robust optimum misses them" in reason and "the nominal design misses them" in reason
    # n = ceil(z^2 (1 - p) / p) harm-free samples reach the bound p (Wilson with k = 0, solved
    # for n; z = 1.96 for 95 %, Source: Wilson 1927 as above).
    assert "about 381 harm-free samples would pass" in reason


def test_a_harm_free_winner_that_is_clearly_better_is_recommended():
    # Kd >= 0.8: g = 1.5 harms only when Kd < 0.75, so no plant; the rule does not refuse all.
    case = parse_case(harm_case_text(KD_LOW_SAFE, max_harm=0.03, samples=SAMPLES))
    result = robust_search(case)
    assert harm_probability(result.robust.gain_factor, KD_LOW_SAFE) == 0.0
    assert result.verdict.designs["robust"]["harm_count"] == 0
    assert result.recommended == "robust"
    assert result.recommended_settings == result.robust
    assert result.verdict.reason.startswith("Recommended: the robust optimum")
    assert "clear of Monte Carlo noise" in result.verdict.reason


def test_improvement_criterion_and_the_order_of_the_decision():
    # The same judgement as the report's: a median IAE improvement below min_improvement fails.
    case = parse_case(harm_case_text(KD_LOW_SAFE, max_harm=0.03, samples=SAMPLES,
                                     min_improvement=0.6))
    result = robust_search(case)
    robust, nominal = result.verdict.designs["robust"], result.verdict.designs["nominal"]
    # IAE ratio |Kd - g Kd0| / Kd; g = 1: median of |1 - 1/Kd| for Kd ~ U(0.8, 3) is about
    # 0.49 (improvement ~51 %); g = 1.5 improves more (closed form, derived here).
    kd = _fresh_kd(case, result)
    for verdict, g in ((robust, result.robust.gain_factor), (nominal, 1.0)):
        expected = 1.0 - float(np.median(np.abs(kd - g * KD0) / kd))
        assert verdict["improvement_p50"] == pytest.approx(expected, rel=1e-6)
    assert not nominal["passes"] and "median IAE improvement" in nominal["reasons"][0]
    # The decision table (module docstring of robustff.tune.verdict), on fixed verdicts.
    good, bad = dict(robust, passes=True), dict(robust, passes=False, reasons=["x"])
    criteria = RecommendationSpec()
    pick = {
        (True, True, True): "robust", (True, True, False): "nominal",
        (False, True, True): "nominal", (True, False, False): "robust",
        (False, False, True): "none", (True, False, True): "robust",
    }
    for (robust_ok, nominal_ok, clear), expected in pick.items():
        verdict = tune_verdict(good if robust_ok else bad, good if nominal_ok else bad, criteria,
                               (1.0, 2.0) if clear else (-1.0, 2.0), "1 to 2 CV*s")
        assert verdict.recommended == expected, (robust_ok, nominal_ok, clear)
    neither = tune_verdict(bad, bad, criteria, (1.0, 2.0), "1 to 2 CV*s")
    assert "Robust optimum: x. Nominal design: the same." in neither.brief
    assert "(90 % bootstrap interval 1 to 2 CV*s) is clear of Monte Carlo noise" in neither.brief


def test_tune_uses_the_reports_judgement():
    # One rule: judge_fresh is judge_design on the harm estimate and the IAE-ratio summary.
    from robustff.stats import paired_comparison, probability_worse

    rng = np.random.default_rng(1)
    fb = rng.uniform(1.0, 2.0, 300)
    fbff = fb * rng.uniform(0.2, 1.05, 300)
    fbff[:3] = np.inf  # unstable with feedforward only
    case = parse_case(harm_case_text())
    settings = replace(robust_search(case, samples=20, max_evaluations=2).nominal)
    criteria = RecommendationSpec(max_harm=0.05, min_improvement=0.2)
    direct = judge_design(
        "robust", "static", 1.0, probability_worse(fb, fbff).to_dict(),
        paired_comparison(fb, fbff, (50.0, 90.0))["ratio_summary"].to_dict(), 3, 0, criteria)
    assert judge_fresh("robust", settings, fb, fbff, criteria) == direct
    assert direct["unstable"] == 3 and not direct["passes"]
    assert any("unstable" in reason for reason in direct["reasons"])
