"""Sampling checked against scipy.stats, the Latin hypercube and Sobol definitions."""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
from scipy import stats

from robustff.case import (
    Correlation,
    Distribution,
    StudySpec,
    UncertainParameter,
    load_case,
    parse_case,
)
from robustff.case.sampling import (
    copula_factor,
    describe_distribution,
    distribution_bounds,
    inverse_cdf,
    plant_batch,
    sample,
    uniform_scores,
)
from robustff.demo import demo_case_path
from robustff.errors import CaseError

BASE = load_case(demo_case_path("wash-water-heater"))

# (key, distribution, matching scipy.stats frozen distribution before any clip).
# Nominal values in BASE: process.gain 0.6, process.time_constant 45, process.dead_time 8,
# disturbance.gain -1.8, disturbance.time_constant 30, sensor.time_constant 2.
CASES = [
    ("process.time_constant", Distribution("uniform", (35.0, 60.0)), stats.uniform(35.0, 25.0)),
    ("process.gain", Distribution("relative", (0.25,)), stats.uniform(0.45, 0.3)),
    ("disturbance.gain", Distribution("relative", (0.2,)), stats.uniform(-2.16, 0.72)),
    ("disturbance.gain", Distribution("normal", (-1.8, 0.2)), stats.norm(-1.8, 0.2)),
    ("process.dead_time", Distribution("triangular", (6.0, 8.0, 12.0)),
     stats.triang(c=2.0 / 6.0, loc=6.0, scale=6.0)),
    ("disturbance.time_constant", Distribution("lognormal", (30.0, 1.3)),
     stats.lognorm(s=math.log(1.3), scale=30.0)),
]


def one_parameter_case(key, distribution, sampling="random"):
    return dataclasses.replace(
        BASE, uncertainty=(UncertainParameter(key, distribution),), correlations=(),
        study=StudySpec(1000, 1, sampling),
    )


@pytest.mark.parametrize(("key", "distribution", "reference"), CASES)
def test_inverse_cdf_equals_scipy_ppf(key, distribution, reference):
    # Source: scipy.stats distributions (ppf of uniform, norm, triang, lognorm); the lognormal
    # with median m and factor f is lognorm(s = ln f, scale = m).
    u = np.linspace(1e-6, 1 - 1e-6, 2001)
    nominal = BASE.nominal_value(key)
    np.testing.assert_allclose(inverse_cdf(distribution, nominal, u), reference.ppf(u),
                               rtol=1e-12, atol=1e-12)


@pytest.mark.parametrize(("key", "distribution", "reference"), CASES)
def test_sample_mean_and_quantiles_match_scipy(key, distribution, reference):
    # Source: scipy.stats distributions. Tolerance: 5 standard errors of the mean
    # (sigma / sqrt(n)) and of the quantile (sqrt(p (1-p) / n) / pdf(x_p)).
    n = 100_000
    values, names = sample(one_parameter_case(key, distribution), n, seed=7)
    assert names == [key] and values.shape == (n, 1)
    column = values[:, 0]
    assert abs(column.mean() - reference.mean()) < 5 * reference.std() / math.sqrt(n)
    for p in (0.05, 0.25, 0.5, 0.75, 0.95):
        x_p = reference.ppf(p)
        tolerance = 5 * math.sqrt(p * (1 - p) / n) / reference.pdf(x_p)
        assert abs(np.quantile(column, p) - x_p) < tolerance, p


def test_clip_puts_tail_mass_on_the_bounds():
    # Clipping (not truncation): P(X = upper bound) = 1 - Phi((b - mean) / std).
    # Source: scipy.stats.norm.sf.
    distribution = Distribution("normal", (-1.8, 0.2), (-2.0, -1.5))
    values, _ = sample(one_parameter_case("disturbance.gain", distribution), 200_000, seed=3)
    column = values[:, 0]
    assert column.min() == -2.0 and column.max() == -1.5
    expected = stats.norm(-1.8, 0.2).sf(-1.5)
    assert abs(np.mean(column == -1.5) - expected) < 5 * math.sqrt(expected / 200_000)


