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
