"""Checks of robustff.stats against the binomial distribution, scipy and simulation studies."""

import json
import subprocess
import sys

import numpy as np
import pytest
from scipy import stats as sps

from robustff.errors import DataError
from robustff.stats import (
    clopper_pearson_interval,
    convergence_check,
    convergence_for_percentile,
    envelope_from_histogram,
    metric_ratio,
    order_statistic_coverage,
    order_statistic_interval,
    paired_comparison,
    percentile_key,
    percentile_table,
    probability_worse,
    ratio_histogram,
    samples_for_probability,
    summarize,
    wilson_interval,
    zero_failure_bound,
)

# ----------------------------------------------------------------------------- percentiles


def test_order_statistic_coverage_reference_pair():
    # Source: Hahn and Meeker, Statistical Intervals, 1991, distribution-free percentile
    # intervals from order statistics (from memory); arithmetic from the binomial CDF:
    # N = 1000, p = 0.95, [X_(936), X_(964)] covers the true P95 with probability 0.958.
    assert order_statistic_coverage(1000, 0.95, 936, 964) == pytest.approx(0.958, abs=5e-4)
    # Independent evaluation: P(936 <= B <= 963), B ~ Binomial(1000, 0.95), with scipy.stats.binom.
    expected = sps.binom.cdf(963, 1000, 0.95) - sps.binom.cdf(935, 1000, 0.95)
    assert order_statistic_coverage(1000, 0.95, 936, 964) == pytest.approx(expected, rel=1e-12)


def test_interval_picker_is_valid_and_no_longer_than_reference_pair():
    r, s, coverage = order_statistic_interval(1000, 0.95, 0.95)
    assert coverage >= 0.95
    assert coverage == pytest.approx(order_statistic_coverage(1000, 0.95, r, s), rel=1e-12)
    assert s - r <= 964 - 936  # the reference pair is valid, so the shortest is at most as wide
    assert r <= 950 <= s


@pytest.mark.parametrize("n, p", [(30, 0.5), (60, 0.9), (45, 0.1), (120, 0.95)])
def test_interval_picker_is_shortest_by_brute_force(n, p):
    # Brute force over every rank pair with scipy.stats.binom (reference library).
    cdf = sps.binom.cdf(np.arange(n + 1), n, p)
    widths = [
        s - r
        for r in range(1, n + 1)
        for s in range(r + 1, n + 1)
        if cdf[s - 1] - (cdf[r - 1]) >= 0.95 - 1e-12
    ]
    r, s, coverage = order_statistic_interval(n, p, 0.95)
    assert r > 0 and coverage >= 0.95 - 1e-12
    assert s - r == min(widths)


@pytest.mark.parametrize(
    "dist, percentile", [(sps.norm(), 90.0), (sps.expon(), 50.0), (sps.lognorm(1.0), 95.0)]
)
def test_percentile_interval_covers_true_quantile_at_nominal_rate(dist, percentile):
    # Simulation study: 1000 repeats, n = 200. The order-statistic interval is distribution-free,
    # so its hit rate must match its binomial coverage (>= 0.95). With 1000 repeats the binomial
    # sd of the hit rate is ~0.007, hence the window [0.93, 0.98].
    # Source for the true quantile: scipy.stats ppf of the generating distribution.
    rng = np.random.default_rng(20240611)
    truth = dist.ppf(percentile / 100)
    data = dist.rvs(size=(1000, 200), random_state=rng)
    hits = 0
    for row in data:
        est = percentile_table(row, [percentile])[percentile_key(percentile)]
        assert est.exact and est.coverage >= 0.95
        hits += est.low <= truth <= est.high
    assert 0.93 <= hits / 1000 <= 0.98


def test_percentile_estimate_is_numpy_linear_and_nans_are_excluded():
    rng = np.random.default_rng(1)
    x = rng.gamma(2.0, size=500)
    with_nan = np.concatenate([x, [np.nan, np.inf, np.nan]])
    table = percentile_table(with_nan, [5, 50, 95])
    for p in (5, 50, 95):
        est = table[f"p{p}"]
        assert est.value == pytest.approx(np.percentile(x, p, method="linear"), rel=1e-14)
        assert est.n == 500
        assert est.low <= est.value <= est.high


