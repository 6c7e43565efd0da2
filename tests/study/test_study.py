"""Tests of the study runner (robustff.study.run_study) against closed-form answers.

The main check builds a loop whose feedforward dynamics are exact (equal lags, the feedforward
supplies the dead-time difference) so that only gain errors remain. The loop is linear (wide
output limits, no noise), so per sample the error with feedforward is the feedback-only error
times r0 = 1 - (kp kd_model) / (kp_model kd), and IAE(fbff) / IAE(fb) = |r0| exactly.
Source: linear superposition; Seborg, Edgar, Mellichamp and Doyle, Process Dynamics and Control,
4th ed., 2016, ch. 15, feedforward and ratio control (ideal Gff = -Gd/Gp) [from memory].
"""

from __future__ import annotations

import threading

import numpy as np
import pytest

from robustff.case import parse_case
from robustff.case.sampling import plant_batch
from robustff.design.margins import loop_margins
from robustff.stats import summarize, wilson_interval
from robustff.study import run_study
from robustff.study.runner import MARGIN_SAMPLES
from robustff.study.summary import summarize_study

KD_MODEL = 1.0
KP_MODEL = 2.0
KD_LOW, KD_HIGH = 0.3, 1.7


def exact_case(
    *,
    structure: str = "static",
    process_dead_time: float = 2.0,
    disturbance_dead_time: float = 2.0,
    uncertainty: str = f'"disturbance.gain" = {{ uniform = [{KD_LOW}, {KD_HIGH}] }}',
    samples: int = 1000,
    seed: int = 11,
    sampling: str = "random",
) -> str:
    """Case text of a loop whose feedforward is exact apart from the gains.

    Process and disturbance are FOPDT with the same time constant; the disturbance dead time is
    at least the process dead time, so a static (equal dead times) or lead-lag-delay
    feedforward reproduces -Gd/Gp exactly at the nominal point. Output limits are far away so
    the controller never saturates.
    """
    return f"""
title = "Exact feedforward test loop (fictional)"
time_unit = "s"

[process]
model = "fopdt"
gain = {KP_MODEL}
time_constant = 10.0
dead_time = {process_dead_time}

[disturbance]
model = "fopdt"
gain = {KD_MODEL}
time_constant = 10.0
dead_time = {disturbance_dead_time}

[feedback]
form = "pi"
tuning = "simc"
output_low = -1000.0
output_high = 1000.0
output_bias = 0.0

[feedforward]
structure = "{structure}"

[simulation]
duration = 120.0
step = 0.1

[[event]]
kind = "disturbance-step"
at = 5.0
size = 1.0

[uncertainty]
{uncertainty}

[study]
samples = {samples}
seed = {seed}
sampling = "{sampling}"
"""


def harm_probability_uniform(low: float, high: float, kd_model: float) -> float:
    """P(kd_model / kd outside (0, 2)) for kd uniform on [low, high] with 0 < low < high.

    kd_model / kd >= 2 <=> kd <= kd_model / 2, so P = (kd_model / 2 - low) / (high - low),
    clipped to [0, 1] (uniform CDF). Source: arithmetic.
    """
    return float(np.clip((kd_model / 2.0 - low) / (high - low), 0.0, 1.0))


@pytest.mark.parametrize(
    ("structure", "process_dead_time", "disturbance_dead_time"),
    [("static", 2.0, 2.0), ("lead-lag-delay", 2.0, 5.0), ("lead-lag", 3.0, 3.0)],
)
def test_gain_error_only_gives_closed_form_ratio_per_sample(
    structure: str, process_dead_time: float, disturbance_dead_time: float
) -> None:
    case = parse_case(exact_case(structure=structure, process_dead_time=process_dead_time,
                                 disturbance_dead_time=disturbance_dead_time, samples=400))
    result = run_study(case, jobs=1)
    assert result.samples == 400 and not result.partial
    assert not result.unstable.any()
    assert result.names == ["disturbance.gain"]
    kd = result.parameters[:, 0]
    assert kd.min() >= KD_LOW and kd.max() <= KD_HIGH
    r0 = 1.0 - KD_MODEL / kd  # kp = kp_model here
    iae = result.metrics["iae"]
    peak = result.metrics["peak_deviation"]
    ie = result.metrics["ie"]
    assert np.all(iae[:, 0] > 0)
    # Linear loop: e_fbff(t) = r0 e_fb(t) at every sample, so every integral scales the same way.
    np.testing.assert_allclose(iae[:, 1] / iae[:, 0], np.abs(r0), rtol=1e-9, atol=1e-9)
    np.testing.assert_allclose(peak[:, 1] / peak[:, 0], np.abs(r0), rtol=1e-9, atol=1e-9)
    ie_scale = np.abs(ie[:, 0]).max()
    np.testing.assert_allclose(ie[:, 1], r0 * ie[:, 0], rtol=1e-9, atol=1e-9 * ie_scale)