@pytest.mark.parametrize("n", [10, 97, 1000])
def test_latin_hypercube_hits_each_stratum_once(n):
    # Source: McKay, Beckman and Conover, Technometrics 21 (1979) 239-245: each of the n
    # equal-probability strata of every input holds exactly one sample.
    scores = uniform_scores("lhs", n, 5, seed=11)
    for column in scores.T:
        assert sorted(np.floor(column * n).astype(int)) == list(range(n))
    # The same holds after the inverse CDF, in probability space of each distribution.
    key, distribution, reference = CASES[4]
    values, _ = sample(one_parameter_case(key, distribution, "lhs"), n, seed=5)
    strata = np.floor(reference.cdf(values[:, 0]) * n).astype(int)
    assert sorted(strata) == list(range(n))


@pytest.mark.parametrize("m", [4, 10])
def test_scrambled_sobol_balance(m):
    # Source: Sobol (1967), USSR Comput. Math. Math. Phys. 7(4) 86-112 (from memory), and the
    # scipy.stats.qmc documentation: the first 2^m points form a (t, m, d)-net; in one
    # dimension each of the 2^k intervals [j/2^k, (j+1)/2^k), k <= m, holds exactly 2^(m-k)
    # points (so each half holds n/2). Owen scrambling keeps this property.
    n = 2**m
    scores = uniform_scores("sobol", n, 6, seed=2)
    for column in scores.T:
        assert np.sum(column < 0.5) == n // 2
        assert sorted(np.floor(column * n).astype(int)) == list(range(n))


def test_sobol_other_counts_give_the_leading_points_without_warning():
    import warnings

    with warnings.catch_warnings():
        warnings.simplefilter("error")
        leading = uniform_scores("sobol", 100, 3, seed=4)
    np.testing.assert_array_equal(leading, uniform_scores("sobol", 128, 3, seed=4)[:100])


def test_rank_correlation_reaches_its_target():
    # Source: Kruskal, JASA 53 (1958) 814-861 (from memory): for a bivariate normal with Pearson
    # r, Spearman's rho = (6/pi) asin(r/2); the copula uses the inverse. Checked with
    # scipy.stats.spearmanr; the standard error of rho is about 1/sqrt(n).
    case = load_case(demo_case_path("syrup-dilution"))
    case = dataclasses.replace(case, correlations=(
        Correlation("process.dead_time", "disturbance.dead_time", 0.7),
        Correlation("process.gain", "disturbance.gain", -0.5),
    ))
    n = 20_000
    for plan in ("random", "lhs", "sobol"):
        values, names = sample(case, n, seed=8, sampling=plan)
        columns = {name: values[:, i] for i, name in enumerate(names)}
        rho = stats.spearmanr(columns["process.dead_time"], columns["disturbance.dead_time"])[0]
        assert abs(rho - 0.7) < 0.03, plan
        rho = stats.spearmanr(columns["process.gain"], columns["disturbance.gain"])[0]
        assert abs(rho + 0.5) < 0.03, plan
        rho = stats.spearmanr(columns["process.gain"], columns["process.dead_time"])[0]
        assert abs(rho) < 0.03, plan


def test_uncorrelated_columns_keep_exact_latin_hypercube_strata():
    case = load_case(demo_case_path("wash-water-heater"))  # correlates two time parameters
    n = 500
    values, names = sample(case, n, seed=1)
    column = values[:, names.index("sensor.time_constant")]  # uniform 1 .. 4, uncorrelated
    assert sorted(np.floor((column - 1.0) / 3.0 * n).astype(int)) == list(range(n))


def test_same_seed_same_samples_and_seed_sequence_accepted():
    case = load_case(demo_case_path("wash-water-heater"))
    for plan in ("random", "lhs", "sobol"):
        first, _ = sample(case, 300, seed=42, sampling=plan)
        again, _ = sample(case, 300, seed=42, sampling=plan)
        other, _ = sample(case, 300, seed=43, sampling=plan)
        np.testing.assert_array_equal(first, again)
        assert not np.array_equal(first, other)
        sequence = np.random.SeedSequence(42)
        np.testing.assert_array_equal(sample(case, 300, sequence, sampling=plan)[0],
                                      sample(case, 300, sequence, sampling=plan)[0])


