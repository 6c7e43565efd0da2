"""The kernels' normal draws checked against the standard normal distribution (scipy)."""

import numpy as np
from numba import njit
from scipy import stats

from robustff.engine.random_draws import next_normal, normal_stream


@njit(cache=False)
def _draws(seed: int, n: int) -> np.ndarray:
    out = np.empty(n)
    stream = normal_stream(np.uint64(seed))
    for k in range(n):
        stream, out[k] = next_normal(stream)
    return out


def test_draws_are_standard_normal_and_uncorrelated():
    # Source: Box and Muller, "A note on the generation of random normal deviates", Annals of
    # Mathematical Statistics 29, 1958: both members of a pair are independent N(0, 1). Checked
    # with scipy.stats.kstest against the standard normal, and the lag-1 and lag-2
    # autocorrelations (within and across pairs) against zero, each within 4 standard errors.
    n = 200_000
    x = _draws(12345, n)
    assert stats.kstest(x, "norm").pvalue > 1e-4
    standard_error = 1.0 / np.sqrt(n)
    assert abs(np.mean(x)) < 4 * standard_error
    assert abs(np.std(x) - 1.0) < 4 * standard_error / np.sqrt(2.0)
    for lag in (1, 2):
        r = np.corrcoef(x[:-lag], x[lag:])[0, 1]
        assert abs(r) < 4 * standard_error
    # The cosine and sine members squared add to the pair's -2 ln(u1), an exponential with
    # mean 2 (chi-square with 2 degrees of freedom).
    radius_squared = x[0::2] ** 2 + x[1::2] ** 2
    assert stats.kstest(radius_squared, "chi2", args=(2,)).pvalue > 1e-4


def test_each_seed_gives_its_own_reproducible_stream():
    # Arithmetic: the same seed repeats its draws exactly; another seed's draws differ.
    np.testing.assert_array_equal(_draws(7, 1000), _draws(7, 1000))
    assert np.corrcoef(_draws(7, 5000), _draws(8, 5000))[0, 1] < 0.1
