"""Checks of robustff.stats.sensitivity against scipy, closed-form Sobol indices and simulation."""

import math

import numpy as np
import pytest
from scipy import stats as sps

from robustff.errors import DataError
from robustff.stats.sensitivity import rank_sensitivity, sobol_first_total, spearman_with_interval


def test_spearman_matches_scipy_including_ties():
    # Reference library: scipy.stats.spearmanr (average ranks for ties).
    rng = np.random.default_rng(0)
    x = rng.integers(0, 6, 300).astype(float)  # many ties
    y = x**2 + rng.normal(0, 4, 300)
    rho, low, high = spearman_with_interval(x, y)
    assert rho == pytest.approx(sps.spearmanr(x, y).statistic, rel=1e-12)
    # Fisher z with se 1.06/sqrt(n-3): Fieller, Hartley and Pearson 1957 [from memory]
    half = 1.959963984540054 * 1.06 / math.sqrt(297)
    assert (low, high) == pytest.approx(
        (math.tanh(math.atanh(rho) - half), math.tanh(math.atanh(rho) + half))
    )


def test_spearman_interval_covers_population_value():
    # For a bivariate normal with correlation r, the population Spearman coefficient is
    # (6/pi) asin(r/2) (Source: Pearson 1907; Kruskal, JASA 53 (1958) 814-861 [from memory]).
    # The Fisher-z interval should cover it in about 95 % of repeats (binomial sd ~0.01 for
    # 600 repeats; window [0.92, 0.98]).
    rng = np.random.default_rng(11)
    r = 0.6
    truth = 6 / math.pi * math.asin(r / 2)
    cov = [[1, r], [r, 1]]
    hits = 0
    for _ in range(600):
        xy = rng.multivariate_normal([0, 0], cov, size=80)
        _, low, high = spearman_with_interval(xy[:, 0], xy[:, 1])
        hits += low <= truth <= high
    assert 0.92 <= hits / 600 <= 0.98


def test_dominant_parameter_ranks_first_for_response_and_harm():
    # Constructed case: the response depends strongly on one parameter, weakly on another and
    # not at all on the third; harm happens when the dominant parameter is large.
    rng = np.random.default_rng(2)
    n = 2000
    params = np.column_stack(
        [
            rng.uniform(0.5, 1.5, n),  # weak
            rng.normal(1.0, 0.2, n),  # none
            rng.uniform(0.0, 2.0, n),  # dominant
        ]
    )
    response = 0.2 * params[:, 0] + np.exp(1.5 * params[:, 2]) + rng.normal(0, 0.3, n)
    response[:25] = np.nan  # unstable samples: dropped for rho, kept for harm
    harm = np.isnan(response) | (response > np.exp(1.5 * 1.4))
    rows = rank_sensitivity(
        params, ["process.gain", "sensor.lag", "disturbance.gain"], response, harm
    )
    assert [row.name for row in rows][0] == "disturbance.gain"
    top = rows[0]
    assert top.rho > 0.9 and top.low <= top.rho <= top.high
    assert top.n == n - 25 and top.n_harm == n
    assert abs(top.rho_harm) == max(abs(row.rho_harm) for row in rows)
    none = next(row for row in rows if row.name == "sensor.lag")
    assert none.low < 0 < none.high  # no influence: interval contains zero
    assert rows[-1].to_dict()["ci95"][0] is not None


def test_rank_sensitivity_in_threads_matches_scipy_and_one_thread():
    # Reference library: scipy.stats.spearmanr on the rows each coefficient uses (finite
    # parameter and response for rho; finite parameter for rho_harm). Two threads give the
    # same rows bit for bit as one: a NaN parameter value, an infinite response and a
    # constant column take the subset and undefined paths.
    rng = np.random.default_rng(8)
    n = 5000
    params = rng.uniform(size=(n, 4))
    params[10, 1] = np.nan
    params[:, 3] = 1.0
    response = params[:, 0] + 0.3 * params[:, 1] + rng.normal(0, 0.2, n)
    response[:7] = np.inf
    harm = response > 1.0
    names = ["a", "b", "c", "d"]
    one = rank_sensitivity(params, names, response, harm)
    two = rank_sensitivity(params, names, response, harm, jobs=2)
    assert [r.to_dict() for r in one] == [r.to_dict() for r in two]
    by_name = {row.name: row for row in two}
    for j, name in enumerate(names[:3]):
        col = params[:, j]
        ok = np.isfinite(col) & np.isfinite(response)
        assert by_name[name].rho == pytest.approx(
            sps.spearmanr(col[ok], response[ok]).statistic, rel=1e-12)
        okh = np.isfinite(col)
        assert by_name[name].rho_harm == pytest.approx(
            sps.spearmanr(col[okh], harm[okh]).statistic, rel=1e-12)
    assert math.isnan(by_name["d"].rho)