def test_too_few_samples_give_min_max_and_flag_inexact():
    x = np.array([3.0, 1.0, 2.0, 5.0, 4.0, 9.0, 7.0, 8.0, 6.0, 10.0])
    est = percentile_table(x, [99])["p99"]
    assert not est.exact
    assert (est.low, est.high) == (1.0, 10.0)
    # coverage of [X_(1), X_(10)] for P99 is P(1 <= B <= 9) = 1 - 0.01^10 ... - 0.99^10
    assert est.coverage == pytest.approx(1 - 0.99**10 - 0.01**10, rel=1e-9)
    empty = percentile_table(np.full(4, np.nan), [50])["p50"]
    assert empty.n == 0 and np.isnan(empty.value) and not empty.exact


def test_bad_percentiles_are_refused():
    with pytest.raises(DataError, match="between 0 and 100"):
        percentile_table(np.arange(10.0), [50, 120])
    with pytest.raises(DataError, match="1-D"):
        summarize(np.ones((3, 3)))


def test_summary_dict_keys_and_json():
    rng = np.random.default_rng(2)
    x = np.concatenate([rng.normal(10, 2, 400), [np.nan]])
    summary = summarize(x, [2.5, 5, 10, 50, 90, 95, 99])
    d = summary.to_dict()
    assert d["n"] == 400 and d["n_excluded"] == 1
    assert d["mean"] == pytest.approx(np.mean(x[:400]))
    assert d["std"] == pytest.approx(np.std(x[:400], ddof=1))
    for key in ("p2.5", "p5", "p10", "p50", "p90", "p95", "p99"):
        assert key in d and f"{key}_ci95" in d
        lo, hi = d[f"{key}_ci95"]
        assert lo <= d[key] <= hi
    json.dumps(d, allow_nan=False)  # no NaN leaks into JSON


def test_metric_ratio_edge_cases():
    # IEEE 754 division where fb > 0, NaN where fb gives no reference (zero, negative, NaN).
    fb = np.array([2.0, 0.0, -1.0, np.nan, np.inf, np.inf, 4.0, 2.0])
    fbff = np.array([1.0, 1.0, 1.0, 1.0, 3.0, np.inf, np.inf, np.nan])
    np.testing.assert_array_equal(
        metric_ratio(fb, fbff), [0.5, np.nan, np.nan, np.nan, 0.0, np.nan, np.inf, np.nan])


def test_paired_comparison_ratio_and_improvement():
    fb = np.array([2.0, 4.0, 0.0, np.nan, 5.0, 1.0])
    fbff = np.array([1.0, 5.0, 1.0, 1.0, np.nan, 1.0])
    out = paired_comparison(fb, fbff, [50])
    np.testing.assert_allclose(out["improvement"], [1.0, -1.0, -1.0, np.nan, np.nan, 0.0])
    np.testing.assert_allclose(out["ratio"], [0.5, 1.25, np.nan, np.nan, np.nan, 1.0])
    assert out["ratio_summary"].n == 3 and out["improvement_summary"].n == 4
    with pytest.raises(DataError, match="both arms"):
        paired_comparison(np.ones(3), np.ones(4))


# ----------------------------------------------------------------------------- harm probability


def test_binomial_intervals_match_scipy_docs_example():
    # Source: scipy.stats.binomtest documentation example, k = 7, n = 50:
    # Clopper-Pearson (0.05819, 0.26740), Wilson (0.06951, 0.26186).
    assert wilson_interval(7, 50) == pytest.approx((0.06951, 0.26186), abs=1e-5)
    assert clopper_pearson_interval(7, 50) == pytest.approx((0.05819, 0.26740), abs=1e-5)
    # Same reference: k = 0, n = 100, Clopper-Pearson upper 0.03622.
    assert clopper_pearson_interval(0, 100) == pytest.approx((0.0, 0.03622), abs=1e-5)


