"""Robust feedforward search: known-answer cases, objectives, fresh re-check."""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest

from robustff.case import (
    Case,
    Distribution,
    Event,
    FeedbackSpec,
    FeedforwardSpec,
    SimulationSpec,
    StudySpec,
    UncertainParameter,
)
from robustff.case.sampling import sample
from robustff.errors import DesignError
from robustff.plant.models import TransferModel
from robustff.tune.search import objective_value, robust_search, search_space

N = 800


def gain_only_case(distribution: Distribution, structure: str = "static") -> Case:
    """Only the disturbance gain is uncertain; the compensator dynamics are exact.

    Static: equal lags and dead times, so -Gd/Gp is a pure gain. Full structure: lags 8 and 5,
    disturbance dead time 1 longer (delay of whole samples), so lead-lag-delay is exact.
    """
    full = structure == "lead-lag-delay"
    return Case(
        "gain only", "min",
        TransferModel("fopdt", 2.0, 8.0, 0.0, 1.0),
        TransferModel("fopdt", 1.0, 5.0 if full else 8.0, 0.0, 2.0 if full else 1.0),
        FeedbackSpec(output_low=-1e6, output_high=1e6),  # no saturation: the loop is linear
        FeedforwardSpec(structure), SimulationSpec(40.0, 0.1),
        (Event("disturbance-step", 1.0, 1.0),),
        uncertainty=(UncertainParameter("disturbance.gain", distribution),),
        study=StudySpec(N, 11, "random"),
    )


SYMMETRIC = Distribution("normal", (1.0, 0.1))
SKEWED = Distribution("triangular", (0.7, 0.8, 1.9))


def sample_optimum(kd: np.ndarray) -> float:
    """Arg-min over g of P90 |kd - g| (nominal kd = 1) on a fine grid."""
    grid = np.linspace(0.5, 1.5, 2001)
    p90 = np.percentile(np.abs(kd[None, :] - grid[:, None]), 90, axis=1)
    return float(grid[np.argmin(p90)])


def argmin_spread(draw, replicates: int = 100) -> float:
    """Monte Carlo standard error of the sample optimum, from independent replicates."""
    rng = np.random.default_rng(3)
    return float(np.std([sample_optimum(draw(rng, N)) for _ in range(replicates)]))


def test_engine_obeys_the_closed_form_used_below():
    # Source: linear superposition; Seborg, Edgar, Mellichamp and Doyle, Process Dynamics and
    # Control, 4th ed., 2016, ch. 15 (feedforward control), from memory. With exact dynamics the
    # error with feedforward is the feedback-only error times r0 = 1 - g kd_model / kd, and the
    # feedback-only error is proportional to kd, so IAE_fbff = A |kd - g kd_model|.
    case = gain_only_case(SYMMETRIC)
    result = robust_search(case, samples=50, max_evaluations=5)
    fig = result.figures["nominal"]["optimisation"]
    kd, _ = sample(case, 50, 11)
    fb_per_unit = result.feedback_iae["optimisation"][0] / np.median(kd[:, 0])
    assert fig.iae_p50 == pytest.approx(
        fb_per_unit * np.percentile(np.abs(kd[:, 0] - 1.0), 50), rel=1e-6)


def test_symmetric_gain_uncertainty_gives_the_analytic_optimum():
    # Analytic: IAE_fbff = A |kd - g| (see above), so P90 IAE_fbff is minimised where the
    # shortest interval holding 90 % of kd is centred: for a normal kd (symmetric, unimodal)
    # at its mean, g* = 1. Monte Carlo error of the sample optimum from numpy replicates.
    case = gain_only_case(SYMMETRIC)
    result = robust_search(case, objective="p90")
    kd, _ = sample(case, N, 11)
    assert result.robust.gain_factor == pytest.approx(sample_optimum(kd[:, 0]), abs=0.01)
    spread = argmin_spread(lambda rng, n: rng.normal(1.0, 0.1, n))
    assert abs(result.robust.gain_factor - 1.0) < 4.0 * spread + 0.01
    assert result.robust.gain == pytest.approx(-0.5 * result.robust.gain_factor)


