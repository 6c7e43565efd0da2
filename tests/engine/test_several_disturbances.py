"""Several disturbances, measured and unmeasured, against analytic results.

The disturbance paths and the feedforward compensators are linear and add at the CV and at the
controller output, so every result here follows from superposition and the final-value theorem.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest

from robustff.case import parse_case
from robustff.case.sampling import plant_batch, sample
from robustff.design.tuning import design_loop
from robustff.engine import build_scenario, nominal_batch, simulate

THREE = """
title = "Three feeds into one tank (test)"
time_unit = "min"

[process]
model = "fopdt"
gain = 2.0
time_constant = 8.0
dead_time = 1.0

[disturbance.feed_flow]
model = "fopdt"
gain = -1.5
time_constant = 6.0
dead_time = 2.0
unit = "m3/h"

[disturbance.feed_temp]
model = "sopdt"
gain = 0.6
time_constant = 9.0
time_constant_2 = 3.0
dead_time = 1.5
unit = "degC"
[disturbance.feed_temp.sensor]
time_constant = 0.5

[disturbance.upstream_solids]
model = "fopdt"
gain = 0.9
time_constant = 12.0
dead_time = 0.0
unit = "%"
measured = false

[feedback]
form = "pi"
tuning = "simc"
output_low = -1000.0
output_high = 1000.0
output_bias = 0.0

[feedforward]
structure = "lead-lag-delay"

[feedforward.feed_temp]
structure = "static"
gain_factor = 0.7

[simulation]
duration = 900.0
step = 0.25

[[event]]
kind = "disturbance-step"
disturbance = "feed_flow"
at = 5.0
size = 2.0

[[event]]
kind = "disturbance-step"
disturbance = "feed_temp"
at = 80.0
size = -3.0

[[event]]
kind = "disturbance-step"
disturbance = "upstream_solids"
at = 160.0
size = 1.5

[uncertainty]
"process.gain" = { uniform = [1.5, 2.6] }
"process.time_constant" = { relative = 0.3 }
"disturbance.feed_flow.gain" = { relative = 0.4 }
"disturbance.feed_temp.gain" = { uniform = [0.2, 1.0] }
"disturbance.feed_temp.time_constant" = { relative = 0.3 }
"disturbance.upstream_solids.gain" = { relative = 0.5 }
"disturbance.upstream_solids.time_constant" = { relative = 0.5 }

