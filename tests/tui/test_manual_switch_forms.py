"""Switching a case to manual tuning in the studio keeps the controller, whatever its form."""

from __future__ import annotations

import pytest

from robustff.case import parse_case
from robustff.design.tuning import design_loop
from robustff.tui.editing import edit_field

CASE = """
title = "forms"
time_unit = "s"

[process]
model = "sopdt"
gain = 2.0
time_constant = 20.0
time_constant_2 = 5.0
dead_time = 2.0

[disturbance]
model = "fopdt"
gain = 1.0
time_constant = 10.0
dead_time = 1.0

[feedback]
form = "pid"
tuning = "simc"
structure = "STRUCTURE"
output_low = -100.0
output_high = 100.0
output_bias = 0.0

[simulation]
duration = 200.0
step = 0.5

[[event]]
kind = "disturbance-step"
at = 5.0
size = 1.0
"""


@pytest.mark.parametrize("structure", ["ideal", "series", "parallel"])
def test_the_manual_settings_describe_the_rules_controller(structure):
    # The rule's controller, in ideal form, is what the simulator runs; after the switch the
    # manual settings, written in the case's structure, must give the same ideal controller
    # (series and parallel conversions: Astrom and Hagglund, "Advanced PID Control", ISA 2006,
    # section 3.4).
    case = parse_case(CASE.replace("STRUCTURE", structure))
    rule = design_loop(case).feedback
    manual = edit_field(case, "feedback.tuning", "manual")
    assert manual.feedback.tuning == "manual" and manual.feedback.structure == structure
    got = design_loop(manual).feedback
    assert (got.kc, got.ti, got.td) == pytest.approx((rule.kc, rule.ti, rule.td), rel=1e-9)