def test_skewed_gain_uncertainty_moves_the_optimum_up():
    # Analytic: the minimiser of P90 |kd - g| is the midpoint of the shortest interval holding
    # 90 % of kd; for the right-skewed triangular (0.7, 0.8, 1.9) it is found with
    # scipy.stats.triang (Source: scipy reference distribution) and lies above 1: a
    # distribution skewed towards high disturbance gains asks for more feedforward gain.
    from scipy import optimize, stats

    dist = stats.triang(0.1 / 1.2, loc=0.7, scale=1.2)
    width = optimize.minimize_scalar(
        lambda a: dist.ppf(dist.cdf(a) + 0.9) - a, bounds=(0.7, float(dist.ppf(0.0999))),
        method="bounded", options={"xatol": 1e-10})
    expected = 0.5 * (width.x + dist.ppf(dist.cdf(width.x) + 0.9))
    assert expected > 1.1
    case = gain_only_case(SKEWED)
    result = robust_search(case, objective="p90")
    spread = argmin_spread(lambda rng, n: dist.rvs(n, random_state=rng))
    assert abs(result.robust.gain_factor - expected) < 4.0 * spread + 0.01
    symmetric = robust_search(gain_only_case(SYMMETRIC), objective="p90")
    assert result.robust.gain_factor > symmetric.robust.gain_factor + 0.08


def test_full_structure_keeps_the_gain_optimum_and_beats_nominal():
    # Same closed form with the exact lead-lag-delay compensator: the searched gain factor
    # matches the analytic g* = 1 within Monte Carlo error and the other settings may move
    # only where they do not make the objective worse.
    case = gain_only_case(SYMMETRIC, "lead-lag-delay")
    result = robust_search(case, samples=400, objective="p90", max_evaluations=90)
    spread = argmin_spread(lambda rng, n: rng.normal(1.0, 0.1, n))
    assert abs(result.robust.gain_factor - 1.0) < 4.0 * spread * np.sqrt(N / 400) + 0.02
    nominal = result.figures["nominal"]["optimisation"].objective
    assert result.objective_value <= nominal * (1 + 1e-9)
    assert set(result.space.names) == {"gain_factor", "lead", "lag", "delay"}


def test_screening_stage_finds_the_whole_sets_optimum():
    # Same closed form: P90 |kd - g| over all 1,600 plants is minimised at the sample optimum
    # of the whole set. The search screens on the first 200 (one in eight) and polishes on
    # all: it must end at the whole set's optimum (not the subset's), no worse than nominal,
    # and the subset's plants are the whole set's first ones (common random numbers).
    from robustff.tune.search import polish_budget, screening_samples

    assert screening_samples(1599) == 0 and screening_samples(1600) == 200
    case = replace(gain_only_case(SKEWED, "lead-lag"), study=StudySpec(1600, 5, "random"))
    detuned = replace(case, feedforward=replace(case.feedforward, gain_factor=0.7))
    result = robust_search(detuned, objective="p90")
    assert result.screened == 200 and result.screening_evaluations > 10
    assert result.evaluations_text == (f"{result.screening_evaluations} evaluations on the "
                                       f"first 200 plants, then {result.evaluations} on all 1600")
    assert 3 <= result.evaluations <= polish_budget(3) + 3  # + the starts judged on all
    kd, _ = sample(detuned, 1600, 5)
    assert result.robust.gain_factor == pytest.approx(sample_optimum(kd[:, 0] / 1.0), abs=0.01)
    subset_optimum = sample_optimum(kd[:200, 0])
    if abs(subset_optimum - sample_optimum(kd[:, 0])) > 0.03:  # the polish moved it
        assert abs(result.robust.gain_factor - subset_optimum) > 0.01
    nominal = result.figures["nominal"]["optimisation"].objective
    assert result.objective_value < nominal


