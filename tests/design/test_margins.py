"""Loop margins against analytic results, published values and python-control."""

import json
import math
import subprocess
import sys
import warnings

import numpy as np
import pytest

import robustff.design.margins as margins_module
from robustff.design.margins import loop_margins, model_margins
from robustff.design.tuning import FeedbackSettings
from robustff.errors import DataError, DesignError
from robustff.plant.models import PlantBatch, SensorModel, TransferModel


def settings(kc: float, ti: float, td: float = 0.0, filter_time: float = 0.0) -> FeedbackSettings:
    form = "pid" if td > 0.0 else "pi"
    return FeedbackSettings(form, kc, ti, td, filter_time, ti, -1e9, 1e9, 0.0, math.nan, "test")


def external_response(model: TransferModel, fb: FeedbackSettings, omega: np.ndarray) -> np.ndarray:
    """L(jw) built here from the model's own exact-delay response and the PID formula."""
    jw = 1j * omega
    controller = 1.0 + (1.0 / (jw * fb.ti) if math.isfinite(fb.ti) else 0.0)
    if fb.td > 0.0:
        controller = controller + jw * fb.td / (jw * fb.filter_time + 1.0)
    return fb.kc * controller * model.frequency_response(omega)


def control_margins(model: TransferModel, fb: FeedbackSettings, omega: np.ndarray):
    """(GM, PM deg, Ms) from python-control on a frequency sweep with the exact delay."""
    import control

    frd = control.frd(external_response(model, fb, omega), omega)
    gm, pm, sm, *_ = control.stability_margins(frd)
    return gm, pm, 1.0 / sm


def pade_loop(model: TransferModel, fb: FeedbackSettings, order: int = 12):
    import control

    s = control.tf("s")
    controller = fb.kc * (1 + 1 / (fb.ti * s))
    if fb.td > 0.0:
        controller = controller + fb.kc * fb.td * s / (fb.filter_time * s + 1)
    return controller * model.to_control(pade_order=order)


LOOPS = [
    (TransferModel("fopdt", 2.0, 10.0, 0.0, 3.0), settings(1.2, 9.0)),
    (TransferModel("sopdt", 1.0, 6.0, 2.0, 1.0), settings(4.0, 8.0, 1.5, 0.15)),
    (TransferModel("ipdt", -0.05, 0.0, 0.0, 2.0), settings(-5.0, 16.0)),
    (TransferModel("fopdt", 0.7, 50.0, 0.0, 0.5), settings(30.0, 4.0)),
]


@pytest.mark.parametrize(("model", "fb"), LOOPS)
def test_nominal_margins_equal_python_control(model, fb):
    # Source: python-control 0.10 `stability_margins` (FRD method) on a dense sweep of the loop
    # with the exact delay, and its polynomial method on a 12th-order Pade model of the delay.
    import control

    result = model_margins(model, fb)
    gm, pm, ms = control_margins(model, fb, np.logspace(-4, 2, 3000))
    assert result.gain_margin[0] == pytest.approx(gm, rel=1e-3)
    assert result.phase_margin[0] == pytest.approx(pm, rel=1e-3)
    assert result.ms[0] == pytest.approx(ms, rel=1e-3)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        gm_p, pm_p, sm_p, *_ = control.stability_margins(pade_loop(model, fb))
    assert result.gain_margin[0] == pytest.approx(gm_p, rel=1e-3)
    assert result.phase_margin[0] == pytest.approx(pm_p, rel=1e-3)
    assert result.ms[0] == pytest.approx(1.0 / sm_p, rel=1e-3)
    assert result.stable[0]