[study]
samples = 40
"""


def _study(text: str = THREE):
    case = parse_case(text)
    design = design_loop(case)
    values, names = sample(case, 40, seed=7)
    batch = plant_batch(case, names, values)
    return case, design, batch, build_scenario(case, design)


def test_the_integral_of_error_is_the_sum_of_each_disturbances_final_value_term():
    # Final-value theorem for a PI loop (e = r - y): a load that needs a change du of the
    # controller's output at steady state gives IE = du Ti / Kc (Astrom and Hagglund, Advanced
    # PID Control, ISA 2006, the integral-of-error relation for PI control; from memory). A step
    # d_j through a path of gain Kd_j, with a feedforward of static gain Kff_j, needs
    # du_j = -(Kd_j + Kp Kff_j) d_j / Kp, and linear loads add: IE = -sum_j (Kd_j + Kp Kff_j)
    # d_j Ti / (Kp Kc), with Kff_j = 0 for the unmeasured disturbance (and in the feedback arm).
    case, design, batch, scenario = _study()
    result = simulate(batch, design, scenario)
    fb = design.feedback
    kp = batch.values["process.gain"]
    sizes = {"feed_flow": 2.0, "feed_temp": -3.0, "upstream_solids": 1.5}
    compensators = dict(zip([item.name for item in case.disturbance_inputs],
                            design.all_compensators, strict=True))
    assert compensators["upstream_solids"].structure == "none"
    assert compensators["feed_temp"].structure == "static"
    fb_ie = np.zeros(batch.size)
    ff_ie = np.zeros(batch.size)
    for name, size in sizes.items():
        kd = batch.values[f"disturbance.{name}.gain"]
        kff = compensators[name].gain if compensators[name].active else 0.0
        fb_ie += -kd * size * fb.ti / (kp * fb.kc)
        ff_ie += -(kd + kp * kff) * size * fb.ti / (kp * fb.kc)
    np.testing.assert_allclose(result.metrics["ie"][:, 0], fb_ie, rtol=1e-6)
    np.testing.assert_allclose(result.metrics["ie"][:, 1], ff_ie, rtol=1e-6)


def test_each_measured_disturbance_gets_its_own_compensator_from_its_own_path():
    # -Gd/Gp per path (Seborg, Edgar and Mellichamp, Process Dynamics and Control, 2nd ed.
    # 2004, feedforward design from the ideal compensator, from memory): gain -Kd_j/Kp, lead
    # the process lag, lag the path's lag, delay theta_d - theta_p.
    case, design, _, _ = _study()
    flow, temp, solids = design.all_compensators
    assert flow.gain == pytest.approx(1.5 / 2.0)
    assert (flow.lead, flow.lag, flow.delay) == pytest.approx((8.0, 6.0, 1.0))
    assert temp.gain == pytest.approx(-0.6 / 2.0 * 0.7)
    assert not solids.active
    assert design.feedforward == flow  # the headline: the first measured disturbance's


def test_a_sum_of_single_disturbance_runs_equals_the_run_with_all_of_them():
    # Superposition with the output limits far away: the CV of the three-disturbance run is the
    # sum of the three runs in which one disturbance moves, so its integral of error is too
    # (the IAE is not, which is why the check is on IE and the envelope of the CV).
    case, design, batch, scenario = _study()
    whole = simulate(batch, design, scenario, keep=np.arange(3))
    parts = []
    for name in ("feed_flow", "feed_temp", "upstream_solids"):
        single = replace(case, events=tuple(e for e in case.events if e.disturbance == name))
        scenario_one = build_scenario(single, design, settling_band=scenario.settling_band)
        parts.append(simulate(batch, design, scenario_one, keep=np.arange(3)))
    summed = sum(part.trajectories for part in parts)
    np.testing.assert_allclose(whole.trajectories, summed, rtol=1e-9, atol=1e-9)


def test_an_unmeasured_disturbance_gives_the_same_cv_in_both_arms():
    # No transmitter, no feedforward: feedback handles it alone, so both arms are identical.
    text = THREE.replace('disturbance = "feed_flow"\nat = 5.0\nsize = 2.0',
                         'disturbance = "upstream_solids"\nat = 5.0\nsize = 2.0')
    case = parse_case(text)
    case = replace(case, events=tuple(e for e in case.events
                                      if e.disturbance == "upstream_solids"))
    design = design_loop(case)
    result = simulate(nominal_batch(case, 2), design, build_scenario(case, design),
                      keep=np.arange(2))
    np.testing.assert_array_equal(result.trajectories[:, 0], result.trajectories[:, 1])


def test_the_single_disturbance_table_and_one_named_disturbance_give_identical_results():
    # The named form with one disturbance is the same plant: bit-identical results, noise too.
    single = """
title = "one feed"
time_unit = "s"
[process]
model = "fopdt"
gain = 1.2
time_constant = 30.0
dead_time = 3.0
[disturbance]
model = "fopdt"
gain = 0.8
time_constant = 20.0
dead_time = 5.0
[sensor]
time_constant = 2.0
noise_std = 0.05
[feedforward]
structure = "lead-lag-delay"
[simulation]
duration = 300.0
step = 0.5
[[event]]
kind = "disturbance-step"
at = 10.0
size = 1.0
[[event]]
kind = "disturbance-noise"
at = 0.0
size = 0.3
time_constant = 15.0
[uncertainty]
"disturbance.gain" = { relative = 0.3 }
"sensor.noise_std" = { uniform = [0.01, 0.1] }
"""
    named = (single.replace("[disturbance]", "[disturbance.inlet]")
             .replace("[sensor]", "[disturbance.inlet.sensor]")
             .replace('"disturbance.gain"', '"disturbance.inlet.gain"')
             .replace('"sensor.noise_std"', '"disturbance.inlet.sensor.noise_std"'))
    results = []
    for text in (single, named):
        case = parse_case(text)
        design = design_loop(case)
        values, names = sample(case, 20, seed=3)
        batch = plant_batch(case, names, values)
        results.append(simulate(batch, design, build_scenario(case, design)))
    for key in results[0].metrics:
        np.testing.assert_array_equal(results[0].metrics[key], results[1].metrics[key])
