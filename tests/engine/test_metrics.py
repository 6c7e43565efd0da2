"""Loop metrics: the kernel's running sums against the reference definitions and outside values."""


import numpy as np
import pytest

from robustff.case import Case, Event, FeedbackSpec, FeedforwardSpec, SimulationSpec
from robustff.design.tuning import design_loop
from robustff.engine import build_scenario, nominal_batch, simulate
from robustff.engine.metrics import trajectory_metrics
from robustff.plant.models import TransferModel as Model

PROCESS = Model("fopdt", 2.0, 10.0, 0.0, 3.0)
DISTURBANCE = Model("fopdt", 1.5, 5.0, 0.0, 4.0)


def make_case(events, structure="lead-lag-delay", process=PROCESS, disturbance=DISTURBANCE,
              step=0.05, duration=120.0, gain_factor=1.0, **feedback) -> Case:
    limits = {"output_low": -1e4, "output_high": 1e4, "output_bias": 0.0}
    spec = FeedbackSpec(**{**limits, **feedback})
    return Case("metrics", "min", process, disturbance, spec,
                FeedforwardSpec(structure, gain_factor=gain_factor),
                SimulationSpec(duration, step), tuple(events))


@pytest.mark.parametrize("events", [
    [Event("setpoint-step", 2.0, 2.5), Event("disturbance-step", 50.0, -0.8)],
    [Event("disturbance-step", 3.0, 4.0), Event("disturbance-ramp", 40.0, -6.0, duration=10.0)],
], ids=["setpoint then disturbance", "disturbance step and ramp"])
def test_streaming_metrics_equal_trajectory_metrics(events):
    # Source: the definitions in robustff.engine.metrics, evaluated with numpy on the stored
    # response.
    # Tight output limits (bias 50, range 48.5..51.5) make the output saturate, so time at limit and
    # anti-windup are exercised; perturbed plants give different responses per sample.
    case = make_case(events, output_low=48.5, output_high=51.5, output_bias=50.0)
    design = design_loop(case)
    scenario = build_scenario(case, design)
    batch = nominal_batch(case, 4)
    batch.set_parameter("process.gain", np.array([2.0, 1.4, 2.8, 2.3]))
    batch.set_parameter("disturbance.dead_time", np.array([4.0, 2.2, 5.13, 3.0]))
    result = simulate(batch, design, scenario, keep=np.arange(4))
    u_low, u_high = case.feedback.output_low - 50.0, case.feedback.output_high - 50.0
    saturated = 0.0
    for i in range(4):
        for arm in range(2):
            cv, u = result.trajectories[i, arm], result.trajectories[i, 2 + arm]
            at_limit = (u <= u_low) | (u >= u_high)
            saturated += at_limit.sum()
            ref = trajectory_metrics(
                scenario.setpoint_profile - cv, u, scenario.step,
                event_start=scenario.event_start, direction=scenario.direction,
                settling_band=scenario.settling_band, at_limit=at_limit,
                segment_start=scenario.segment_start)
            got = {name: result.metrics[name][i, arm] for name in ref if name in result.metrics}
            got["opposite_excursion"] = (result.metrics["overshoot"][i, arm]
                                         * (abs(scenario.setpoint_step) / 100.0
                                            if scenario.setpoint_step else 1.0))
            for name, value in ref.items():
                assert got[name] == pytest.approx(value, rel=1e-9, abs=1e-12), name
    assert saturated > 0


def test_setpoint_overshoot_and_settling_match_python_control():
    # Source: python-control step_info (Overshoot in percent of the final value, SettlingTime
    # to a 2 % band) on the continuous loop Gp C / (1 + Gp C) with a Pade(10) dead time.
    import control

    case = make_case([Event("setpoint-step", 0.0, 2.5)], structure="none", step=0.03,
                     duration=80.0)
    design = design_loop(case)
    result = simulate(nominal_batch(case), design, build_scenario(case, design))
    fb = design.feedback
    s = control.tf("s")
    loop = control.ss(PROCESS.to_control(10)) * control.ss(fb.kc * (1 + 1 / (fb.ti * s)))
    closed = control.feedback(loop, control.ss([], [], [], [[1.0]]))
    info = control.step_info(closed, T=np.arange(0, 80.0, 0.01), SettlingTimeThreshold=0.02)
    assert info["Overshoot"] > 2.0  # a setpoint step with an ideal PI does overshoot
    assert result.metrics["overshoot"][0, 0] == pytest.approx(info["Overshoot"], abs=0.3)
    assert result.metrics["overshoot"][0, 1] == result.metrics["overshoot"][0, 0]
    assert result.metrics["settling_time"][0, 0] == pytest.approx(info["SettlingTime"], abs=0.3)


def test_over_compensating_feedforward_overshoot_is_half_the_feedback_peak():
    # Source: linear superposition; Seborg, Edgar, Mellichamp and Doyle, Process Dynamics and
    # Control, 4th ed., 2016, ch. 15 (feedforward control), from memory. Equal lags and dead
    # times make the static compensator exact in its dynamics, so with gain_factor 1.5 the error
    # with feedforward is r0 = 1 - 1.5 = -0.5 times the feedback-only error: its opposite-side
    # excursion is half the feedback-only peak (overshoot_percent = 50 %) and its peak deviation
    # is half as large.
    disturbance = Model("fopdt", 1.5, 10.0, 0.0, 3.0)
    case = make_case([Event("disturbance-step", 1.0, 2.0)], structure="static",
                     disturbance=disturbance, gain_factor=1.5)
    design = design_loop(case)
    result = simulate(nominal_batch(case), design, build_scenario(case, design))
    m = {name: value[0] for name, value in result.metrics.items()}
    assert m["overshoot"][1] == pytest.approx(0.5 * m["peak_deviation"][0], rel=1e-9)
    assert m["overshoot_percent"][1] == pytest.approx(50.0, rel=1e-9)
    assert m["peak_deviation"][1] == pytest.approx(0.5 * m["peak_deviation"][0], rel=1e-9)


