"""Percentile tables from a partial sort give exactly the numbers of a full sort."""

from __future__ import annotations

import numpy as np
import pytest

from robustff.stats import order_statistic_interval, percentile_table

PERCENTILES = (0.0, 1.0, 5.0, 10.0, 50.0, 90.0, 95.0, 99.0, 100.0)


def _by_full_sort(values: np.ndarray, p: float, confidence: float):
    # The definition: sort the finite values, read the linear-interpolation percentile and the
    # order statistics X_(r), X_(s) of the interval (minimum and maximum when none exists).
    data = np.sort(values[np.isfinite(values)])
    r, s, _ = order_statistic_interval(data.size, p / 100.0, confidence)
    low, high = (data[0], data[-1]) if r == 0 else (data[r - 1], data[s - 1])
    return float(np.percentile(data, p, method="linear")), float(low), float(high)


@pytest.mark.parametrize("n", [1, 2, 7, 60, 1000, 54321])
@pytest.mark.parametrize("confidence", [0.9, 0.95])
def test_partial_sort_equals_full_sort_bit_for_bit(n: int, confidence: float) -> None:
    rng = np.random.default_rng(n)
    values = rng.lognormal(0.0, 2.0, n)
    values[::7] = np.round(values[::7], 1)  # ties
    if n > 5:
        values[[1, 4]] = [np.nan, np.inf]  # unstable samples are left out
    before = values.copy()
    table = percentile_table(values, PERCENTILES, confidence)
    np.testing.assert_array_equal(values, before)  # the caller's array is not reordered
    for p in PERCENTILES:
        estimate = table[f"p{p:g}"]
        assert (estimate.value, estimate.low, estimate.high) == _by_full_sort(values, p,
                                                                               confidence)
        assert estimate.n == np.isfinite(values).sum()


def test_no_finite_value_gives_nan_estimates() -> None:
    table = percentile_table(np.array([np.nan, np.inf]), (50.0,))
    assert np.isnan(table["p50"].value) and table["p50"].n == 0 and not table["p50"].exact