@pytest.mark.parametrize(
    ("k", "kc", "theta"), [(0.5, 1.0, 1.0), (2.0, 0.1, 3.0), (-0.2, -4.0, 0.3), (1.0, 1.0, 2.0)]
)
def test_integrating_process_under_p_control_is_analytic(k, kc, theta):
    # Derivation: L = K Kc e^{-theta s}/s. |L| = K Kc / w gives w_c = K Kc and
    # PM = 90 deg - K Kc theta (rad -> deg); phase -90 deg - w theta = -180 deg at
    # w_180 = pi/(2 theta), so GM = w_180/(K Kc) = pi/(2 K Kc theta); delay margin
    # PM/w_c = pi/(2 K Kc) - theta. (Standard Bode analysis, e.g. Astrom and Murray,
    # Feedback Systems, 2008, section 9.4 [from memory].)
    result = model_margins(TransferModel("ipdt", k, 0.0, 0.0, theta), settings(kc, math.inf))
    loop_gain = k * kc
    assert result.gain_margin[0] == pytest.approx(math.pi / (2 * loop_gain * theta), rel=1e-6)
    assert result.phase_margin[0] == pytest.approx(90.0 - math.degrees(loop_gain * theta), rel=1e-6)
    assert result.stable[0] == (loop_gain * theta < math.pi / 2)
    if result.stable[0]:
        assert result.delay_margin[0] == pytest.approx(math.pi / (2 * loop_gain) - theta, rel=1e-6)


@pytest.mark.parametrize(
    ("k", "tau", "theta"), [(2.0, 10.0, 1.0), (0.3, 4.0, 2.5), (-1.5, 7.0, 0.2)]
)
def test_simc_fopdt_loop_reduces_to_delay_over_integrator(k, tau, theta):
    # Source: Skogestad, "Simple analytic rules for model reduction and PID controller tuning",
    # J. Process Control 13 (2003) 291-309: with tau_c = theta and tau_I = tau the loop is
    # L = e^{-theta s}/(2 theta s). Derivation: |L| = 1 at w_c = 1/(2 theta), PM = 90 deg -
    # 0.5 rad = 61.35 deg; phase -180 deg at w = pi/(2 theta) where |L| = 1/pi, so GM = pi;
    # delay margin (pi/2 - 1/2)/w_c = (pi - 1) theta. The paper quotes GM 3.14, PM 61.4 deg,
    # Ms 1.59 (from memory); Ms is checked against python-control.
    fb = settings(tau / (k * 2 * theta), tau)
    model = TransferModel("fopdt", k, tau, 0.0, theta)
    result = model_margins(model, fb)
    assert result.gain_margin[0] == pytest.approx(math.pi, rel=1e-6)
    assert result.phase_margin[0] == pytest.approx(90.0 - math.degrees(0.5), rel=1e-6)
    assert result.delay_margin[0] == pytest.approx((math.pi - 1.0) * theta, rel=1e-6)
    assert result.ms[0] == pytest.approx(1.59, abs=0.005)
    omega = np.logspace(-3, 2, 3000) / theta
    assert result.ms[0] == pytest.approx(control_margins(model, fb, omega)[2], rel=1e-3)


def test_simc_integrating_margins_match_published_values():
    # Source: Skogestad 2003 (as above), integrating process with tau_c = theta:
    # Kc = 1/(k (2 theta)), tau_I = 8 theta; GM 2.96, PM 46.9 deg, Ms 1.70 (from memory);
    # cross-checked with python-control on the exact-delay sweep.
    k, theta = 0.4, 3.0
    model = TransferModel("ipdt", k, 0.0, 0.0, theta)
    fb = settings(1.0 / (k * 2 * theta), 8 * theta)
    result = model_margins(model, fb)
    assert result.gain_margin[0] == pytest.approx(2.96, abs=0.01)
    assert result.phase_margin[0] == pytest.approx(46.9, abs=0.05)
    assert result.ms[0] == pytest.approx(1.70, abs=0.005)
    gm, pm, ms = control_margins(model, fb, np.logspace(-4, 1.5, 3000))
    assert (result.gain_margin[0], result.phase_margin[0], result.ms[0]) == pytest.approx(
        (gm, pm, ms), rel=1e-3
    )