def test_cvar_and_harm_objectives_definitions():
    # Source: Rockafellar and Uryasev, "Optimization of conditional value-at-risk", J. Risk 2
    # (2000) 21-41: CVaR_alpha = mean of the worst (1 - alpha) share of outcomes.
    fb = np.array([1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0, 8.0, 9.0, 10.0])
    fbff = np.array([0.5, 2.5, 1.0, 1.0, 9.0, 1.0, 1.0, 1.0, np.inf, 2.0])
    assert objective_value("cvar", fb, fbff, cvar_alpha=0.8) == np.inf
    assert objective_value("cvar", fb, np.nan_to_num(fbff, posinf=20.0), cvar_alpha=0.8) == 14.5
    assert objective_value("harm", fb, fbff) == pytest.approx(0.3)  # 2.5 > 2, 9 > 5, inf
    assert objective_value("p90", fb, fbff, percentile=50) == 1.0
    assert objective_value("p90", fb, fbff) == np.inf  # the 90th percentile reaches the inf


def test_cvar_optimum_for_symmetric_gain_and_harm_search_runs():
    # Analytic: CVaR of |kd - g| is convex in g and, for a symmetric kd, minimised at g = 1.
    case = gain_only_case(SYMMETRIC)
    result = robust_search(case, samples=400, objective="cvar")
    assert result.robust.gain_factor == pytest.approx(1.0, abs=0.05)
    harm = robust_search(case, samples=400, objective="harm", max_evaluations=30)
    fresh = harm.figures["robust"]["fresh"]
    assert harm.objective == "harm" and 0.0 <= harm.objective_fresh <= 1.0
    assert fresh.median_improvement > 0.0


def test_fresh_samples_differ_and_results_repeat():
    case = gain_only_case(SKEWED)
    first = robust_search(case, samples=200, max_evaluations=15)
    second = robust_search(case, samples=200, max_evaluations=15, jobs=1)
    assert first.robust == second.robust and first.objective_value == second.objective_value
    assert first.fresh_seed == first.seed + 1
    assert first.objective_fresh != first.objective_value


def test_bounds_and_errors():
    case = gain_only_case(SYMMETRIC, "lead-lag-delay")
    space = search_space(case, "lead-lag-delay")
    assert space.names == ("gain_factor", "lead", "lag", "delay")
    np.testing.assert_allclose(space.high, [1.5, 24.0, 24.0, 4.0])
    assert space.low[2] == pytest.approx(0.1)  # lag >= sample time: the compensator stays proper
    result = robust_search(gain_only_case(SYMMETRIC), samples=100,
                           bounds={"gain_factor": (0.2, 0.6)}, max_evaluations=20)
    assert 0.2 <= result.robust.gain_factor <= 0.6
    assert result.robust.gain_factor > 0.55  # the optimum g = 1 lies above: pushed to the bound
    with pytest.raises(DesignError, match="lead"):
        search_space(gain_only_case(SYMMETRIC), "static", {"lead": (0.0, 1.0)})
    with pytest.raises(DesignError, match="objective"):
        robust_search(case, objective="mean")
    with pytest.raises(DesignError, match="no feedforward"):
        robust_search(replace(case, feedforward=FeedforwardSpec("none")))
    with pytest.raises(DesignError, match="uncertainty"):
        robust_search(replace(case, uncertainty=()))


