"""The loop with a valve: the ideal valve changes nothing, a characteristic obeys final values."""

from __future__ import annotations

import dataclasses
import math
from pathlib import Path

import numpy as np
import pytest

from robustff.case import Case, Event, FeedbackSpec, FeedforwardSpec, SimulationSpec, load_case
from robustff.design.tuning import design_loop
from robustff.engine import build_scenario, nominal_batch, simulate
from robustff.plant.models import TransferModel as Model
from robustff.plant.valve import ValveModel
from robustff.study import run_study

ROOT = Path(__file__).resolve().parents[2]


def test_a_linear_valve_without_stem_effects_gives_the_ideal_actuators_results():
    case = load_case(ROOT / "cases" / "wash-water-heater.toml")
    plain = run_study(case, samples=120, jobs=1, margins=False)
    valved = run_study(dataclasses.replace(case, valve=ValveModel("linear")), samples=120,
                       jobs=1, margins=False)
    for name in plain.metrics:
        np.testing.assert_allclose(valved.metrics[name], plain.metrics[name], rtol=1e-9,
                                   atol=1e-9, err_msg=name)


def test_equal_percentage_valve_obeys_the_pi_final_value():
    # Final-value argument for a static nonlinearity in the loop: with an ideal PI
    # (u = Kc e + I, I accumulating Kc h / Ti e per scan), once the loop has settled e = 0 and
    # the whole output change is integral action, so sum(e h) = (Ti / Kc) du_final. The
    # output change that cancels a disturbance step D follows from the process input it needs,
    # w = -Kd D / Kp, through the inverse characteristic: the valve gives
    # w = span (R^((x - x0)/100) - 1) / ln R (the process gain holds at the bias x0), so
    # x - x0 = 100 ln(1 + w ln R / span) / ln R and du = span (x - x0) / 100.
    # Characteristic: ANSI/ISA-75.11.01 (inherent equal percentage, f = R^(x - 1)).
    kp, kd, size, r, span = 1.0, 1.0, 8.0, 30.0, 100.0
    kc, ti = 1.5, 15.0
    feedback = FeedbackSpec(tuning="manual", kc=kc, ti=ti, output_low=0.0, output_high=span,
                            output_bias=40.0)
    case = Case("valve", "s", Model("fopdt", kp, 10.0, 0.0, 1.0),
                Model("fopdt", kd, 8.0, 0.0, 1.0), feedback, FeedforwardSpec("none"),
                SimulationSpec(400.0, 0.5), (Event("disturbance-step", 5.0, size),),
                valve=ValveModel("equal-percentage", rangeability=r))
    design = design_loop(case)
    result = simulate(nominal_batch(case), design, build_scenario(case, design, 0.01),
                      keep=np.array([0]))
    w = -kd * size / kp
    du = span * (math.log(1.0 + w * math.log(r) / span) / math.log(r))
    assert result.trajectories[0, 2, -1] == pytest.approx(du, rel=1e-6)
    assert result.metrics["ie"][0, 0] == pytest.approx(ti / kc * du, rel=1e-6)
    # A linear valve would need du = w: the characteristic is what moved the output.
    assert abs(du - w) > 0.2
