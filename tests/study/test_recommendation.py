"""The recommendation judged on hand-made summaries: each criterion, the choice between passing
designs, the criteria's basis, the drivers and the conditions."""

from __future__ import annotations

from typing import Any

import pytest

from robustff.case import RecommendationSpec
from robustff.stats.harm import wilson_interval
from robustff.study.recommendation import (
    CRITERIA_BASIS_CASE,
    CRITERIA_BASIS_DEFAULT,
    recommend,
    samples_for_bound,
)

DEFAULT = RecommendationSpec()


def design(name: str, *, harm: int = 0, n: int = 1000, p50: float | None = 0.6,
           p90: float | None = 0.8, structure: str = "lead-lag", gain_factor: float = 1.0,
           unstable: int = 0) -> dict[str, Any]:
    low, high = wilson_interval(harm, n)
    ratio: dict[str, Any] = {"mean": 0.6, "std": 0.1, "n": n, "n_excluded": 0}
    if p50 is not None:
        ratio |= {"p50": p50, "p50_ci95": [p50 - 0.02, p50 + 0.03]}
    if p90 is not None:
        ratio |= {"p90": p90, "p90_ci95": [p90 - 0.02, p90 + 0.03]}
    return {
        "name": name,
        "feedforward": {"structure": structure, "gain_factor": gain_factor},
        "ff_worse": {"iae": {"probability": harm / n, "ci95": [low, high], "count": harm,
                             "n": n, "method": "wilson"}},
        "ratio": {"iae": ratio},
        "unstable": unstable,
    }


def summary(*designs: dict[str, Any], fb_unstable: int = 0, enough: bool = True,
            partial: bool = False, sensitivity: list | None = None) -> Any:
    return {
        "designs": list(designs),
        "unstable": {"fb": fb_unstable, "fbff": designs[0]["unstable"]},
        "sensitivity": sensitivity or [],
        "convergence": {"ff_worse_iae": {"enough": enough, "samples_needed": 5000, "n": 1000,
                                         "message": "about 5000 samples are needed"}},
        "partial": partial, "samples": 1000, "requested": 1000 if not partial else 4000,
        "warnings": [],
    }


def test_a_design_meeting_both_criteria_is_recommended():
    result = recommend(summary(design("case")), DEFAULT)
    assert result["design"] == "case"
    verdict = result["designs"][0]
    assert verdict["passes"] and verdict["reasons"] == []
    assert verdict["improvement_p50"] == pytest.approx(0.4)  # 1 - 0.6
    assert verdict["improvement_p50_ci95"] == pytest.approx([1 - 0.63, 1 - 0.58])
    assert verdict["improvement_p90"] == pytest.approx(0.2)  # 1 - 0.8
    assert "40.0 %" in result["reason"]
    assert result["criteria"]["basis"] == CRITERIA_BASIS_DEFAULT


def test_the_passing_design_with_the_largest_median_improvement_wins():
    result = recommend(summary(design("case", p50=0.7), design("lead-lag-0.8", p50=0.5),
                               design("static", p50=0.75)), DEFAULT)
    assert result["design"] == "lead-lag-0.8"
    assert "2 other design(s) also pass" in result["reason"]


def test_a_harm_bound_above_max_harm_fails_even_with_a_large_improvement():
    # 20 of 1000 worse: Wilson upper bound about 3.1 %, above 1 %.
    result = recommend(summary(design("case", harm=20, p50=0.2)), DEFAULT)
    assert result["design"] is None
    (reason,) = result["designs"][0]["reasons"]
    assert reason.startswith("harm bound 3.1 % > 1.0 % (upper 95 % bound)")
    assert result["reason"].startswith("No design meets the criteria")


def test_no_harm_seen_in_too_few_samples_says_how_many_are_needed():
    # 0 of 200: Wilson upper bound z^2/(n+z^2) = 1.9 % > 1 % (Wilson 1927, score interval).
    result = recommend(summary(design("case", n=200)), DEFAULT)
    (reason,) = result["designs"][0]["reasons"]
    assert "none worse of 200: about 381 harm-free samples would pass" in reason


def test_samples_for_bound_matches_the_wilson_interval():
    n = samples_for_bound(0.01)
    assert wilson_interval(0, n)[1] <= 0.01 < wilson_interval(0, n - 1)[1]


def test_the_bounds_are_inclusive():
    spec = RecommendationSpec(max_harm=wilson_interval(3, 1000)[1], min_improvement=0.4)
    result = recommend(summary(design("case", harm=3, p50=0.6)), spec)
    assert result["design"] == "case"


def test_the_same_shortfall_is_named_once_for_every_design_it_hits():
    result = recommend(summary(design("case", n=200), design("static", n=200),
                               design("lead-lag", p50=0.9)), DEFAULT)
    assert result["reason"].count("harm bound") == 1
    assert "case, static: harm bound" in result["reason"]
    assert "lead-lag: median IAE improvement 10.0 % < 20.0 %" in result["reason"]


def test_too_small_an_improvement_fails():
    result = recommend(summary(design("case", p50=0.85)), DEFAULT)
    assert result["design"] is None
    assert result["designs"][0]["reasons"] == ["median IAE improvement 15.0 % < 20.0 %"]


def test_without_feedforward_nothing_is_recommended():
    result = recommend(summary(design("case", structure="none", p50=1.0)), DEFAULT)
    assert result["design"] is None
    assert "no feedforward (structure none)" in result["designs"][0]["reasons"]


def test_a_missing_median_is_explained_not_guessed():
    result = recommend(summary(design("case", p50=None, p90=None)), DEFAULT)
    verdict = result["designs"][0]
    assert not verdict["passes"] and verdict["improvement_p50"] is None
    assert any("--percentiles" in reason for reason in verdict["reasons"])


def test_more_unstable_samples_than_feedback_alone_fails():
    result = recommend(summary(design("case", unstable=3), fb_unstable=1), DEFAULT)
    assert result["design"] is None
    assert "3 unstable samples against 1 with feedback" in result["designs"][0]["reasons"][0]


def test_criteria_from_the_case_are_applied_and_labelled():
    spec = RecommendationSpec(max_harm=0.05, min_improvement=0.1)
    result = recommend(summary(design("case", harm=20, p50=0.85)), spec)
    assert result["design"] == "case"
    assert result["criteria"] == {"max_harm": 0.05, "min_improvement": 0.1,
                                  "basis": CRITERIA_BASIS_CASE}


def test_drivers_are_the_strongest_correlations_and_conditions_name_the_gaps():
    rows = [{"name": name, "rho": rho, "ci95": [rho - 0.1, rho + 0.1], "n": 1000,
             "rho_harm": None, "harm_ci95": [None, None], "n_harm": 1000}
            for name, rho in (("process.gain", 0.2), ("process.dead_time", -0.7),
                              ("disturbance.gain", 0.5), ("sensor.time_constant", 0.05))]
    result = recommend(summary(design("case", gain_factor=0.8), sensitivity=rows, enough=False,
                               partial=True), DEFAULT)
    assert [d["name"] for d in result["drivers"]] == [
        "process.dead_time", "disturbance.gain", "process.gain"]
    text = " ".join(result["conditions"])
    assert "more samples are needed" in text and "1000 of 4000 samples" in text
    assert "detuned to 0.8" in text