@pytest.mark.parametrize("k, n", [(0, 20), (1, 20), (10, 20), (20, 20), (3, 1000), (517, 1000)])
@pytest.mark.parametrize("confidence", [0.9, 0.95, 0.99])
def test_binomial_intervals_match_scipy_binomtest(k, n, confidence):
    # Reference library: scipy.stats.binomtest(k, n).proportion_ci.
    ref = sps.binomtest(k, n)
    w = ref.proportion_ci(confidence_level=confidence, method="wilson")
    cp = ref.proportion_ci(confidence_level=confidence, method="exact")
    assert wilson_interval(k, n, confidence) == pytest.approx((w.low, w.high), abs=1e-10)
    assert clopper_pearson_interval(k, n, confidence) == pytest.approx((cp.low, cp.high), abs=1e-10)


def test_probability_worse_counting_rules_with_unstable_samples():
    nan = np.nan
    fb = np.array([1.0, 1.0, 1.0, 1.0, nan, 1.0, nan, 2.0])
    fbff = np.array([2.0, 0.5, 1.0, nan, 1.0, 1.04, nan, 2.2])
    # worse: 0 (2 > 1), 3 (unstable only with ff), 5 (1.04 > 1), 7 (2.2 > 2) -> 4
    # not worse: 1, 2 (equal), 4 (only fb unstable); excluded: 6 (both unstable) -> n = 7
    h = probability_worse(fb, fbff)
    assert (h.count, h.n) == (4, 7)
    assert h.probability == pytest.approx(4 / 7)
    assert (h.low, h.high) == pytest.approx(wilson_interval(4, 7))
    # with 5 % tolerance, 1.04 vs 1 no longer counts; 2.2 vs 2 (10 %) still does
    h5 = probability_worse(fb, fbff, tolerance=0.05, method="clopper-pearson")
    assert (h5.count, h5.n) == (3, 7)
    assert (h5.low, h5.high) == pytest.approx(clopper_pearson_interval(3, 7))
    d = h5.to_dict()
    assert d["ci95"] == [h5.low, h5.high] and d["count"] == 3
    with pytest.raises(DataError, match="wilson"):
        probability_worse(fb, fbff, method="bootstrap")


def test_probability_worse_matches_closed_form_for_a_known_rule():
    # ff worse exactly when the gain ratio g lies outside (0, 2) (Source: linear superposition;
    # Seborg, Edgar, Mellichamp and Doyle, Process Dynamics and Control, 4th ed., 2016, ch. 15,
    # from memory: error with ff = error without ff times |1 - g|). With g ~ N(1, 0.6), P(worse) =
    # P(g < 0) + P(g > 2) = 2 * Phi(-1/0.6) (Source: normal CDF via scipy.stats.norm).
    rng = np.random.default_rng(7)
    g = rng.normal(1.0, 0.6, 20000)
    fb = np.full(g.size, 3.0)
    h = probability_worse(fb, fb * np.abs(1 - g))
    truth = 2 * sps.norm.cdf(-1 / 0.6)
    assert h.low <= truth <= h.high


# ----------------------------------------------------------------------------- convergence


def test_samples_for_probability_reference():
    # Source: Cochran, Sampling Techniques, 3rd ed., 1977, eq. 4.2 (from memory):
    # N = 1.96^2 p (1-p) / E^2 = 385 for p = 0.5, E = 0.05 at 95 %.
    assert samples_for_probability(0.5, 0.05) == 385


def test_zero_failure_bound_wilks_59():
    # Wilks 1941 [from memory]: 59 event-free runs bound the probability below 5 % at 95 %.
    assert zero_failure_bound(59) < 0.05 < zero_failure_bound(58)
    # rule of three: about 3/n; compare with the Clopper-Pearson one-sided upper bound
    # (two-sided 90 % upper limit = one-sided 95 %), scipy.stats.binomtest as reference.
    cp = sps.binomtest(0, 300).proportion_ci(confidence_level=0.90, method="exact")
    assert zero_failure_bound(300) == pytest.approx(cp.high, rel=1e-9)


