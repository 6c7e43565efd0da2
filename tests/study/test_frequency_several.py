"""Where feedforward helps, for each of several measured disturbances.

Reference: superposition of each disturbance's path and its own feedforward path through the
process, under the one feedback loop: E_ff / E_fb = (Gd_j + Gp Gff_j Gm_j) / Gd_j for
disturbance j alone (Seborg, Edgar and Mellichamp, Process Dynamics and Control, 2nd ed. 2004,
ch. 15, the feedforward-feedback block diagram; from memory). The other disturbances'
compensators do not act on it.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from robustff.case import parse_case
from robustff.design.tuning import design_loop
from robustff.engine import nominal_batch
from robustff.study.frequency import error_ratio, frequency_study, measured_disturbances

TEXT = """
title = "two measured feeds and one unmeasured"
time_unit = "s"
[process]
model = "fopdt"
gain = 0.6
time_constant = 45.0
dead_time = 8.0
[disturbance.flow]
model = "fopdt"
gain = -1.8
time_constant = 30.0
dead_time = 10.0
[disturbance.flow.sensor]
time_constant = 2.0
[disturbance.temperature]
model = "sopdt"
gain = 0.8
time_constant = 45.0
time_constant_2 = 0.0
dead_time = 8.0
[disturbance.solids]
model = "fopdt"
gain = 0.4
time_constant = 20.0
dead_time = 0.0
measured = false
[feedforward]
structure = "lead-lag-delay"
[feedforward.temperature]
structure = "static"
gain_factor = 0.6
[simulation]
duration = 600.0
step = 0.02
[[event]]
kind = "disturbance-step"
disturbance = "flow"
at = 1.0
size = 1.0
"""


def test_each_measured_disturbance_has_its_own_ratio():
    case = parse_case(TEXT)
    design = design_loop(case)
    assert measured_disturbances(case) == [0, 1]
    h = case.simulation.step
    w = np.geomspace(1e-4, 0.1 * math.pi / h, 200)
    s = 1j * w
    flow_ff = design.all_compensators[0]
    flow = case.disturbance_inputs[0]
    gff = (flow_ff.gain * (flow_ff.lead * s + 1) / (flow_ff.lag * s + 1)
           * np.exp(-flow_ff.delay * s))
    analytic = np.abs(1 + case.process.frequency_response(w) * gff
                      / (flow.sensor.time_constant * s + 1) / flow.model.frequency_response(w))
    batch = nominal_batch(case)
    np.testing.assert_allclose(error_ratio(batch, design, h, w, 0)[0], analytic, rtol=0.01)
    # the temperature path has the process's dynamics and no transmitter lag: a static
    # compensator at 0.6 of -Kd/Kp leaves |1 + Kp Kff / Kd| = 0.4 at every frequency
    # (common practice, no source: the shared dynamics cancel)
    temperature = error_ratio(batch, design, h, np.geomspace(1e-4, math.pi / h, 50), 1)[0]
    np.testing.assert_allclose(temperature, 0.4, rtol=1e-6)


def test_the_study_of_each_measured_disturbance_names_it():
    case = parse_case(TEXT)
    design = design_loop(case)
    first = frequency_study(case, design, nominal_batch(case, 4))
    second = frequency_study(case, design, nominal_batch(case, 4), 1)
    assert (first.disturbance, second.disturbance) == ("flow", "temperature")
    assert second.bands["p50"] == pytest.approx(np.full(second.omega.size, 0.4), rel=1e-6)


def test_each_disturbance_is_credited_with_its_strongest_parameter():
    from robustff.study.disturbance_drivers import disturbance_drivers, driver_sentence

    case = parse_case(TEXT)
    ranking = [{"name": "process.gain", "rho": 0.7},
               {"name": "disturbance.flow.gain", "rho": 0.2},
               {"name": "disturbance.solids.gain", "rho": -0.5},
               {"name": "disturbance.flow.sensor.time_constant", "rho": -0.3},
               {"name": "disturbance.solids.time_constant", "rho": 0.1}]
    drivers = disturbance_drivers(case, ranking)
    assert [(d.disturbance, d.key, d.rho) for d in drivers] == [
        ("solids", "disturbance.solids.gain", -0.5),
        ("flow", "disturbance.flow.sensor.time_constant", -0.3),
        ("temperature", None, None)]
    rows = [{"disturbance": d.disturbance, "parameter": d.key, "rho": d.rho} for d in drivers]
    assert driver_sentence(rows).endswith("temperature: none of its parameters is uncertain")
    assert driver_sentence(rows[:1]) is None
