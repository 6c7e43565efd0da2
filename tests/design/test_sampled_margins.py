"""Margins of the loop as simulated (sampled PI/PID, zero-order hold) and gain margins above 20.

References: python-control 0.10 (``sample_system`` ZOH, ``stability_margins``, closed-loop
poles), scipy's ``cont2discrete``, a hand-stepped loop, and closed forms derived in comments.
"""

import math
import warnings

import numpy as np
import pytest

from robustff.design.margins import loop_margins, loop_response, model_margins
from robustff.design.sampled_loop import SampledLoop, split_delay, zoh_coefficients
from robustff.design.tuning import FeedbackSettings
from robustff.engine.discretise import block_coefficients
from robustff.errors import DesignError
from robustff.plant.kinds import registered_kinds
from robustff.plant.models import KIND_CODES, PlantBatch, SensorModel, TransferModel


def settings(kc: float, ti: float, td: float = 0.0, filter_time: float = 0.0) -> FeedbackSettings:
    form = "pid" if td > 0.0 else "pi"
    return FeedbackSettings(form, kc, ti, td, filter_time, ti, -1e9, 1e9, 0.0, math.nan, "test")


#: One loop per registered kind (PI and PID), dead times whole multiples of h = 0.25.
KIND_LOOPS = {
    "fopdt": (TransferModel("fopdt", 2.0, 10.0, 0.0, 3.0), settings(1.2, 9.0)),
    "sopdt": (TransferModel("sopdt", 1.0, 6.0, 2.0, 1.0), settings(4.0, 8.0, 1.5, 0.15)),
    "ipdt": (TransferModel("ipdt", -0.05, 0.0, 0.0, 2.0), settings(-5.0, 16.0)),
}
H = 0.25


def test_every_registered_kind_has_a_loop_here():
    assert sorted(KIND_LOOPS) == sorted(kind.name for kind in registered_kinds())


def discrete_controller(fb: FeedbackSettings, h: float):
    """The simulated controller as a python-control discrete transfer function (see
    robustff.design.sampled_loop: integral summed after use, filtered backward difference)."""
    import control

    z = control.tf([1, 0], [1], h)
    c = 1 + (h / fb.ti) / (z - 1)
    if fb.td > 0.0:
        a = fb.filter_time / (fb.filter_time + h)
        c = c + fb.td / (fb.filter_time + h) * (z - 1) / (z - a)
    return fb.kc * c


def python_control_sampled_loop(model: TransferModel, fb: FeedbackSettings, h: float):
    """Source: python-control 0.10 ``sample_system(..., 'zoh')`` of the delay-free process, times
    ``z^-m`` for a dead time of exactly ``m`` samples, times the discrete controller."""
    import control

    m, f = split_delay(np.array([model.dead_time]), h)
    assert f[0] == 0.0  # whole samples only: python-control has no fractional delay
    process = control.sample_system(model.with_parameter("dead_time", 0.0).to_control(), h,
                                    "zoh")
    z = control.tf([1, 0], [1], h)
    return discrete_controller(fb, h) * process * z ** -int(m[0])


@pytest.mark.parametrize("kind", sorted(KIND_LOOPS))
@pytest.mark.parametrize("f", [0.0, 0.3, 0.85])
def test_zoh_coefficients_equal_the_simulators_update(kind, f):
    # The simulation's plant update (itself checked against scipy's ZOH with fractional delay in
    # tests/plant) must be the process seen by the sampled-loop margins.
    model = KIND_LOOPS[kind][0]
    lags = [getattr(model, name) for name in ("time_constant", "time_constant_2")]
    for tau1, tau2 in [lags, [0.0, lags[1]], [lags[0], lags[0]], [0.0, 0.0]]:
        # lags a kind does not have are zero (as the margins read them from the batch)
        tau1, tau2 = (tau1, tau2) if kind == "sopdt" else (tau1, 0.0) if kind == "fopdt" else (
            0.0, 0.0)
        c = zoh_coefficients(np.array([model.gain]), np.array([tau1]), np.array([tau2]),
                             kind == "ipdt", 0.4, np.array([f]))
        mine = [c[name][0] for name in ("phi11", "phi21", "phi22", "g1_new", "g2_new",
                                        "g1_old", "g2_old")]
        engine = block_coefficients(KIND_CODES[kind], model.gain, tau1, tau2, 0.4, f)
        np.testing.assert_allclose(mine, engine[:7], rtol=1e-12, atol=1e-15)
        assert c["second"][0] == (engine[7] == 2.0)