def test_convergence_for_percentile_predicts_the_sample_size():
    # The interval half-width shrinks like 1/sqrt(N) (asymptotic normality of sample quantiles,
    # e.g. Serfling, Approximation Theorems of Mathematical Statistics, 1980, section 2.3.3
    # [from memory]); running with the predicted N must reach the target about (within 25 %).
    rng = np.random.default_rng(3)
    dist = sps.lognorm(0.5, scale=10.0)
    small = convergence_for_percentile(dist.rvs(300, random_state=rng), relative_half_width=0.02)
    assert not small.enough and small.samples_needed > 300
    big = dist.rvs(small.samples_needed, random_state=rng)
    table = percentile_table(big, [50, 90])
    worst = max((e.high - e.low) / 2 / e.value for e in table.values())
    assert 0.02 * 0.75 < worst < 0.02 * 1.25
    assert convergence_check(big, relative_half_width=0.03).enough


def test_convergence_for_percentile_with_too_few_samples():
    check = convergence_for_percentile(np.linspace(1, 2, 8), [50, 99])
    assert not check.enough
    assert check.samples_needed >= 299  # P(B = n) = 0.99^n <= 0.05 needs n >= 299
    assert "P99" in check.message


# ----------------------------------------------------------------------------- histograms


def test_envelope_from_histogram_matches_numpy_percentile():
    # Reference: numpy.percentile on the raw samples; the binned estimate must agree within one
    # bin width (values are only known to their bin).
    rng = np.random.default_rng(4)
    times, n = 25, 4000
    loc = np.linspace(-1, 2, times)[:, None]
    raw = loc + rng.standard_t(4, size=(times, n)) * np.linspace(0.2, 1.0, times)[:, None]
    edges = np.linspace(-6, 8, 561)  # bin width 0.025
    idx = np.clip(np.searchsorted(edges, raw, side="right") - 1, 0, edges.size - 2)
    counts = np.stack([np.bincount(row, minlength=edges.size - 1) for row in idx])
    percentiles = (5, 25, 50, 75, 95)
    env = envelope_from_histogram(counts, edges, percentiles)
    assert env.shape == (len(percentiles), times)
    expected = np.percentile(raw, percentiles, axis=1)
    assert np.max(np.abs(env - expected)) <= 0.025


def test_envelope_handles_empty_rows_and_single_bin():
    counts = np.array([[0, 0, 0, 0], [0, 10, 0, 0]])
    edges = np.array([0.0, 1.0, 2.0, 3.0, 4.0])
    env = envelope_from_histogram(counts, edges, (0, 50, 100))
    assert np.all(np.isnan(env[:, 0]))
    np.testing.assert_allclose(env[:, 1], [1.0, 1.5, 2.0], atol=1e-8)
    with pytest.raises(DataError, match="edges"):
        envelope_from_histogram(counts, edges[:-1])


def test_ratio_histogram_range_and_unusual_values():
    rng = np.random.default_rng(5)
    ratio = np.concatenate([rng.uniform(0.2, 0.8, 1000), [np.nan, np.inf, 50.0]])
    counts, edges = ratio_histogram(ratio, bins=20)
    assert counts.sum() == 1002  # NaN dropped; inf and 50 in the last bin
    assert edges[0] == pytest.approx(np.percentile(ratio[np.isfinite(ratio)], 1))
    assert edges[-1] == 1.0  # P99 < 1, range widened to include 1.0 (no change)
    assert counts[-1] >= 2
    c2, e2 = ratio_histogram(np.ones(10))
    assert c2.sum() == 10 and e2[0] < 1.0 < e2[-1]


def test_stats_import_does_not_load_scipy():
    # Layering: stats is on the run path; scipy is loaded only inside the functions.
    code = "import sys, robustff.stats; print('scipy' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"
