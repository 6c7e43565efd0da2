"""Reading ``[disturbance.NAME]`` tables, their transmitters, overrides and events."""

from __future__ import annotations

import pytest

from robustff.case import parse_case
from robustff.errors import CaseError

HEAD = """
title = "two feeds"
time_unit = "min"
[process]
model = "fopdt"
gain = 2.0
time_constant = 8.0
dead_time = 1.0
[simulation]
duration = 100.0
step = 0.5
"""

FEEDS = """
[disturbance.flow]
model = "fopdt"
gain = -1.5
time_constant = 6.0
dead_time = 2.0
unit = "m3/h"
[disturbance.flow.sensor]
time_constant = 0.5
noise_std = 0.02
[disturbance.solids]
model = "fopdt"
gain = 0.9
time_constant = 12.0
dead_time = 0.0
measured = false
"""

EVENT = """
[[event]]
kind = "disturbance-step"
disturbance = "flow"
at = 5.0
size = 2.0
"""


def _problems(text: str) -> str:
    with pytest.raises(CaseError) as caught:
        parse_case(text)
    return str(caught.value)


def test_named_disturbances_are_read_in_file_order_with_their_transmitters():
    case = parse_case(HEAD + FEEDS + EVENT + '[feedforward]\nstructure = "static"\n')
    flow, solids = case.disturbance_inputs
    assert (flow.name, flow.measured, flow.unit) == ("flow", True, "m3/h")
    assert (flow.sensor.time_constant, flow.sensor.noise_std) == (0.5, 0.02)
    assert (solids.name, solids.measured) == ("solids", False)
    assert case.disturbance == flow.model and case.sensor == flow.sensor
    assert case.events[0].disturbance == "flow"
    assert case.parameter_unit("disturbance.flow.gain") == "CV unit per m3/h"
    assert case.parameter_unit("disturbance.flow.sensor.noise_std") == "m3/h"
    assert case.nominal_value("disturbance.solids.time_constant") == 12.0


def test_a_feedforward_override_applies_to_its_disturbance_only():
    case = parse_case(HEAD + FEEDS.replace("measured = false", "") + EVENT
                      + '[feedforward]\nstructure = "lead-lag"\n'
                      + '[feedforward.solids]\nstructure = "static"\ngain_factor = 0.5\n')
    flow, solids = case.disturbance_inputs
    assert case.feedforward_of(flow).structure == "lead-lag"
    assert case.feedforward_of(solids).structure == "static"
    assert case.feedforward_of(solids).gain_factor == 0.5


@pytest.mark.parametrize("change, expected", [
    (lambda t: t.replace('disturbance = "flow"\n', ""),
     "event[1].disturbance: missing: name the disturbance it moves (one of flow, solids)"),
    (lambda t: t.replace('disturbance = "flow"\n', 'disturbance = "flwo"\n'),
     "event[1].disturbance: no disturbance of that name (the case has flow, solids)"),
    (lambda t: t + "[sensor]\ntime_constant = 1.0\n",
     "sensor: with named disturbances give each its transmitter"),
    (lambda t: t + '[feedforward.solids]\nstructure = "static"\n',
     "feedforward.solids: the disturbance is not measured"),
    (lambda t: t.replace("[disturbance.solids]", "[disturbance.gain]"),
     "disturbance.gain: a disturbance name is 1 to 40"),
    (lambda t: t + '[uncertainty]\n"disturbance.gain" = { relative = 0.2 }\n',
     "uncertainty.disturbance.gain: no such disturbance parameter; the case names its "
     "disturbances"),
    (lambda t: t + '[uncertainty]\n"disturbance.flow.sensor.lag" = { relative = 0.2 }\n',
     "the sensor has no parameter 'lag'"),
    (lambda t: t + '[uncertainty]\n"disturbance.flow.dead_time" = { uniform = [-1.0, 2.0] }\n',
     "a dead time cannot be negative"),
    (lambda t: t.replace("measured = false", "measured = false\n[disturbance.solids.sensor]\n"
                         "time_constant = 1.0"),
     "disturbance.solids.sensor: the disturbance is not measured"),
])
def test_mistakes_in_named_disturbances_are_explained(change, expected):
    assert expected in _problems(change(HEAD + FEEDS + EVENT))


def test_nested_uncertainty_tables_reach_a_named_transmitter():
    case = parse_case(HEAD + FEEDS + EVENT + "[uncertainty.disturbance.flow.sensor]\n"
                      "noise_std = { uniform = [0.01, 0.05] }\n"
                      "[uncertainty.disturbance.solids]\ngain = { relative = 0.3 }\n")
    assert [p.key for p in case.uncertainty] == ["disturbance.flow.sensor.noise_std",
                                                 "disturbance.solids.gain"]


def test_a_single_disturbance_case_refuses_an_event_naming_one():
    single = HEAD + """
[disturbance]
model = "fopdt"
gain = 1.0
time_constant = 5.0
dead_time = 1.0
""" + EVENT
    assert "name disturbances as [disturbance.NAME] tables" in _problems(single)


def test_named_disturbances_survive_saving_with_the_comments_kept():
    from dataclasses import replace

    from robustff.case import case_to_toml

    text = ("# the tank's three feeds\n" + HEAD + FEEDS + EVENT
            + '[feedforward]\nstructure = "lead-lag"\n[feedforward.flow]\ngain_factor = 0.6\n')
    case = parse_case(text)
    assert case_to_toml(case, text) == text  # nothing changed: the file is left as it was
    changed = replace(case, title="two feeds, retuned")
    merged = case_to_toml(changed, text)
    assert "# the tank's three feeds" in merged and parse_case(merged) == changed
    assert parse_case(case_to_toml(changed)) == changed  # the canonical form reads back too


def test_the_named_disturbance_example_of_the_format_document_is_valid():
    # docs/case-format.md shows the named form in a ~~~toml block (the ```toml blocks build one
    # single-disturbance case in another test)
    import re
    from pathlib import Path

    doc = Path(__file__).resolve().parents[2] / "docs" / "case-format.md"
    blocks = re.findall(r"~~~toml\n(.*?)~~~", doc.read_text(encoding="utf-8"), flags=re.S)
    assert blocks
    event = EVENT.replace('"flow"', '"feed_flow"')
    case = parse_case(HEAD + blocks[0] + event)
    assert [item.name for item in case.disturbance_inputs] == ["feed_flow", "steam_pressure"]
    assert not case.disturbance_inputs[1].measured