@pytest.mark.parametrize("kind", sorted(KIND_LOOPS))
def test_sampled_response_equals_python_control(kind):
    model, fb = KIND_LOOPS[kind]
    omega = np.logspace(-3, math.log10(math.pi / H), 300)
    mine = loop_response(PlantBatch.from_nominal(model, model, SensorModel(), 1), fb, omega,
                         sample_time=H)[0]
    reference = python_control_sampled_loop(model, fb, H)(np.exp(1j * omega * H))
    # python-control evaluates the polynomials in z, which near z = 1 cancel (z - 1)^2 of the
    # double integrator: 1e-7 there, 1e-10 elsewhere.
    np.testing.assert_allclose(mine, reference, rtol=1e-7)
    np.testing.assert_allclose(mine[omega > 0.1], reference[omega > 0.1], rtol=1e-10)


@pytest.mark.parametrize("kind", sorted(KIND_LOOPS))
def test_sampled_margins_equal_python_control(kind):
    # Source: python-control 0.10 `stability_margins` (polynomial method for discrete-time
    # systems, all crossings with returnall=True; epsw = 1e-3 leaves out its numerical roots at
    # w ~ 0, where two integrators put L on the -180 deg asymptote, far below the band) on
    # the loop of the test above; Ms from the smallest |1 + L| of python-control's own
    # evaluation of that loop on a dense sweep (its polynomial Ms is off by 0.1 % here).
    import control

    model, fb = KIND_LOOPS[kind]
    loop = python_control_sampled_loop(model, fb, H)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        gm, pm, *_ = control.stability_margins(loop, returnall=True, method="poly", epsw=1e-3)
    omega = np.linspace(1e-3, math.pi / H, 400_000)
    ms = 1.0 / np.min(np.abs(1.0 + loop(np.exp(1j * omega * H))))
    result = model_margins(model, fb, sample_time=H)
    assert result.stable[0]
    assert result.gain_margin[0] == pytest.approx(np.min(gm), rel=1e-6)
    assert result.phase_margin[0] == pytest.approx(np.min(pm), rel=1e-6)
    assert result.ms[0] == pytest.approx(ms, rel=1e-6)
    # The hold and the sampling only take margin away at this step (about h/2 of delay).
    continuous = model_margins(model, fb)
    assert result.gain_margin[0] < continuous.gain_margin[0]
    assert result.phase_margin[0] < continuous.phase_margin[0]


def test_bound_holds_for_every_kind():
    # The grid stops and the search for far crossings end on this bound: it must never be
    # below |L| at any higher frequency up to pi/h.
    rng = np.random.default_rng(4)
    n = 40
    for integrating, second, td in [(False, 0.0, 0.0), (False, 1.0, 1.0), (True, 0.0, 0.0),
                                    (True, 0.0, 2.0)]:
        loop = SampledLoop(rng.uniform(-3, 3, n), rng.uniform(0, 5, n),
                           second * rng.uniform(0, 5, n), rng.uniform(0, 4, n), integrating,
                           1.7, 6.0, td, 0.3, 0.5)
        omega = np.linspace(0.01, loop.nyquist, 2000)
        magnitude = np.abs(loop.response(np.broadcast_to(omega, (n, omega.size))))
        tail_max = np.maximum.accumulate(magnitude[:, ::-1], axis=1)[:, ::-1]
        for j in range(0, omega.size, 97):
            assert np.all(loop.bound(np.full(n, omega[j])) >= tail_max[:, j] * (1 - 1e-12))


