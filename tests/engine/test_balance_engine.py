"""The nonlinear balance-plant simulation against analytic results, scipy's ODE solver and the
linear engine on the plant's linearisation.

Sources: the balances of the stirred blending tank and the stirred-tank heater (Seborg, Edgar
and Mellichamp, Process Dynamics and Control, chapter 2, from memory); plug-flow transport delay
with a time-varying flow, integral of F dt over the delay = V_pipe (from memory); the rest is
arithmetic on those equations.
"""

from __future__ import annotations

import numpy as np
import pytest
from balance_cases import HEATER, balance_case, event
from scipy.integrate import solve_ivp

from robustff.case import parse_case
from robustff.case.sampling import plant_batch
from robustff.design.tuning import design_loop
from robustff.engine import build_scenario, nominal_batch, simulate
from robustff.engine.balance_simulation import run_balance_kernel
from robustff.engine.metrics import trajectory_metrics

OPEN_LOOP = 'tuning = "manual"\nkc = 1e-9\nti = 1e9'  # a controller too weak to act


def _run(case, batch=None, keep=True):
    design = design_loop(case)
    scenario = build_scenario(case, design)
    result = simulate(batch or nominal_batch(case), design, scenario,
                      keep=np.array([0]) if keep else None)
    return design, scenario, result


@pytest.mark.parametrize("size", [-200.0, 300.0])
def test_the_pipe_delay_follows_the_flow_that_carries_the_change(size: float) -> None:
    # Blending tank after a wild-flow step at t0 with w2 held: the tank follows
    # x(t) = x_inf + (x0 - x_inf) exp(-w' (t - t0) / m); the analyzer sees, dead time theta_a
    # later, the fluid that left the tank when the outflow since then filled the pipe. The
    # change travels with the NEW flow w', so it arrives at t0 + theta_a + rho V_pipe / w'
    # (not at the old flow's delay).
    case = balance_case(pipe_volume=0.35, analyzer_dead_time=0.3, feedback=OPEN_LOOP,
                        events=event("wild_flow", 2.0, size))
    _, scenario, result = _run(case)
    w1, w2 = 500.0 + size, 200.0
    outflow, m, pipe = w1 + w2, 1800.0, 900.0 * 0.35
    x_inf = (w1 * 0.4 + w2 * 0.75) / outflow
    t = scenario.times
    arrival = 2.0 + 0.3 + pipe / outflow
    expected = np.where(t < arrival, 0.5,
                        x_inf + (0.5 - x_inf) * np.exp(-outflow * np.maximum(t - arrival, 0.0) / m))
    assert np.max(np.abs(result.trajectories[0, 0] - (expected - 0.5))) < 1e-10
    # the delay at the old flow would be visibly wrong
    assert abs(pipe / 700.0 - pipe / outflow) > 0.05


def _linear_twin(case, template_feedback: str = ""):
    """The same loop with the plant's linearisation as FOPDT models (the linear engine)."""
    paths = case.balance.paths()
    process, disturbance = paths["process"], paths[case.balance.feedforward_input]
    events = "".join(event(None, e.at, e.size) for e in case.events)
    text = f"""title = "twin"
time_unit = "min"
[process]
model = "fopdt"
gain = {process.gain!r}
time_constant = {process.time_constant!r}
dead_time = {process.dead_time!r}
[disturbance]
model = "fopdt"
gain = {disturbance.gain!r}
time_constant = {disturbance.time_constant!r}
dead_time = {disturbance.dead_time!r}
[feedback]
output_low = -1e5
output_high = 1e5
output_bias = 0.0
[simulation]
duration = {case.simulation.duration!r}
step = {case.simulation.step!r}
{events}"""
    return parse_case(text)


PLANTS = {
    # plant, disturbance input, small step (0.1 %), large step (40 %)
    "blending": (None, "wild_flow", -0.5, -200.0),
    "heater": (HEATER, "process_flow", 0.3, -120.0),
}


@pytest.mark.parametrize("name", list(PLANTS))
def test_small_steps_match_the_linearisation_and_large_ones_do_not(name: str) -> None:
    template, disturbance, small, large = PLANTS[name]
    kwargs = {"template": template} if template else {}
    measured = f'["{disturbance}"]'
    responses = {}
    for label, size in (("small", small), ("large", large)):
        case = balance_case(**kwargs, pipe_volume=0.1, analyzer_dead_time=0.2, measured=measured,
                            events=event(disturbance, 2.0, size), duration=30.0)
        twin = _linear_twin(case)
        nonlinear = _run(case)[2].trajectories[0, 0]
        linear = _run(twin)[2].trajectories[0, 0]
        responses[label] = np.max(np.abs(nonlinear - linear)) / np.max(np.abs(linear))
    assert responses["small"] < 0.01   # within 1 % of the step response
    assert responses["large"] > 0.05   # the drift is real: the gain and lag move with the flow


