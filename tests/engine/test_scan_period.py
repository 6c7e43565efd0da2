"""The controller runs at its scan period; the plant between scans is continuous.

Reference: an independent continuous-time simulation of the same loop. The plant is FOPDT, the
controller output is held between scans, so the CV is an exact superposition of delayed
first-order step responses, one per output change, plus the disturbance's own step response
(superposition for linear systems; e.g. Seborg, Edgar, Mellichamp and Doyle, "Process Dynamics
and Control", 4th ed., 2016, ch. 5). The same digital PI (ideal form, integral by the
backward rectangle rule, as the simulator documents) reads the CV at each scan. IAE is the
integral of |e| evaluated by dense quadrature.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from robustff.case import Case, Event, FeedbackSpec, FeedforwardSpec, SimulationSpec, parse_case
from robustff.design.tuning import design_loop
from robustff.engine import build_scenario, nominal_batch, simulate
from robustff.errors import CaseError
from robustff.plant.models import SensorModel
from robustff.plant.models import TransferModel as Model

KP, TAU_P, THETA_P = 1.0, 20.0, 2.3
KD, TAU_D, THETA_D = 1.0, 10.0, 1.7
KC, TI = 2.0, 20.0
SCAN, T_EVENT, SIZE, DURATION = 1.0, 10.3, 1.0, 150.0


def _case(substeps: int, events=None, sensor: SensorModel | None = None) -> Case:
    feedback = FeedbackSpec(tuning="manual", kc=KC, ti=TI, output_low=-1e6, output_high=1e6,
                            output_bias=0.0)
    return Case("scan", "s", Model("fopdt", KP, TAU_P, 0.0, THETA_P),
                Model("fopdt", KD, TAU_D, 0.0, THETA_D), feedback, FeedforwardSpec("none"),
                SimulationSpec(DURATION, SCAN, substeps),
                tuple(events or [Event("disturbance-step", T_EVENT, SIZE)]),
                sensor=sensor or SensorModel())


def _first_order_step(t: np.ndarray, start: float, gain: float, tau: float) -> np.ndarray:
    elapsed = np.maximum(t - start, 0.0)
    return gain * (1.0 - np.exp(-elapsed / tau))


def _continuous_reference_iae(points_per_scan: int = 400) -> float:
    n = int(round(DURATION / SCAN))
    outputs, integral = np.zeros(n), 0.0

    def cv(t: np.ndarray) -> np.ndarray:
        y = _first_order_step(t, T_EVENT + THETA_D, KD * SIZE, TAU_D)
        changes = np.diff(outputs, prepend=0.0)
        for k in np.nonzero(changes)[0]:
            y = y + _first_order_step(t, k * SCAN + THETA_P, KP * changes[k], TAU_P)
        return y

    for k in range(n):
        # The output written at scan k only acts after the dead time, so cv(k h) does not
        # depend on it (THETA_P > 0).
        e = -float(cv(np.array([k * SCAN]))[0])
        outputs[k] = KC * e + integral
        integral += KC * SCAN / TI * e
    t = np.linspace(0.0, DURATION, n * points_per_scan + 1)
    e = np.abs(cv(t))
    return float(np.sum((e[1:] + e[:-1]) / 2.0) * (t[1] - t[0]))


def _iae(substeps: int) -> float:
    case = _case(substeps)
    design = design_loop(case)
    result = simulate(nominal_batch(case), design, build_scenario(case, design))
    return float(result.metrics["iae"][0, 0])


def test_refining_the_internal_step_converges_to_the_continuous_loop():
    reference = _continuous_reference_iae()
    errors = [abs(_iae(s) - reference) / reference for s in (1, 4, 32)]
    assert errors[2] < 0.01, errors
    assert errors[2] < errors[1] < errors[0], errors


def test_results_at_the_scans_do_not_depend_on_the_internal_step():
    # The plant is stepped exactly with the output held, so what the controller reads at a
    # scan, and hence the valve travel, changes only when an event falls between internal
    # steps: with the event on a scan and transmitter noise plus filtered disturbance noise,
    # refining the internal step leaves the noise (drawn once per scan) and the controller's
    # moves as they were.
    events = [Event("disturbance-step", 10.0, SIZE),
              Event("disturbance-noise", 20.0, 0.3, time_constant=15.0)]
    sensor = SensorModel(time_constant=2.0, noise_std=0.05)
    travel = []
    for substeps in (1, 8):
        case = _case(substeps, events, sensor)
        design = design_loop(case)
        scenario = build_scenario(case, design, settling_band=0.01)
        result = simulate(nominal_batch(case, 20), design, scenario,
                          seeds=np.arange(20, dtype=np.uint64), keep=np.arange(3))
        travel.append(result.metrics["valve_travel"][:, 0])
        if substeps == 1:
            outputs = result.trajectories[:, 2]
        else:
            np.testing.assert_allclose(result.trajectories[:, 2], outputs, rtol=1e-9,
                                       atol=1e-12)
    np.testing.assert_allclose(travel[1], travel[0], rtol=1e-9)


def test_substeps_are_read_and_limited():
    base = '''
title = "t"
time_unit = "s"
[process]
model = "fopdt"
gain = 1.0
time_constant = 10.0
dead_time = 1.0
[disturbance]
model = "fopdt"
gain = 1.0
time_constant = 5.0
dead_time = 1.0
[simulation]
duration = 100.0
step = 0.5
SUBSTEPS
[[event]]
kind = "disturbance-step"
at = 5.0
size = 1.0
'''
    assert parse_case(base.replace("SUBSTEPS", "")).simulation.substeps == 1
    case = parse_case(base.replace("SUBSTEPS", "substeps = 4"))
    assert case.simulation.substeps == 4 and math.isclose(case.simulation.internal_step, 0.125)
    for bad in ("substeps = 0", "substeps = 2.5", "substeps = 1000"):
        with pytest.raises(CaseError, match="simulation.substeps"):
            parse_case(base.replace("SUBSTEPS", bad).replace("step = 0.5", "step = 0.001"))