def test_both_gains_uncertain_ratio_follows_r0() -> None:
    # kp varies too: the feedback loop itself changes per sample, but both arms share it, so the
    # ratio is still |1 - kp kd_model / (kp_model kd)|.
    uncertainty = ('"process.gain" = { uniform = [1.2, 2.8] }\n'
                   f'"disturbance.gain" = {{ uniform = [{KD_LOW}, {KD_HIGH}] }}')
    case = parse_case(exact_case(uncertainty=uncertainty, samples=300, sampling="lhs"))
    result = run_study(case, jobs=1)
    assert not result.unstable.any()
    kp = result.parameters[:, result.names.index("process.gain")]
    kd = result.parameters[:, result.names.index("disturbance.gain")]
    r0 = 1.0 - (kp * KD_MODEL) / (KP_MODEL * kd)
    iae = result.metrics["iae"]
    np.testing.assert_allclose(iae[:, 1] / iae[:, 0], np.abs(r0), rtol=1e-9, atol=1e-9)
    worse = iae[:, 1] > iae[:, 0]
    ratio = (kp * KD_MODEL) / (KP_MODEL * kd)
    # Feedforward hurts exactly when the gain ratio leaves (0, 2): |1 - ratio| > 1 (analytic).
    np.testing.assert_array_equal(worse, (ratio <= 0.0) | (ratio >= 2.0))


def test_probability_of_harm_matches_closed_form() -> None:
    n = 2000
    case = parse_case(exact_case(samples=n, seed=5))
    result = run_study(case, jobs=2)
    summary = summarize_study(result)
    kd = result.parameters[:, 0]
    harm = summary["ff_worse"]["iae"]
    # Per sample, the harmful ones are exactly those with kd < kd_model / 2.
    assert harm["count"] == int(np.count_nonzero(kd < KD_MODEL / 2.0))
    assert harm["n"] == n
    expected = harm_probability_uniform(KD_LOW, KD_HIGH, KD_MODEL)  # 0.2 / 1.4 = 0.142857
    assert expected == pytest.approx(0.2 / 1.4)
    low, high = harm["ci95"]
    assert low < expected < high
    assert (low, high) == pytest.approx(wilson_interval(harm["count"], n))
    # Peak deviation scales by the same |r0|, so its harm count is the same.
    assert summary["ff_worse"]["peak_deviation"]["count"] == harm["count"]


def test_latin_hypercube_harm_count_is_within_one_stratum() -> None:
    # A Latin hypercube puts exactly one point in each 1/n slice of the kd range, so the number
    # of points below kd_model/2 is n P rounded either way. Source: McKay, Beckman and Conover,
    # Technometrics 21 (1979) 239-245 (the stratification property).
    n = 700
    case = parse_case(exact_case(samples=n, sampling="lhs", seed=3))
    summary = summarize_study(run_study(case, jobs=1))
    expected = n * harm_probability_uniform(KD_LOW, KD_HIGH, KD_MODEL)
    assert abs(summary["ff_worse"]["iae"]["count"] - expected) <= 1.0


def test_iae_percentiles_follow_the_closed_form_distribution() -> None:
    # With kp exact, IAE_fbff = |1 - kd_model/kd| IAE_fb(kd) and IAE_fb is proportional to kd
    # (linearity in the disturbance gain), so IAE_fbff = c |kd - kd_model| with c = IAE_fb/kd.
    # For kd uniform on [a, b], |kd - kd_model| has the CDF F(x) = (min(x, kd_model - a)
    # + min(x, b - kd_model)) / (b - a); its quantiles are known in closed form. Source: arithmetic.
    n = 2000
    case = parse_case(exact_case(samples=n, seed=21))
    result = run_study(case, jobs=1)
    kd = result.parameters[:, 0]
    iae = result.metrics["iae"]
    scale = iae[:, 0] / kd
    np.testing.assert_allclose(scale, scale[0], rtol=1e-9)
    width = KD_HIGH - KD_LOW
    near = min(KD_MODEL - KD_LOW, KD_HIGH - KD_MODEL)  # 0.7 both sides here: symmetric
    summary = summarize(iae[:, 1], (10.0, 50.0, 90.0))
    for key, p in (("p10", 0.10), ("p50", 0.50), ("p90", 0.90)):
        true_quantile = scale[0] * p * width / 2.0  # F(x) = 2x / width for x <= near
        assert p * width / 2.0 <= near
        estimate = summary.percentiles[key]
        assert estimate.exact
        assert estimate.low <= true_quantile <= estimate.high, key