@pytest.mark.parametrize("plan", ["random", "sobol"])
def test_skip_continues_the_sequence(plan):
    case = load_case(demo_case_path("surge-tank-level"))
    whole, _ = sample(case, 512, seed=9, sampling=plan)
    tail, _ = sample(case, 312, seed=9, sampling=plan, skip=200)
    np.testing.assert_array_equal(whole[200:], tail)


def test_sampling_defaults_to_the_case_plan():
    case = load_case(demo_case_path("surge-tank-level"))
    assert case.study.sampling == "lhs"
    np.testing.assert_array_equal(sample(case, 50, 1)[0], sample(case, 50, 1, sampling="lhs")[0])


def test_no_uncertainty_gives_an_empty_array():
    case = dataclasses.replace(BASE, uncertainty=(), correlations=())
    values, names = sample(case, 5, 1)
    assert values.shape == (5, 0) and names == []


def test_contradictory_correlations_raise_case_error():
    names = ["a", "b", "c"]
    bad = [Correlation("a", "b", 0.9), Correlation("a", "c", 0.9), Correlation("b", "c", -0.9)]
    with pytest.raises(CaseError, match="positive definite"):
        copula_factor(names, bad)
    columns, factor = copula_factor(names, bad[:1])
    assert columns == [0, 1]
    # Source: Pearson r = 2 sin(pi rho / 6) (Kruskal 1958, from memory).
    np.testing.assert_allclose((factor @ factor.T)[0, 1], 2 * math.sin(math.pi * 0.9 / 6))


def test_plant_batch_writes_sampled_columns_and_keeps_the_rest_nominal():
    case = load_case(demo_case_path("wash-water-heater"))
    values, names = sample(case, 64, 3)
    batch = plant_batch(case, names, values)
    assert batch.size == 64
    for i, name in enumerate(names):
        np.testing.assert_array_equal(batch.values[name], values[:, i])
    assert np.all(batch.values["disturbance.dead_time"] == 3.0)
    with pytest.raises(ValueError):
        plant_batch(case, names[:2], values)


@pytest.mark.parametrize(("key", "distribution", "reference"), CASES)
def test_distribution_bounds(key, distribution, reference):
    low, high = distribution_bounds(UncertainParameter(key, distribution), BASE.nominal_value(key))
    if distribution.kind in ("normal", "lognormal"):
        # Source: scipy.stats ppf at 0.5 % and 99.5 %.
        np.testing.assert_allclose((low, high), reference.ppf([0.005, 0.995]), rtol=1e-9)
    else:
        np.testing.assert_allclose((low, high), reference.support(), rtol=1e-12)


def test_describe_distribution_lines():
    describe = describe_distribution
    assert describe(UncertainParameter("process.gain", Distribution("uniform", (1.6, 2.4))),
                    2.0, "degC/%") == "uniform 1.6 .. 2.4 degC/%"
    relative = UncertainParameter("process.gain", Distribution("relative", (0.2,)))
    assert describe(relative, -2.0) == "uniform -2.4 .. -1.6 (nominal +/- 20 %)"
    clipped = UncertainParameter("process.dead_time", Distribution("normal", (3.0, 0.5), (0, 5)))
    assert describe(clipped, 3.0, "s") == "normal mean 3 s, std 0.5 s, clipped to 0 .. 5 s"


def test_relative_on_negative_nominal_from_a_file_is_sorted():
    text = demo_case_path("surge-tank-level").read_text(encoding="utf-8")
    case = parse_case(text)
    values, names = sample(case, 2000, 1)
    gains = values[:, names.index("process.gain")]
    assert gains.min() >= -0.0575 and gains.max() <= -0.0425
    assert np.all(np.isfinite(values))
