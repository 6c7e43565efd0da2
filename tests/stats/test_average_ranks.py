"""Average ranks with numpy alone, against scipy.stats.rankdata and spearmanr."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats as sps

from robustff.stats.sensitivity import average_ranks, spearman_with_interval


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_ranks_with_ties_equal_scipy_rankdata(seed: int) -> None:
    rng = np.random.default_rng(seed)
    values = np.round(rng.normal(size=500), 1)  # many ties
    values[:7] = values[7]  # a long run of ties
    # Reference: scipy.stats.rankdata, method "average".
    np.testing.assert_array_equal(average_ranks(values), sps.rankdata(values))


@pytest.mark.parametrize("seed", [0, 1])
def test_ranks_without_ties_equal_scipy_rankdata(seed: int) -> None:
    # Distinct values (the sampled parameters): the short path that skips the tie groups.
    values = np.random.default_rng(seed).normal(size=2000)[::2]  # a strided view too
    assert np.unique(values).size == values.size
    # Reference: scipy.stats.rankdata, method "average".
    np.testing.assert_array_equal(average_ranks(values), sps.rankdata(values))


def test_ranks_of_a_large_column_with_ties_equal_scipy_rankdata() -> None:
    # A study-sized column (the unstable SIMD sort of large arrays orders tied values any
    # way; their mean rank must not change), with -0.0 beside +0.0 and a 0/1 harm indicator.
    rng = np.random.default_rng(5)
    values = np.round(rng.normal(size=200_000), 2)
    values[::97] = -0.0
    values[1::89] = 0.0
    # Reference: scipy.stats.rankdata, method "average".
    np.testing.assert_array_equal(average_ranks(values), sps.rankdata(values))
    flags = (rng.uniform(size=200_000) < 0.3).astype(float)
    np.testing.assert_array_equal(average_ranks(flags), sps.rankdata(flags))


def test_ranks_of_edge_inputs() -> None:
    assert average_ranks(np.array([])).shape == (0,)
    np.testing.assert_array_equal(average_ranks(np.array([3.0])), [1.0])
    np.testing.assert_array_equal(average_ranks(np.array([2.0, 2.0, 2.0])), [2.0, 2.0, 2.0])
    np.testing.assert_array_equal(average_ranks(np.array([np.inf, -np.inf, 0.0])), [3, 1, 2])
    assert np.isnan(average_ranks(np.array([1.0, np.nan, 2.0]))).all()  # as rankdata propagates


def test_spearman_equals_scipy_spearmanr() -> None:
    rng = np.random.default_rng(11)
    x = np.round(rng.uniform(size=300), 2)
    y = x + rng.normal(scale=0.3, size=300)
    rho, low, high = spearman_with_interval(x, y)
    # Reference: scipy.stats.spearmanr (Spearman's rho with average ranks for ties).
    assert rho == pytest.approx(sps.spearmanr(x, y).statistic, rel=1e-12)
    assert low < rho < high


@pytest.mark.parametrize("gaps", [False, True])
def test_shared_ranks_give_the_pairwise_correlations(gaps: bool) -> None:
    # rank_sensitivity ranks each whole column once; each row must still equal the correlation
    # of that parameter with the response (finite rows) and with harm, computed pair by pair.
    from robustff.stats.sensitivity import rank_sensitivity

    rng = np.random.default_rng(3)
    parameters = rng.normal(size=(400, 3))
    response = parameters[:, 0] - 0.5 * parameters[:, 2] + rng.normal(scale=0.5, size=400)
    if gaps:
        response[[3, 30]] = np.nan  # unstable samples
    harm = response > 0.8
    rows = {row.name: row for row in rank_sensitivity(parameters, ["a", "b", "c"], response,
                                                      harm)}
    ok = np.isfinite(response)
    for j, name in enumerate("abc"):
        expected = spearman_with_interval(parameters[ok, j], response[ok])
        assert (rows[name].rho, rows[name].low, rows[name].high) == expected
        harm_rho = spearman_with_interval(parameters[:, j], harm.astype(float))
        assert (rows[name].rho_harm, rows[name].harm_low, rows[name].harm_high) == harm_rho
        assert rows[name].n == ok.sum()