def test_results_do_not_depend_on_jobs_or_chunk_size() -> None:
    case = parse_case(exact_case(samples=1500, sampling="lhs", seed=9))
    reference = run_study(case, jobs=1)
    for jobs, chunk_size in ((2, 1000), (2, 250), (1, 400)):
        other = run_study(case, jobs=jobs, chunk_size=chunk_size)
        np.testing.assert_array_equal(other.parameters, reference.parameters)
        for name, values in reference.metrics.items():
            np.testing.assert_array_equal(other.metrics[name], values, err_msg=name)
        np.testing.assert_array_equal(other.unstable, reference.unstable)


def test_samples_and_seed_overrides() -> None:
    case = parse_case(exact_case(samples=50, seed=1))
    first = run_study(case, samples=120, seed=4, jobs=1)
    again = run_study(case, samples=120, seed=4, jobs=1)
    other = run_study(case, samples=120, seed=5, jobs=1)
    assert first.samples == 120 and first.seed == 4 and first.requested == 120
    np.testing.assert_array_equal(first.parameters, again.parameters)
    assert not np.array_equal(first.parameters, other.parameters)


def test_cancel_after_first_chunk_keeps_only_finished_chunks() -> None:
    case = parse_case(exact_case(samples=3000, sampling="random", seed=2))
    cancel = threading.Event()
    calls: list[tuple[int, int]] = []

    def progress(done: int, total: int) -> None:
        calls.append((done, total))
        cancel.set()

    partial = run_study(case, jobs=1, chunk_size=500, progress=progress, cancel=cancel)
    assert partial.partial
    assert partial.requested == 3000
    assert calls[0] == (500, 3000)
    assert partial.samples == 500 * len(calls) < 3000
    assert partial.samples % 500 == 0
    # The finished chunks are the same as in a full run (same samples, same metrics).
    full = run_study(case, jobs=1, chunk_size=500)
    assert not full.partial
    k = partial.samples
    np.testing.assert_array_equal(partial.parameters, full.parameters[:k])
    for name, values in full.metrics.items():
        np.testing.assert_array_equal(partial.metrics[name], values[:k], err_msg=name)
    summary = summarize_study(partial)
    assert summary["partial"] is True and summary["samples"] == k
    # The margins (computed while the chunks ran, for the samples planned) are those of the
    # samples that finished, as loop_margins gives them for exactly those plants.
    assert partial.margins.size == k
    direct = loop_margins(plant_batch(case, partial.names, partial.parameters),
                          partial.design.feedback, sample_time=case.simulation.step)
    for name in ("gain_margin", "phase_margin", "delay_margin", "ms", "stable"):
        np.testing.assert_array_equal(getattr(partial.margins, name), getattr(direct, name),
                                      err_msg=name)
    assert full.margins.size == min(3000, MARGIN_SAMPLES)


def test_progress_reports_every_chunk_in_order() -> None:
    case = parse_case(exact_case(samples=1000, seed=2))
    calls: list[tuple[int, int]] = []
    result = run_study(case, jobs=2, chunk_size=300, progress=lambda d, t: calls.append((d, t)))
    assert calls == [(300, 1000), (600, 1000), (900, 1000), (1000, 1000)]
    assert not result.partial


def test_peak_memory_is_bounded_by_chunk_size_not_chunk_count() -> None:
    import tracemalloc

    case = parse_case(exact_case(samples=1000, seed=2))
    run_study(case, samples=20, jobs=1)  # load the compiled kernel and libraries first
    tracemalloc.start()
    try:
        # Margins work in fixed blocks of about 20 MB whatever the chunking: leave them out here.
        result = run_study(case, jobs=1, chunk_size=25, margins=False)  # 40 chunks of 25 samples
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    histogram = result.envelope_counts.nbytes  # one (2, P, B) int64 array
    assert result.samples == 1000
    # Per-sample results of 1000 samples are ~0.2 MB; a few histograms in flight are fine.
    assert peak < 8 * histogram, f"peak {peak / 1e6:.1f} MB, histogram {histogram / 1e6:.1f} MB"


def test_chunk_noise_seeds_are_the_spawned_children_of_the_study_seed() -> None:
    # Reference: numpy's SeedSequence.spawn (child i of SeedSequence(seed)), the definition
    # the runner's per-sample seeds were written with; each chunk now works out its own.
    from robustff.study.runner import chunk_noise_seeds, noise_seeds

    for seed in (0, 7, 2**70):
        children = np.random.SeedSequence(seed).spawn(4)
        expected = np.concatenate([c.generate_state(n, dtype=np.uint64)
                                   for c, n in zip(children, (300, 300, 300, 100), strict=True)])
        np.testing.assert_array_equal(noise_seeds(seed, 1000, 300), expected)
        np.testing.assert_array_equal(chunk_noise_seeds(seed, 2, 300), expected[600:900])