@pytest.mark.slow
@pytest.mark.parametrize("name", ["surge-tank-level", "syrup-dilution", "wash-water-heater"])
def test_demo_cases_robust_p90_no_worse_than_nominal_on_fresh_samples(name):
    # The winner is re-checked on samples it was not chosen on (seed + 1), with common random
    # numbers between the two designs; the robust design must not lose there.
    from pathlib import Path

    from robustff.case import load_case
    from robustff.study import run_study

    case = load_case(Path(__file__).resolve().parents[2] / "cases" / f"{name}.toml")
    result = robust_search(case, samples=1000, objective="p90")
    fresh = result.figures
    assert fresh["robust"]["fresh"].iae_p90 <= fresh["nominal"]["fresh"].iae_p90
    # The fresh figure recomputed another way: the winner written into the case and run by the
    # study runner (full kernel and metrics) on the fresh seed; P90 (numpy's linear percentile)
    # of IAE(fbff) over the samples whose feedback arm is stable, unstable with feedforward = inf.
    robust = result.robust
    tuned = replace(case, feedforward=replace(
        case.feedforward, gain_factor=robust.gain_factor, lead=robust.lead, lag=robust.lag,
        delay=robust.delay))
    study = run_study(tuned, samples=1000, seed=result.fresh_seed, margins=False)
    stable = ~study.unstable[:, 0]
    iae_fbff = np.where(study.unstable[stable, 1], np.inf, study.metrics["iae"][stable, 1])
    assert result.objective_fresh == pytest.approx(np.percentile(iae_fbff, 90.0), rel=1e-9)


@pytest.mark.slow
def test_screened_search_on_a_demo_case_still_beats_nominal_on_fresh_samples():
    # With 2,000 samples the search screens on the first 250; the winner must still hold up
    # on samples it was not chosen on (as above), and beat the nominal design where chosen.
    from pathlib import Path

    from robustff.case import load_case

    case = load_case(Path(__file__).resolve().parents[2] / "cases" / "wash-water-heater.toml")
    result = robust_search(case, samples=2000, objective="p90")
    assert result.screened == 250 and result.screening_evaluations > result.evaluations
    figures = result.figures
    assert figures["robust"]["fresh"].iae_p90 <= figures["nominal"]["fresh"].iae_p90
    assert result.objective_value <= figures["nominal"]["optimisation"].objective


def test_sobol_ranks_the_dominant_parameter_first():
    # Constructed: the disturbance gain spreads +-40 % while the process time constant moves by
    # only +-1 %; with exact static feedforward the IAE ratio is |1 - 1/kd| (closed form above),
    # so nearly all of its variance comes from kd.
    case = replace(gain_only_case(Distribution("relative", (0.4,))), uncertainty=(
        UncertainParameter("disturbance.gain", Distribution("relative", (0.4,))),
        UncertainParameter("process.time_constant", Distribution("relative", (0.01,))),
    ))
    from robustff.tune.search import sobol_sensitivity

    rows = sobol_sensitivity(case, 128, seed=2)
    assert rows[0][0] == "disturbance.gain" and rows[0][2] > 0.9
    assert rows[1][2] < 0.1


def test_recommendation_keeps_nominal_unless_the_gain_is_clear_of_noise():
    # Closed form as above: with exact dynamics P90 |kd - g| is flat near its minimum, so a
    # nominal design already at g = 1 cannot be beaten beyond Monte Carlo noise, while a
    # detuned nominal g = 0.5 is clearly worse (P90 0.5 + ... vs 0.16 for kd ~ N(1, 0.1)).
    at_optimum = robust_search(gain_only_case(SYMMETRIC), samples=400, objective="p90")
    assert at_optimum.recommended == "nominal"
    assert at_optimum.improvement_interval[0] <= 0.0 <= at_optimum.improvement_interval[1]
    assert at_optimum.recommended_settings == at_optimum.nominal
    case = gain_only_case(SYMMETRIC)
    detuned = replace(case, feedforward=replace(case.feedforward, gain_factor=0.5))
    result = robust_search(detuned, samples=400, objective="p90")
    assert result.recommended == "robust" and result.improvement_interval[0] > 0.0
    assert result.recommended_settings.gain_factor == pytest.approx(1.0, abs=0.05)