@pytest.mark.parametrize("size", [-400.0, -200.0, -5.0, 5.0, 500.0])
def test_balance_law_holds_the_setpoint_for_any_wild_flow_step(size: float) -> None:
    # Exact parameters, no pipe or analyzer dead time: the inflowing composition is then the
    # setpoint at every instant (w2 = w1 (x_sp - x1)/(x2 - x_sp)), so the outlet never moves.
    for trim in ("add", "multiply"):
        case = balance_case(feedforward=f'law = "balance"\ntrim = "{trim}"',
                            events=event("wild_flow", 2.0, size))
        iae = _run(case, keep=False)[2].metrics["iae"][0]
        assert iae[0] > 0.0
        assert iae[1] < 1e-6 * iae[0], trim


@pytest.mark.parametrize("template", [None, HEATER], ids=["blending", "heater"])
def test_linear_feedforward_degrades_with_the_excursion_and_the_balance_law_does_not(
        template) -> None:
    # A throughput step, then a step of the second (measured) input: the linear compensator's
    # gain for that input is the nominal operating point's, w1_0 / (x2 - x) (blending) or
    # w_0 c_p / lambda (heater), so its residual grows with how far the throughput moved; the
    # balance law is right at every throughput. (For the throughput step alone the linear
    # compensator is exact too: at fixed compositions and temperatures the balance law is
    # linear in the throughput.)
    kind = "heater" if template else "blending"
    flow, second, second_size = (("process_flow", "inlet_temperature", -5.0) if template
                                 else ("wild_flow", "wild_composition", 0.02))
    nominal = 300.0 if template else 500.0
    measured = f'["{flow}", "{second}"]'
    kwargs = {"template": template} if template else {}
    ratios = {}
    for law in ("linear", "balance"):
        for fraction in (0.0, 0.2, 0.4):
            events = (event(flow, 2.0, -fraction * nominal) if fraction else "") + event(
                second, 20.0, second_size)
            case = balance_case(**kwargs, measured=measured, events=events,
                                feedforward=f'law = "{law}"\nstructure = "static"')
            iae = _run(case, keep=False)[2].metrics["iae"][0]
            ratios[law, fraction] = iae[1] / iae[0]
    assert ratios["linear", 0.0] < 1e-6, kind
    assert 0.05 < ratios["linear", 0.2] < ratios["linear", 0.4], kind
    assert max(ratios["balance", f] for f in (0.0, 0.2, 0.4)) < 1e-6, kind


def test_a_multiplying_trim_corrects_a_wrong_ratio_and_an_adding_one_does_not() -> None:
    # The plant's wild stream is richer than the model says (x1 = 0.42, unmeasured; the law
    # uses 0.4): the trim then holds the ratio the plant needs. Multiplied, that ratio scales
    # with w1 and the next wild-flow step is compensated exactly; added, the offset stays
    # what it was and the step leaves a residual (derived from w2 = w1 (x_sp - x1)/(x2 - x_sp)).
    ratios = {}
    for trim in ("add", "multiply"):
        case = balance_case(feedforward=f'law = "balance"\ntrim = "{trim}"',
                            events=event("wild_flow", 2.0, -200.0))
        batch = plant_batch(case, ["process.wild_composition"], np.array([[0.42]]))
        iae = _run(case, batch=batch, keep=False)[2].metrics["iae"][0]
        ratios[trim] = iae[1] / iae[0]
    assert ratios["multiply"] < 1e-6
    assert ratios["add"] > 0.05


