"""The kernels' normal draws checked against the standard normal distribution (scipy)."""

import numpy as np
import pytest
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
    # Checked with scipy.stats.kstest against the standard normal, the mean and standard
    # deviation, and the lag-1 and lag-2 autocorrelations against zero, each within 4 standard
    # errors.
    n = 200_000
    x = _draws(12345, n)
    assert stats.kstest(x, "norm").pvalue > 1e-4
    standard_error = 1.0 / np.sqrt(n)
    assert abs(np.mean(x)) < 4 * standard_error
    assert abs(np.std(x) - 1.0) < 4 * standard_error / np.sqrt(2.0)
    for lag in (1, 2):
        r = np.corrcoef(x[:-lag], x[lag:])[0, 1]
        assert abs(r) < 4 * standard_error


def test_tails_and_wedges_follow_the_normal():
    # The ziggurat's slow paths (the wedges between strips and the tail beyond the base edge
    # r = 3.654) must give the normal's own tail: counts beyond 2, 3, r and 4.2 against
    # scipy.stats.norm.sf (Poisson, within 4 standard deviations), and the excess over r
    # of the draws beyond it against the normal's conditional tail (Kolmogorov-Smirnov).
    n = 4_000_000
    x = np.abs(_draws(99, n))
    for edge in (2.0, 3.0, 3.6541528853610088, 4.2):
        expected = n * 2.0 * stats.norm.sf(edge)
        assert abs(np.sum(x > edge) - expected) < 4.0 * np.sqrt(expected) + 1.0
    beyond = x[x > 3.0]
    conditional = stats.truncnorm(3.0, np.inf)
    assert stats.kstest(beyond, conditional.cdf).pvalue > 1e-4


def test_ziggurat_tables_match_the_published_256_strip_constants():
    # Source: Marsaglia and Tsang, "The ziggurat method for generating random variables",
    # Journal of Statistical Software 5(8), 2000, the 256-strip normal: base edge
    # r = 3.6541528853610088, strip area v = 4.92867323399e-3 (from memory). Each strip's
    # area is then v: checked here from the tables (outer edge times height difference).
    import math

    from robustff.engine.random_draws import ziggurat_tables

    k, w, f, r = ziggurat_tables()
    assert r == pytest.approx(3.6541528853610088, rel=1e-14)
    v = 4.92867323399e-3
    edges = w * 2.0 ** 52
    base = r * math.exp(-0.5 * r * r) + math.sqrt(math.pi / 2) * math.erfc(r / math.sqrt(2))
    assert base == pytest.approx(v, rel=1e-10)
    assert edges[0] * f[-1] == pytest.approx(v, rel=1e-10)  # the base's virtual rectangle
    areas = edges[1:] * (f[:-1] - f[1:])
    np.testing.assert_allclose(areas, v, rtol=1e-9)
    assert k[1] == 0 and np.all(np.diff(edges[1:]) > 0.0)


def test_each_seed_gives_its_own_reproducible_stream():
    # Arithmetic: the same seed repeats its draws exactly; another seed's draws differ.
    np.testing.assert_array_equal(_draws(7, 1000), _draws(7, 1000))
    assert np.corrcoef(_draws(7, 5000), _draws(8, 5000))[0, 1] < 0.1
