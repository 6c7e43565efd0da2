"""The design printout (check, run, report) shows units on every value: the feedforward gain in
output units per disturbance unit, the output limits and bias, and times in notes."""

from __future__ import annotations

from robustff.case import load_case
from robustff.demo import demo_case_path
from robustff.design.tuning import design_loop
from robustff.units import per_unit


def test_per_unit_brackets_a_compound_denominator() -> None:
    assert per_unit("%", "m3/h") == "%/(m3/h)"
    assert per_unit("%", "kg*s") == "%/(kg*s)"
    assert per_unit("%", "degC") == "%/degC"


def test_feedforward_gain_limits_bias_and_notes_carry_units() -> None:
    case = load_case(demo_case_path("wash-water-heater"))
    design = design_loop(case)
    lines = design.summary_lines(case)
    out, dist = case.signals.output.unit, case.signals.disturbance.unit
    assert (out, dist) == ("%", "m3/h")
    ff = next(line for line in lines if line.startswith("Feedforward ("))
    assert f"gain = {design.feedforward.gain:.4g} %/(m3/h) " in ff
    limits = next(line for line in lines if "output limits" in line)
    fb = design.feedback
    assert f"{fb.output_low:g} .. {fb.output_high:g} %" in limits
    assert f"bias {fb.output_bias:g} %" in limits
    shortfall = case.process.dead_time - case.disturbance.dead_time
    assert shortfall > 0
    assert any(f"by {shortfall:g} {case.time_unit}:" in line for line in lines)