@pytest.mark.parametrize("template", [None, HEATER], ids=["blending", "heater"])
def test_mass_and_energy_are_conserved(template) -> None:
    # Over the run, what flowed in minus what flowed out equals what the tank accumulated:
    # component mass (blending) or energy / c_p (heater), both arms, events on every input.
    kwargs = {"template": template} if template else {}
    names = (("process_flow", 90.0, "inlet_temperature", -8.0) if template
             else ("wild_flow", -150.0, "wild_composition", 0.05))
    events = (event(names[0], 2.0, names[1]) + event(names[2], 9.0, names[3])
              + event(None, 15.0, 0.02 if not template else 3.0, kind="setpoint-step")
              + event(names[0], 20.0, -names[1] / 2, kind="disturbance-ramp", duration=4.0))
    case = balance_case(**kwargs, pipe_volume=0.1, analyzer_dead_time=0.2, substeps=4,
                        events=events, feedforward='law = "balance"\ntrim = "multiply"',
                        measured="[]" if template else '["wild_flow"]')
    design = design_loop(case)
    scenario = build_scenario(case, design)
    batch = nominal_batch(case)
    run = run_balance_kernel(batch, design, scenario, np.array(
        [design.feedback.kc, design.feedback.ti, 0.0, 0.0, design.feedback.tracking_time,
         design.feedback.output_low - design.feedback.output_bias,
         design.feedback.output_high - design.feedback.output_bias, 1e9, 1.0, 0.0]))
    inflow, outflow, accumulated = run.closure[0, :, 0], run.closure[0, :, 1], run.closure[0, :, 2]
    assert np.all(np.abs(accumulated) > 0.0)
    assert np.all(np.abs(inflow - outflow - accumulated) <= 1e-9 * inflow)


def test_the_exact_step_matches_scipys_ode_solver_in_closed_loop() -> None:
    # No dead time: the analyzer reads the tank. Replaying the controller's recorded flow
    # (held over each scan) through scipy's RK45 at tight tolerance gives the same tank state.
    case = balance_case(events=event("wild_flow", 2.0, -200.0), duration=12.0, step=0.1)
    design, scenario, result = _run(case)
    flows = result.trajectories[0, 2] + design.feedback.output_bias
    times = scenario.times
    w1 = np.where(times >= 2.0 - 1e-12, 300.0, 500.0)
    x = 0.5
    for k in range(times.size - 1):
        def rate(_t, y, k=k):
            return [(w1[k] * 0.4 + flows[k] * 0.75 - (w1[k] + flows[k]) * y[0]) / 1800.0]
        x = solve_ivp(rate, (times[k], times[k + 1]), [x], rtol=1e-12, atol=1e-14).y[0, -1]
        assert abs(x - 0.5 - result.trajectories[0, 0, k + 1]) < 1e-10


def test_metrics_follow_the_engines_definitions() -> None:
    # The kernel's running sums against the reference implementation of the metric
    # definitions (robustff.engine.metrics.trajectory_metrics) on its own trajectory.
    case = balance_case(pipe_volume=0.1, analyzer_dead_time=0.2,
                        events=event("wild_flow", 2.0, -100.0) + event("wild_flow", 20.0, 60.0))
    _, scenario, result = _run(case)
    for arm in (0, 1):
        error = -result.trajectories[0, arm]
        reference = trajectory_metrics(
            error, result.trajectories[0, 2 + arm], scenario.step,
            event_start=scenario.event_start, direction=scenario.direction,
            settling_band=scenario.settling_band, segment_start=scenario.segment_start)
        for name in ("iae", "ise", "ie", "itae", "peak_deviation", "settling_time",
                     "valve_travel"):
            assert result.metrics[name][0, arm] == pytest.approx(reference[name], rel=1e-9,
                                                                 abs=1e-15), name


def test_a_samples_result_does_not_depend_on_the_batch() -> None:
    case = balance_case(feedforward='law = "balance"', pipe_volume=0.2,
                        events=event("wild_flow", 2.0, -150.0))
    values = np.array([[1.5, 0.38], [2.0, 0.4], [2.6, 0.43]])
    names = ["process.volume", "process.wild_composition"]
    together = _run(case, batch=plant_batch(case, names, values), keep=False)[2]
    for i in range(3):
        alone = _run(case, batch=plant_batch(case, names, values[i:i + 1]), keep=False)[2]
        np.testing.assert_array_equal(alone.metrics["iae"][0], together.metrics["iae"][i])


