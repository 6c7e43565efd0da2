"""Tuning a case with several disturbances tunes the headline disturbance's compensator only."""

from __future__ import annotations

from dataclasses import replace
from types import SimpleNamespace

import numpy as np

from robustff.case import parse_case
from robustff.cli.tune_command import robust_case
from robustff.design.tuning import design_loop
from robustff.engine import build_scenario, nominal_batch, simulate

TEXT = """
title = "two feeds"
time_unit = "min"
[process]
model = "fopdt"
gain = 2.0
time_constant = 8.0
dead_time = 1.0
[disturbance.flow]
model = "fopdt"
gain = -1.5
time_constant = 6.0
dead_time = 2.0
[disturbance.temp]
model = "fopdt"
gain = 0.5
time_constant = 10.0
dead_time = 3.0
[feedforward]
structure = "lead-lag-delay"
[feedforward.temp]
gain_factor = 0.5
[simulation]
duration = 200.0
step = 0.5
[[event]]
kind = "disturbance-step"
disturbance = "flow"
at = 5.0
size = 2.0
[[event]]
kind = "disturbance-step"
disturbance = "temp"
at = 60.0
size = 1.0
"""


def test_the_tuned_settings_reach_the_headline_compensator_in_the_simulation():
    case = parse_case(TEXT)
    design = design_loop(case)
    scenario = build_scenario(case, design)
    batch = nominal_batch(case)
    detuned = replace(design.feedforward, gain=0.0)  # flow's compensator switched off
    before = simulate(batch, design, scenario).metrics["iae"][0]
    after = simulate(batch, design.with_headline(detuned, case), scenario).metrics["iae"][0]
    assert after[0] == before[0]  # the feedback arm does not change
    assert after[1] > 2.0 * before[1]  # without flow's feedforward its step goes through
    kept = design.with_headline(detuned, case).all_compensators[1]
    assert kept == design.all_compensators[1]  # temp's compensator is kept


def test_a_tuned_case_writes_the_headline_override_and_keeps_the_other():
    case = parse_case(TEXT)
    chosen = replace(design_loop(case).feedforward, gain_factor=0.9, lead=7.0)
    result = SimpleNamespace(recommended_settings=chosen,
                             space=SimpleNamespace(names=("gain_factor", "lead")))
    tuned = robust_case(case, result)
    flow, temp = tuned.disturbance_inputs
    assert (tuned.feedforward_of(flow).gain_factor, tuned.feedforward_of(flow).lead) == (0.9, 7.0)
    assert tuned.feedforward_of(temp).gain_factor == 0.5 and tuned.feedforward.lead is None
    assert np.isclose(design_loop(tuned).feedforward.gain_factor, 0.9)