def test_sampled_verdict_matches_discrete_closed_loop_poles():
    # Source: poles of the discrete closed loop built with python-control from the simulator's
    # own plant update (engine.discretise.block_coefficients, fractional delays included): the
    # Nyquist count on the unit circle must give the same verdict.
    import control

    rng = np.random.default_rng(8)
    model, fb = KIND_LOOPS["fopdt"]
    n = 40
    batch = PlantBatch.from_nominal(model, model, SensorModel(), n)
    batch.set_parameter("process.gain", model.gain * rng.uniform(0.3, 4.0, n))
    batch.set_parameter("process.dead_time", model.dead_time * rng.uniform(0.3, 3.0, n))
    batch.set_parameter("process.time_constant", model.time_constant * rng.uniform(0.3, 3.0, n))
    result = loop_margins(batch, fb, sample_time=H)
    assert 0 < np.count_nonzero(~result.stable) < n
    z = control.tf([1, 0], [1], H)
    for i in range(n):
        p = batch.model("process", i)
        m, f = split_delay(np.array([p.dead_time]), H)
        c = block_coefficients(KIND_CODES["fopdt"], p.gain, p.time_constant, 0.0, H, float(f[0]))
        plant = (c[3] * z + c[5]) / (z - c[0]) * z ** -(int(m[0]) + 1)
        poles = control.feedback(discrete_controller(fb, H) * plant, 1).poles()
        assert result.stable[i] == bool(np.all(np.abs(poles) < 1.0)), i


def hand_stepped_loop(model: TransferModel, fb: FeedbackSettings, h: float, steps: int):
    """|e| of a PI loop after a unit load at the process input, stepped by hand: scipy's exact
    ZOH of the delay-free FOPDT (Source: scipy.signal.cont2discrete, method 'zoh'), a dead time
    of whole samples, the integral summed after use."""
    from scipy.signal import cont2discrete

    system = (np.array([[-1 / model.time_constant]]),
              np.array([[model.gain / model.time_constant]]), np.array([[1.0]]),
              np.array([[0.0]]))
    a, b, c, _, _ = cont2discrete(system, h, "zoh")
    m = round(model.dead_time / h)
    u = np.zeros(steps + m + 1)
    x, integral, errors = 0.0, 0.0, np.empty(steps)
    for k in range(steps):
        e = -float(c[0, 0] * x)
        errors[k] = abs(e)
        u[k + m] = fb.kc * e + integral + 1.0  # + unit load; delayed m samples
        integral += fb.kc * h / fb.ti * e
        x = float(a[0, 0] * x + b[0, 0] * u[k])
    return errors


def test_a_loop_stable_in_continuous_time_is_unstable_as_sampled():
    # Derivation: with Ti = tau the FOPDT loop is L = (Kc K / tau) e^{-theta s}/s; its phase is
    # -180 deg at w = pi/(2 theta), so GM = pi tau/(2 Kc K theta) (Astrom and Hagglund,
    # "Advanced PID Control", ISA 2006, ch. 4, from memory, for the delay-integrator loop).
    # Kc is set for GM = 1.03. Sampling with h = theta/10 adds about h/2 of delay: the sampled
    # GM is about 1.03 theta/(theta + h/2) = 0.98 < 1.
    tau, k, theta, h = 10.0, 1.0, 2.0, 0.2
    kc = math.pi * tau / (2 * k * theta * 1.03)
    model, fb = TransferModel("fopdt", k, tau, 0.0, theta), settings(kc, tau)
    continuous = model_margins(model, fb)
    sampled = model_margins(model, fb, sample_time=h)
    assert continuous.gain_margin[0] == pytest.approx(1.03, rel=1e-6)
    assert continuous.stable[0] and not sampled.stable[0]
    assert 0.95 < sampled.gain_margin[0] < 1.0
    assert math.isinf(sampled.ms[0]) and math.isnan(sampled.delay_margin[0])
    # Independent: the hand-stepped sampled loop grows, a sample time ten times shorter
    # (GM about 1.03 * 2/2.01 > 1) decays and is stable in the margins too.
    errors = hand_stepped_loop(model, fb, h, 6000)
    assert errors[-500:].max() > 2 * errors[1000:1500].max()
    fine = model_margins(model, fb, sample_time=h / 10)
    assert fine.stable[0] and 1.0 < fine.gain_margin[0] < 1.03
    errors = hand_stepped_loop(model, fb, h / 10, 60000)
    assert errors[-5000:].max() < 0.5 * errors[10000:15000].max()


def level_loop(kc: float, ti: float) -> tuple[TransferModel, FeedbackSettings]:
    """A fictional averaging level loop: outlet valve -> level, -0.05 %/min per %, 0.3 min."""
    return TransferModel("ipdt", -0.05, 0.0, 0.0, 0.3), settings(kc, ti)