@pytest.mark.parametrize(("model", "fb"), LOOPS)
def test_adding_the_delay_margin_makes_the_loop_marginal(model, fb):
    # Definition: the delay margin rotates L at the gain crossover by exactly the phase margin,
    # so with that extra dead time L passes through -1: GM -> 1, PM -> 0, stability is lost
    # just beyond it (Astrom and Murray, Feedback Systems, 2008, section 9.4 [from memory]).
    margin = model_margins(model, fb).delay_margin[0]

    def with_extra(extra: float):
        return model_margins(model.with_parameter("dead_time", model.dead_time + extra), fb)

    marginal = with_extra(margin)
    assert marginal.gain_margin[0] == pytest.approx(1.0, abs=1e-6)
    assert marginal.phase_margin[0] == pytest.approx(0.0, abs=1e-5)
    assert with_extra(0.99 * margin).stable[0]
    assert not with_extra(1.01 * margin).stable[0]


def spread_batch(model: TransferModel, n: int, seed: int) -> PlantBatch:
    rng = np.random.default_rng(seed)
    batch = PlantBatch.from_nominal(model, model, SensorModel(), n)
    batch.set_parameter("process.gain", model.gain * rng.uniform(0.3, 4.0, n))
    batch.set_parameter("process.dead_time", model.dead_time * rng.uniform(0.3, 3.0, n))
    for name in {"fopdt": ("time_constant",), "sopdt": ("time_constant", "time_constant_2"),
                 "ipdt": ()}[model.kind]:
        nominal = getattr(model, name)
        batch.set_parameter(f"process.{name}", nominal * rng.uniform(0.3, 3.0, n))
    return batch


@pytest.mark.parametrize(("model", "fb"), LOOPS[:3])
def test_stability_verdict_matches_closed_loop_poles(model, fb):
    # Source: closed-loop poles of the loop with a 10th-order Pade delay (python-control
    # `feedback(...).poles()`); the Pade model is close enough away from marginal samples.
    import control

    batch = spread_batch(model, 40, seed=3)
    result = loop_margins(batch, fb)
    assert 0 < np.count_nonzero(~result.stable) < batch.size  # the spread mixes both
    for i in range(batch.size):
        closed = control.feedback(pade_loop(batch.model("process", i), fb, order=10), 1)
        assert result.stable[i] == bool(np.all(closed.poles().real < 0)), i
    # With these monotone-phase loops the Nyquist verdict equals the rule GM > 1 and PM > 0.
    rule = (result.gain_margin > 1.0) & (result.phase_margin > 0.0)
    np.testing.assert_array_equal(rule, result.stable)


def test_four_times_the_gain_is_flagged_unstable():
    # SIMC FOPDT loop has GM = pi (see above): samples whose process gain is 4 times the
    # nominal have |L| = 4/pi > 1 at the phase crossover and must be flagged unstable.
    model = TransferModel("fopdt", 1.0, 5.0, 0.0, 1.0)
    fb = settings(5.0 / 2.0, 5.0)
    batch = PlantBatch.from_nominal(model, model, SensorModel(), 6)
    batch.set_parameter("process.gain", np.array([1.0, 4.0, 0.5, 4.0, 3.0, 3.2]))
    result = loop_margins(batch, fb)
    np.testing.assert_array_equal(result.stable, [True, False, True, False, True, False])
    gains = batch.values["process.gain"]
    np.testing.assert_allclose(result.gain_margin, math.pi / gains, rtol=1e-6)
    assert np.all(np.isinf(result.ms[~result.stable]))
    assert np.all(np.isnan(result.delay_margin[~result.stable]))
    summary = result.summary(batch=batch)
    assert summary["unstable"] == 3 and summary["unstable_samples"] == [1, 3, 5]
    assert summary["unstable_parameters"][0]["gain"] == 4.0


@pytest.mark.parametrize(("model", "fb"), LOOPS)
def test_vectorised_equals_per_sample_and_blocks(model, fb, monkeypatch):
    batch = spread_batch(model, 60, seed=7)
    whole = loop_margins(batch, fb)
    monkeypatch.setattr(margins_module, "_BLOCK_BYTES", 1)  # one sample per block
    for i in range(0, batch.size, 7):
        single = loop_margins(batch.subset(slice(i, i + 1)), fb)
        for name in ("gain_margin", "phase_margin", "delay_margin", "ms", "stable"):
            np.testing.assert_allclose(getattr(single, name)[0], getattr(whole, name)[i], rtol=1e-9)


