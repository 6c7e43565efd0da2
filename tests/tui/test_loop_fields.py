"""The edits behind the studio's controller-form, secondary-loop and installed-table rows
(no Textual): the controller stays the same when only its writing changes."""

from __future__ import annotations

from dataclasses import replace

import pytest
from case_texts import MINIMAL

from robustff.case import parse_case
from robustff.design.tuning import design_loop
from robustff.errors import CaseError
from robustff.tui.editing import edit_field, field_text
from robustff.tui.loop_fields import feedback_fields, secondary_fields

PID = MINIMAL + """
[feedback]
form = "pid"
tuning = "manual"
kc = 4.0
ti = 8.0
td = 1.5
"""


def test_a_structure_change_rewrites_the_manual_settings_in_the_new_form():
    # Series to ideal (Astrom and Hagglund, Advanced PID Control, ISA 2006, section 3.4;
    # from memory): series (3, 6, 2) is ideal (4, 8, 1.5), so the ideal (4, 8, 1.5) is
    # written as the series (3, 6, 2); parallel: kp = Kc, ki = Kc/Ti, kd = Kc Td.
    case = parse_case(PID, source="test")
    series = edit_field(case, "feedback.structure", "series").feedback
    assert (series.kc, series.ti, series.td) == pytest.approx((3.0, 6.0, 2.0))
    parallel = edit_field(case, "feedback.structure", "parallel").feedback
    assert (parallel.kc, parallel.ki, parallel.kd) == pytest.approx((4.0, 0.5, 6.0))
    assert parallel.ti is None and parallel.td is None
    for changed in (series, parallel):
        design = design_loop(replace(case, feedback=changed)).feedback
        assert (design.kc, design.ti, design.td) == pytest.approx((4.0, 8.0, 1.5))


def test_the_rows_follow_form_and_structure():
    case = parse_case(PID, source="test")
    assert "feedback.td" in feedback_fields(case) and "feedback.ki" not in feedback_fields(case)
    parallel = edit_field(case, "feedback.structure", "parallel")
    assert {"feedback.ki", "feedback.kd"} <= set(feedback_fields(parallel))
    assert "feedback.ti" not in feedback_fields(parallel)
    assert "feedback.td" not in feedback_fields(parse_case(MINIMAL, source="test"))


def test_one_spelling_of_a_setting_replaces_the_other():
    case = parse_case(PID + '\n[signals.controlled]\nname = "t"\nrange = [0.0, 50.0]\n',
                      source="test")
    banded = edit_field(case, "feedback.proportional_band", "25")
    assert banded.feedback.kc is None and banded.feedback.proportional_band == 25.0
    # PB = 100 / Kc%, Kc% = Kc span_cv / span_out: Kc = (100 / 25) x 100 / 50 = 8
    assert design_loop(banded).feedback.kc == pytest.approx(8.0)
    again = edit_field(banded, "feedback.kc", "4")
    assert again.feedback.proportional_band is None and again.feedback.kc == 4.0
    timed = edit_field(case, "feedback.repeats", "0.25")
    assert timed.feedback.ti is None
    with pytest.raises(CaseError, match="must be a number"):
        edit_field(case, "feedback.repeats", "often")


def test_back_to_a_rule_drops_the_manual_settings():
    case = parse_case(PID, source="test")
    ruled = edit_field(case, "feedback.tuning", "simc")
    assert ruled.feedback.kc is None and ruled.feedback.td is None


SECONDARY = MINIMAL.replace("step = 0.5", "step = 0.5\nsubsteps = 4") + """
[secondary]            # the flow loop
model = "fopdt"
gain = 8.0             # flow per %
time_constant = 2.0
dead_time = 0.2
"""


def test_secondary_fields_and_their_edits():
    case = parse_case(SECONDARY, source="test")
    assert secondary_fields(case) == (
        "secondary.gain", "secondary.time_constant", "secondary.dead_time",
        "secondary.tuning", "secondary.closed_loop_time", "secondary.kc", "secondary.ti",
        "secondary.scans_per_primary")
    assert field_text(case, "secondary.gain") == "8" and field_text(case, "secondary.kc") == ""
    manual = edit_field(case, "secondary.tuning", "manual")
    # SIMC (Skogestad, J. Process Control 13 (2003) 291-309): Kc = tau/(K (tau_c + theta)),
    # Ti = min(tau, 4 (tau_c + theta)), tau_c = theta
    assert manual.secondary.kc == pytest.approx(2.0 / (8.0 * 0.4))
    assert manual.secondary.ti == pytest.approx(1.6)
    assert edit_field(manual, "secondary.tuning", "simc").secondary.kc is None
    assert edit_field(case, "secondary.scans_per_primary", "2").secondary.scans_per_primary == 2
    with pytest.raises(CaseError, match="must divide"):
        edit_field(case, "secondary.scans_per_primary", "3")
    with pytest.raises(CaseError, match="secondary.gain"):
        edit_field(case, "secondary.gain", "0")
    with pytest.raises(CaseError, match="no secondary loop"):
        edit_field(parse_case(MINIMAL, source="test"), "secondary.gain", "1")


def test_the_installed_table_round_trips_as_text():
    case = parse_case(MINIMAL, source="test")
    valved = edit_field(case, "valve.installed", "0:0, 40:0.15; 100:1")
    assert valved.valve.characteristic == "installed"
    assert field_text(valved, "valve.installed") == "0:0, 40:0.15, 100:1"
    assert field_text(valved, "valve.characteristic") == "installed"
    with pytest.raises(CaseError, match="needs its table"):
        edit_field(valved, "valve.installed", "")
    assert edit_field(case, "valve.installed", "").valve is None  # blank: nothing to do