def test_ipdt_level_loop_under_p_control_has_its_analytic_gain_margin_of_50():
    # Source: for K e^{-theta s}/s under P control GM = pi/(2 K Kc theta), phase crossover at
    # w = pi/(2 theta) (Astrom and Hagglund, "Advanced PID Control", ISA 2006, ch. 4, from
    # memory; derivation: phase -90 deg - w theta = -180 deg). Kc is chosen for GM = 50.
    kc = -math.pi / (2 * 0.05 * 0.3 * 50.0)
    model, fb = level_loop(kc, math.inf)
    result = model_margins(model, fb)
    assert result.gain_margin[0] == pytest.approx(50.0, rel=1e-9)
    # The later crossings, w = (4k + 1) pi/(2 theta), have smaller |L|: GM is the first one.


def test_ipdt_level_loop_under_pi_control_reports_its_gain_margin_of_about_50():
    # The loop of the issue: an averaging level PI whose GM (about 52) used to read inf.
    # Derivation: L = K Kc (1 + 1/(j w Ti)) e^{-j w theta}/(j w) has phase
    # -180 deg + atan(w Ti) - w theta, so the phase crossover solves atan(w Ti) = w theta
    # (solved here with scipy's brentq) and GM = w^2 Ti / (K Kc sqrt(1 + (w Ti)^2)).
    # Cross-checked with python-control on a 20th-order Pade model of the delay.
    import control
    from scipy.optimize import brentq

    kc, ti = -2.0, 12.0
    model, fb = level_loop(kc, ti)
    k, theta = model.gain, model.dead_time
    w180 = brentq(lambda w: math.atan(w * ti) - w * theta, 1.0, math.pi / theta)
    expected = w180 ** 2 * ti / (k * kc * math.sqrt(1 + (w180 * ti) ** 2))
    assert 45.0 < expected < 60.0
    result = model_margins(model, fb)
    assert result.gain_margin[0] == pytest.approx(expected, rel=1e-9)
    s = control.tf("s")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        gm, *_ = control.stability_margins(kc * (1 + 1 / (ti * s)) * model.to_control(20),
                                           returnall=True)
    assert result.gain_margin[0] == pytest.approx(np.min(gm), rel=1e-5)
    # As simulated (h = 0.02 min) the margin is a little smaller, and finite too.
    sampled = model_margins(model, fb, sample_time=0.02)
    assert 0.9 * expected < sampled.gain_margin[0] < expected


def brute_force_gain_margin(model: TransferModel, fb: FeedbackSettings, top: float) -> float:
    """Smallest 1/|L| over the negative-real-axis crossings of a dense sweep of the exact L."""
    omega = np.linspace(1e-4, top, int(10_000 * top))

    def loop(w: np.ndarray) -> np.ndarray:
        jw = 1j * w
        c = 1 + 1 / (jw * fb.ti)
        if fb.td > 0.0:
            c = c + jw * fb.td / (jw * fb.filter_time + 1)
        return fb.kc * c * model.frequency_response(w)

    response = loop(omega)
    i = np.nonzero((np.sign(response.imag[:-1]) != np.sign(response.imag[1:]))
                   & (response.real[:-1] < 0))[0]
    # the crossing by linear interpolation of Im L between the two sweep points
    step = (omega[i + 1] - omega[i]) / (response.imag[i + 1] - response.imag[i])
    return float(np.min(1 / np.abs(loop(omega[i] - response.imag[i] * step))))


@pytest.mark.parametrize(
    ("model", "fb"),
    [
        # Low-gain loops, GM far above 20 (several hundred radians of delay phase).
        (TransferModel("fopdt", 0.2, 10.0, 0.0, 3.0), settings(0.5, 9.0)),
        (TransferModel("sopdt", 0.3, 6.0, 2.0, 1.0), settings(0.4, 8.0, 1.5, 0.15)),
        (TransferModel("ipdt", 0.01, 0.0, 0.0, 2.0), settings(0.5, 40.0)),
        # A PID whose derivative lifts |L| after the first crossing (1/|L| = 61 at 4 rad per
        # time unit): the fourth crossing, near 22 rad per time unit, decides (27.3).
        (TransferModel("fopdt", 0.004, 0.02, 0.0, 1.0), settings(1.0, 2.0, 1.0, 0.1)),
    ],
)
def test_large_gain_margins_are_numbers_from_the_smallest_crossing(model, fb):
    result = model_margins(model, fb)
    assert math.isfinite(result.gain_margin[0]) and result.gain_margin[0] > 20.0
    assert result.gain_margin[0] == pytest.approx(brute_force_gain_margin(model, fb, 200.0),
                                                  rel=1e-4)


