"""Studio edits of a case that names its disturbances reach the named disturbance."""

from __future__ import annotations

import pytest

from robustff.case import parse_case
from robustff.errors import CaseError
from robustff.tui.editing import edit_field, field_text, uncertain_candidates

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
[disturbance.flow.sensor]
time_constant = 0.5
[disturbance.solids]
model = "fopdt"
gain = 0.9
time_constant = 12.0
dead_time = 0.0
measured = false
[simulation]
duration = 100.0
step = 0.5
[[event]]
kind = "disturbance-step"
disturbance = "solids"
at = 5.0
size = 2.0
"""


def test_an_edit_of_a_named_disturbance_changes_that_disturbance_only():
    case = parse_case(TEXT)
    edited = edit_field(case, "disturbance.solids.gain", "1.25")
    flow, solids = edited.disturbance_inputs
    assert solids.model.gain == 1.25 and flow.model.gain == -1.5
    assert field_text(edited, "disturbance.solids.gain") == "1.25"
    edited = edit_field(edited, "disturbance.flow.sensor.time_constant", "2")
    assert edited.disturbance_inputs[0].sensor.time_constant == 2.0
    assert edited.sensor.time_constant == 2.0  # the first disturbance's, kept in step


def test_a_refused_edit_of_a_named_disturbance_names_its_key():
    with pytest.raises(CaseError, match="disturbance.flow.time_constant"):
        edit_field(parse_case(TEXT), "disturbance.flow.time_constant", "-3")


def test_the_parameters_offered_for_uncertainty_name_each_disturbance():
    keys = uncertain_candidates(parse_case(TEXT))
    assert "disturbance.flow.sensor.noise_std" in keys and "disturbance.solids.gain" in keys
    assert not any(key.startswith("disturbance.solids.sensor") for key in keys)  # unmeasured