def test_common_grid_gives_the_same_margins():
    model, fb = LOOPS[1]
    batch = spread_batch(model, 30, seed=11)
    adaptive = loop_margins(batch, fb)
    common = loop_margins(batch, fb, omega=np.logspace(-5, 3, 5000))
    np.testing.assert_array_equal(adaptive.stable, common.stable)
    for name in ("gain_margin", "phase_margin", "delay_margin", "ms"):
        np.testing.assert_allclose(getattr(common, name), getattr(adaptive, name), rtol=1e-6)


def test_lag_free_process_keeps_crossing_at_high_frequency():
    # A pure delay under PI: |L| -> |K Kc| while the delay keeps turning L, so the margins sit
    # at high frequency; compare with a brute-force sweep of the exact response.
    model, fb = TransferModel("fopdt", 1.0, 0.0, 0.0, 1.0), settings(0.5, 1.0)
    result = model_margins(model, fb)
    omega = np.logspace(-3, 3, 400000)
    response = external_response(model, fb, omega)
    assert result.stable[0]
    assert result.ms[0] == pytest.approx(1.0 / np.min(np.abs(1.0 + response)), rel=1e-4)
    negative_axis = (np.diff(np.sign(response.imag)) != 0) & (response.real[:-1] < 0)
    largest_crossing = np.max(np.abs(response[:-1][negative_axis]))
    assert result.gain_margin[0] == pytest.approx(1.0 / largest_crossing, rel=1e-3)
    assert not model_margins(model, settings(1.2, 5.0)).stable[0]  # |L(inf)| > 1


def test_summary_is_json_friendly_and_counts_limits():
    # A delay-free FOPDT under PI never reaches -180 deg: the gain margin is infinite.
    model = TransferModel("fopdt", 1.0, 5.0, 0.0, 0.0)
    batch = PlantBatch.from_nominal(model, model, SensorModel(), 3)
    result = loop_margins(batch, settings(2.0, 5.0))
    assert np.all(np.isinf(result.gain_margin)) and np.all(result.stable)
    summary = result.summary((5, 50, 95))
    text = json.dumps(summary, allow_nan=False)
    assert json.loads(text)["gain_margin"]["p50"] is None
    assert summary["gain_margin"]["infinite"] == 3
    model, fb = LOOPS[0]
    spread = loop_margins(spread_batch(model, 200, seed=5), fb)
    limits = spread.summary()["fraction_below_limits"]
    # Limits Ms > 2, GM < 2, PM < 30 deg are common practice, no source.
    assert limits["ms_above_2"] == pytest.approx(np.mean(~spread.stable | (spread.ms > 2)))
    assert 0.0 < limits["phase_margin_below_30"] < 1.0
    p50 = spread.summary((50,))["phase_margin"]["p50"]
    assert p50 == pytest.approx(np.percentile(spread.phase_margin[spread.stable], 50))


def test_bad_settings_and_data_raise_errors_an_engineer_understands():
    model = TransferModel("sopdt", 1.0, 6.0, 2.0, 1.0)
    with pytest.raises(DesignError, match="filter time"):
        model_margins(model, settings(4.0, 8.0, 1.5, 0.0))
    with pytest.raises(DesignError, match="Kc"):
        model_margins(model, settings(0.0, 8.0))
    batch = PlantBatch.from_nominal(model, model, SensorModel(), 4)
    batch.set_parameter("process.dead_time", np.array([1.0, -0.5, 1.0, 1.0]))
    with pytest.raises(DataError, match="process.dead_time.*sample 1"):
        loop_margins(batch, settings(4.0, 8.0))


def test_margins_module_imports_neither_scipy_nor_control():
    code = (
        "import sys, robustff.design.margins; "
        "print(any(m.split('.')[0] in ('scipy', 'control', 'matplotlib', 'textual') "
        "for m in sys.modules))"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"