def test_gain_margin_is_inf_only_without_a_phase_crossover():
    # Without dead time FOPDT and IPDT under PI never reach -180 deg (asymptote only); a SOPDT
    # under PI does, at a finite frequency (derivation: -atan(1/(w Ti)) - atan(w tau1) -
    # atan(w tau2) falls below -180 deg when 1/Ti > 1/tau1 + 1/tau2).
    assert math.isinf(model_margins(TransferModel("fopdt", 1.0, 5.0, 0.0, 0.0),
                                    settings(2.0, 5.0)).gain_margin[0])
    assert math.isinf(model_margins(TransferModel("ipdt", 1.0, 0.0, 0.0, 0.0),
                                    settings(0.5, 10.0)).gain_margin[0])
    # Source for the SOPDT value: python-control 0.10 `stability_margins` (polynomial method).
    import control

    model, fb = TransferModel("sopdt", 0.1, 4.0, 4.0, 0.0), settings(1.0, 1.0)
    s = control.tf("s")
    gm, *_ = control.stability_margins(fb.kc * (1 + 1 / (fb.ti * s)) * model.to_control(),
                                       returnall=True)
    assert model_margins(model, fb).gain_margin[0] == pytest.approx(np.min(gm), rel=1e-9)


def test_sampled_margins_refuse_a_bad_sample_time():
    model, fb = KIND_LOOPS["fopdt"]
    for bad in (0.0, -1.0, math.nan, math.inf):
        with pytest.raises(DesignError, match="sample time"):
            model_margins(model, fb, sample_time=bad)


def test_a_lag_free_process_under_pi():
    # Without dead time L = h (1 + 1/(j w Ti)), h = K Kc: phase in (-90, 0] deg, no crossing,
    # GM inf; |1 + L|^2 = (1 + h)^2 + (h/(w Ti))^2, so Ms = 1/(1 + h), approached as w -> inf
    # (derivation). With a dead time the crossings go on for ever with |L| falling towards h;
    # the first, beyond where |L| is within 1 % of h, has the largest |L| and decides.
    # Source for that one: python-control 0.10 `stability_margins` on a 20th-order Pade model.
    import control

    h, ti = 0.3, 5.0
    pure = model_margins(TransferModel("fopdt", 1.0, 0.0, 0.0, 0.0), settings(h, ti))
    assert pure.stable[0] and math.isinf(pure.gain_margin[0])
    assert pure.ms[0] == pytest.approx(1.0 / (1.0 + h), rel=1e-9)
    model, fb = TransferModel("fopdt", 1.0, 0.0, 0.0, 2.0), settings(0.02, 0.2)
    result = model_margins(model, fb)
    s = control.tf("s")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        gm, *_ = control.stability_margins(fb.kc * (1 + 1 / (fb.ti * s)) * model.to_control(20),
                                           returnall=True)
    assert result.gain_margin[0] == pytest.approx(np.min(gm), rel=1e-5)
    assert result.gain_margin[0] < 1.0 / fb.kc  # not the high-frequency limit 1/h


def test_peak_sensitivity_of_a_low_gain_loop_lies_above_the_first_grid():
    # |L| < 0.05 there, so |S| < 1.053: the peak was missed before. Reference: the smallest
    # |1 + L| on a dense sweep of the exact loop (continuous) and of python-control's
    # evaluation of the sampled loop (whole-sample dead time).
    model, fb = TransferModel("fopdt", 1.4, 17.0, 0.0, 5.75), settings(0.05, 26.0)
    omega = np.linspace(1e-3, 3.0, 600_000)
    jw = 1j * omega
    response = fb.kc * (1 + 1 / (jw * fb.ti)) * model.frequency_response(omega)
    assert model_margins(model, fb).ms[0] == pytest.approx(
        1.0 / np.min(np.abs(1.0 + response)), rel=1e-6)
    loop = python_control_sampled_loop(model, fb, H)
    omega = np.linspace(1e-3, math.pi / H, 600_000)
    sampled = 1.0 / np.min(np.abs(1.0 + loop(np.exp(1j * omega * H))))
    assert model_margins(model, fb, sample_time=H).ms[0] == pytest.approx(sampled, rel=1e-6)