def test_open_loop_residual_of_static_feedforward_peaks_at_quarter_kd_d():
    # Source: analytic (arithmetic): static compensator with the right gain, no dead
    # times, tau_p = 10, tau_d = 5: residual kd d (e^{-t/tau_p} - e^{-t/tau_d}), peak 0.25 kd d at
    # t* = tau_p tau_d ln(tau_p/tau_d)/(tau_p - tau_d) = 6.931. Feedback made negligible.
    kd, size, t0, h = 1.5, 2.0, 1.0, 0.01
    case = make_case([Event("disturbance-step", t0, size)], structure="static",
                     process=Model("fopdt", 2.0, 10.0, 0.0, 0.0),
                     disturbance=Model("fopdt", kd, 5.0, 0.0, 0.0), step=h, duration=40.0,
                     tuning="manual", kc=1e-12, ti=1e12)
    design = design_loop(case)
    scenario = build_scenario(case, design, settling_band=0.01)
    result = simulate(nominal_batch(case), design, scenario, keep=np.array([0]))
    cv = result.trajectories[0, 1]
    t = np.maximum(scenario.times - t0, 0.0)
    np.testing.assert_allclose(cv, kd * size * (np.exp(-t / 10.0) - np.exp(-t / 5.0)),
                               rtol=0, atol=1e-9)
    tau_p, tau_d = 10.0, 5.0
    peak_time = tau_p * tau_d * np.log(tau_p / tau_d) / (tau_p - tau_d)
    assert np.argmax(cv) * h - t0 == pytest.approx(peak_time, abs=h)
    ref = trajectory_metrics(-cv, result.trajectories[0, 3], h, event_start=t0,
                             direction=scenario.direction, settling_band=0.01)
    assert ref["peak_deviation"] == pytest.approx(0.25 * kd * size, rel=1e-6)
    assert ref["opposite_excursion"] == 0.0  # the residual stays on the push side
    # Integrals of the closed form over the T = 39 after the step (analytic; the rectangle rule
    # of the metric definitions is off by about h |e(T)| / 2 = 3e-4):
    # IAE = kd d [tau_p (1 - e^{-T/tau_p}) - tau_d (1 - e^{-T/tau_d})]
    #     = 3 (10 (1 - e^{-3.9}) - 5 (1 - e^{-7.8})) = 3 (9.797581 - 4.997951) = 14.39889;
    # ISE = (kd d)^2 [5 (1 - e^{-7.8}) - (20/3) (1 - e^{-11.7}) + 2.5 (1 - e^{-15.6})]
    #     = 9 (4.997951 - 6.666611 + 2.500000) = 7.48206.
    assert ref["iae"] == pytest.approx(14.39889, rel=1e-4)
    assert ref["ise"] == pytest.approx(7.48206, rel=1e-4)


def test_settling_is_measured_after_each_event_and_the_longest_reported():
    # A hand-built error record: event A at t = 0 settles at 3 s, event B at t = 10 s settles
    # at 16 s (6 s after it); the definition asks for max(3, 6) = 6 s, where settling from the
    # first event until the last excursion would give 16 s. Source: the definition in
    # robustff.engine.metrics (per-event settling, as in the settling time of each step
    # response, e.g. Seborg et al., "Process Dynamics and Control", 4th ed., 2016, ch. 5).
    h = 1.0
    error = np.zeros(20)
    error[[0, 1, 2]] = 1.0          # outside the band at 0, 1, 2 s: settled at 3 s
    error[[10, 13, 15]] = -1.0      # outside at 10, 13, 15 s: settled at 16 s
    segments = np.where(np.arange(20) >= 10, 10.0, 0.0)
    ref = trajectory_metrics(error, np.zeros(20), h, event_start=0.0, direction=1.0,
                             settling_band=0.5, segment_start=segments)
    assert ref["settling_time"] == 6.0
    single = trajectory_metrics(error, np.zeros(20), h, event_start=0.0, direction=1.0,
                                settling_band=0.5)
    assert single["settling_time"] == 16.0


def test_the_kernel_reports_the_longest_settling_over_the_events():
    # Two well separated disturbance steps on the nominal plant: the kernel's settling time is
    # the longer of the two single-step settling times (each simulated alone; the second step
    # meets a settled first response, so by superposition it settles as it would alone), not
    # the time from the first step to the end of the second response.
    first, second = Event("disturbance-step", 5.0, 1.0), Event("disturbance-step", 120.0, -2.0)
    band = 0.01
    settled = []
    for events in ([first, second], [first], [second]):
        case = make_case(events, duration=240.0)
        design = design_loop(case)
        scenario = build_scenario(case, design, settling_band=band)
        settled.append(simulate(nominal_batch(case), design, scenario).metrics["settling_time"][0])
    both, only_first, only_second = settled
    assert only_first[0] < 115.0 and only_second[0] < 115.0
    for arm in range(2):
        assert both[arm] == pytest.approx(max(only_first[arm], only_second[arm]), abs=0.05)
    assert both[0] < 115.0  # the old definition gave 115 + the second settling time