def test_constant_parameter_goes_last_with_undefined_rho():
    rng = np.random.default_rng(3)
    params = np.column_stack([np.full(100, 2.0), rng.normal(size=100)])
    rows = rank_sensitivity(params, ["fixed", "varies"], params[:, 1] + rng.normal(size=100))
    assert [row.name for row in rows] == ["varies", "fixed"]
    assert math.isnan(rows[1].rho) and rows[1].to_dict()["rho"] is None
    assert math.isnan(rows[0].rho_harm)


def test_rank_sensitivity_rejects_mismatched_inputs():
    with pytest.raises(DataError, match="names"):
        rank_sensitivity(np.ones((10, 2)), ["a"], np.ones(10))
    with pytest.raises(DataError, match="one response per sample"):
        rank_sensitivity(np.ones((10, 2)), ["a", "b"], np.ones(9))


def _ishigami_indices(a: float, b: float) -> tuple[np.ndarray, np.ndarray]:
    # Closed form for x_i ~ U(-pi, pi): V1 = (1 + b pi^4/5)^2 / 2, V2 = a^2/8,
    # V13 = b^2 pi^8 (1/18 - 1/50), V = V1 + V2 + V13 (Source: Ishigami and Homma 1990;
    # Saltelli et al., Global Sensitivity Analysis: The Primer, 2008 [from memory]).
    v1 = 0.5 * (1 + b * math.pi**4 / 5) ** 2
    v2 = a * a / 8
    v13 = b * b * math.pi**8 * (1 / 18 - 1 / 50)
    v = v1 + v2 + v13
    return np.array([v1, v2, 0.0]) / v, np.array([v1 + v13, v2, v13]) / v


def test_sobol_ishigami_matches_closed_form():
    first_ref, total_ref = _ishigami_indices(7.0, 0.1)
    # Source: Saltelli et al., Global Sensitivity Analysis: The Primer, 2008, Ishigami function
    # (a = 7, b = 0.1) first-order and total indices; from memory.
    np.testing.assert_allclose(first_ref, [0.3139, 0.4424, 0.0], atol=1e-4)
    np.testing.assert_allclose(total_ref, [0.5576, 0.4424, 0.2437], atol=1e-4)

    def ishigami(x):
        return np.sin(x[0]) + 7.0 * np.sin(x[1]) ** 2 + 0.1 * x[2] ** 4 * np.sin(x[0])

    dists = [sps.uniform(-math.pi, 2 * math.pi)] * 3
    first, total = sobol_first_total(ishigami, dists, 2**13, seed=12345)
    assert first.shape == total.shape == (3,)
    # Monte Carlo tolerance: with 2^13 base samples the estimator spread is below ~0.005.
    np.testing.assert_allclose(first, first_ref, atol=0.015)
    np.testing.assert_allclose(total, total_ref, atol=0.015)


def test_sobol_linear_additive_model_closed_form():
    # y = sum a_i x_i, independent x_i ~ U(l_i, u_i): S_i = S_Ti = a_i^2 var_i / sum_j a_j^2 var_j
    # with var_i = (u_i - l_i)^2 / 12 (Source: variance of a sum of independent variables).
    a = np.array([1.0, -2.0, 0.5, 3.0])
    lows = np.array([0.0, 1.0, -1.0, 2.0])
    widths = np.array([1.0, 0.5, 4.0, 0.2])
    var = widths**2 / 12
    expected = a**2 * var / np.sum(a**2 * var)
    dists = [sps.uniform(lo, w) for lo, w in zip(lows, widths, strict=True)]
    first, total = sobol_first_total(lambda x: a @ x, dists, 5000, seed=1)  # rounded to 8192
    np.testing.assert_allclose(first, expected, atol=0.01)
    np.testing.assert_allclose(total, expected, atol=0.01)


def test_sobol_vector_output_shape_and_bad_size():
    dists = [sps.uniform(0, 1)] * 2

    def two_outputs(x):
        return np.vstack([x[0] + 0.01 * x[1], x[1]])

    first, total = sobol_first_total(two_outputs, dists, 1024, seed=4)
    assert first.shape == total.shape == (2, 2)
    assert first[0, 0] > 0.95 and first[1, 1] > 0.95
    with pytest.raises(DataError, match="at least 2"):
        sobol_first_total(two_outputs, dists, 1, seed=0)