def test_a_flow_loop_lag_converges_with_the_internal_step_to_scipys_solution() -> None:
    # With a flow-loop lag the tank sees the lag's mean over each internal step: the error
    # against the two-state ODE (lag and tank, scipy RK45 at tight tolerance, the recorded
    # setpoints held over each scan) falls with the internal step.
    errors = []
    for substeps in (1, 4, 16):
        case = balance_case(events=event("wild_flow", 2.0, -200.0), duration=12.0, step=0.1,
                            substeps=substeps, process_extra="flow_loop_time_constant = 0.4",
                            feedforward='law = "balance"\nstructure = "static"')
        design, scenario, result = _run(case)
        setpoints = result.trajectories[0, 3] + design.feedback.output_bias
        times = scenario.times
        w1 = np.where(times >= 2.0 - 1e-12, 300.0, 500.0)
        state = [setpoints[0], 0.5]
        worst = 0.0
        for k in range(times.size - 1):
            def rate(_t, y, setpoint=setpoints[k], wild=w1[k]):
                flow, x = y
                return [(setpoint - flow) / 0.4,
                        (wild * 0.4 + flow * 0.75 - (wild + flow) * x) / 1800.0]
            state = solve_ivp(rate, (times[k], times[k + 1]), state, rtol=1e-12,
                              atol=1e-14).y[:, -1]
            worst = max(worst, abs(state[1] - 0.5 - result.trajectories[0, 1, k + 1]))
        errors.append(worst)
    peak = float(np.max(np.abs(result.trajectories[0, 1])))
    assert errors[2] < errors[1] < errors[0]
    assert errors[2] < 0.01 * peak



def test_a_lead_lag_on_the_balance_law_with_a_ratio_trim_stays_useful() -> None:
    # A lead of six times the lag overshoots the computed flow far beyond its range after a
    # 40 % throughput drop; the flow setpoint stays within the range and the ratio trim's gain
    # follows the static computed flow, so the feedback does not wind up.
    case = balance_case(process_extra="flow_loop_time_constant = 0.3",
                        feedforward='law = "balance"\nstructure = "lead-lag"\nlead = 0.3\n'
                                    'lag = 0.05\ntrim = "multiply"',
                        events=event("wild_flow", 2.0, -200.0))
    _, _, result = _run(case)
    iae = result.metrics["iae"][0]
    assert iae[1] < 0.5 * iae[0]
    assert result.metrics["time_at_limit"][0, 1] < 0.5  # min


@pytest.mark.parametrize("template, name, size", [
    (None, "wild_flow", 0.5), (None, "wild_composition", 4e-4),
    (HEATER, "process_flow", 0.3), (HEATER, "inlet_temperature", 0.01),
])
def test_finite_differences_of_the_simulation_give_the_linearised_paths(template, name,
                                                                        size) -> None:
    # A small open-loop step through the compiled simulation: the final deviation over the step
    # is the gain, and the response reaches 1 - 1/e of it one time constant after the dead time
    # (FOPDT step response K (1 - exp(-(t - theta)/tau))).
    kwargs = {"template": template} if template else {}
    case = balance_case(**kwargs, pipe_volume=0.1, analyzer_dead_time=0.2, feedback=OPEN_LOOP,
                        measured="[]", events=event(name, 1.0, size), duration=40.0, step=0.01)
    path = case.balance.paths()[name]
    _, scenario, result = _run(case)
    cv = result.trajectories[0, 0]
    assert cv[-1] / size == pytest.approx(path.gain, rel=2e-3)
    at = 1.0 + path.dead_time + path.time_constant
    reached = np.interp(at, scenario.times, cv) / (path.gain * size)
    assert reached == pytest.approx(1.0 - np.exp(-1.0), abs=2e-3)


def test_filtered_noise_on_an_input_keeps_its_spread_through_the_tank() -> None:
    # Heated tank, open loop, filtered noise on the inlet temperature (a gain-1 path): noise of
    # standard deviation s and time constant T through the tank's first-order lag tau has the
    # standard deviation s sqrt(T / (T + tau)) (arithmetic: the integral of the product of the
    # two first-order spectra). Pooled over 8 plants with their own seeds; both arms see the
    # same noise (common random numbers).
    noise = ('[[event]]\nkind = "disturbance-noise"\ndisturbance = "inlet_temperature"\n'
             'at = 0.0\nsize = 2.0\ntime_constant = 2.0\n')
    case = balance_case(HEATER, feedback=OPEN_LOOP, measured="[]", events=noise,
                        duration=5000.0, step=0.1)
    design = design_loop(case)
    scenario = build_scenario(case, design)
    result = simulate(plant_batch(case, [], np.zeros((8, 0))), design, scenario)
    tau = 990.0 * 1.2 / 300.0
    spread = np.sqrt(np.mean(result.metrics["cv_std"][:, 0] ** 2))
    assert spread == pytest.approx(2.0 * np.sqrt(2.0 / (2.0 + tau)), rel=0.03)
    np.testing.assert_array_equal(result.metrics["iae"][:, 0], result.metrics["iae"][:, 1])
    assert len(set(result.metrics["iae"][:, 0])) == 8  # every plant its own noise
