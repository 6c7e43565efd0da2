"""The remembered order-statistic interval gives the same ranks as a fresh brute-force search."""

import numpy as np
import pytest
from scipy import stats as sps

from robustff.errors import DataError
from robustff.stats import order_statistic_interval


def _brute_force_width(n: int, p: float, confidence: float) -> int:
    # Reference: every rank pair, coverage P(r <= B <= s - 1) with scipy.stats.binom (Source:
    # David and Nagaraja, Order Statistics, 3rd ed. 2003, section 7.1; from memory).
    cdf = sps.binom.cdf(np.arange(n + 1), n, p)
    return min(
        s - r
        for r in range(1, n + 1)
        for s in range(r + 1, n + 1)
        if cdf[s - 1] - cdf[r - 1] >= confidence - 1e-12
    )


def test_interleaved_repeated_calls_match_brute_force():
    questions = [(40, 0.5, 0.95), (80, 0.9, 0.95), (40, 0.5, 0.9), (80, 0.1, 0.99)]
    for _ in range(3):  # later rounds are answered from memory: they must not drift
        for n, p, confidence in questions:
            r, s, coverage = order_statistic_interval(n, p, confidence)
            assert coverage >= confidence - 1e-12
            assert s - r == _brute_force_width(n, p, confidence)


def test_numpy_and_python_arguments_give_the_same_answer():
    assert order_statistic_interval(np.int64(500), np.float64(0.95)) == order_statistic_interval(
        500, 0.95
    )


def test_bad_confidence_is_refused_even_after_a_good_call():
    order_statistic_interval(100, 0.5, 0.95)
    with pytest.raises(DataError, match="confidence"):
        order_statistic_interval(100, 0.5, 1.5)


@pytest.mark.parametrize("n", [20_001, 250_000])
@pytest.mark.parametrize("p", [0.0, 1e-4, 0.01, 0.05, 0.5, 0.95, 0.99, 1.0])
@pytest.mark.parametrize("confidence", [0.5, 0.95, 0.999999])
def test_large_samples_search_a_window_and_find_the_same_pair(
    n: int, p: float, confidence: float, monkeypatch: pytest.MonkeyPatch
) -> None:
    from robustff.stats import percentiles

    search = percentiles._interval_ranks.__wrapped__  # the search itself, not remembered
    windowed = search(n, p, confidence)
    monkeypatch.setattr(percentiles, "_WINDOW_FROM", 10**12)  # every rank 0..n
    assert windowed == search(n, p, confidence)
