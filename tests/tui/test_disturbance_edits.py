"""Adding, removing, renaming disturbances and making them measured or not (pure case edits)."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest
from three_feeds import write_three_feeds

from robustff.case import load_case, parse_case, save_case
from robustff.demo import demo_case_path
from robustff.errors import CaseError
from robustff.tui.disturbance_edits import (
    add_disturbance,
    edit_setting,
    named_form,
    remove_disturbance,
    rename_disturbance,
    set_measured,
    setting_text,
    slug_name,
)


@pytest.fixture
def kettle(tmp_path: Path) -> Path:
    return write_three_feeds(tmp_path)


def test_a_signal_name_becomes_a_disturbance_name() -> None:
    assert slug_name("cold-water flow") == "cold_water_flow"
    assert slug_name("  Feed Temp. (TI-12) ") == "feed_temp_ti_12"
    assert slug_name("2nd feed") == "nd_feed"  # a name starts with a letter
    assert slug_name("gain") == "" and slug_name("--") == ""


def test_the_single_disturbance_converts_with_its_keys_and_events(tmp_path: Path) -> None:
    path = tmp_path / "heater.toml"
    shutil.copy(demo_case_path("wash-water-heater"), path)
    single = load_case(path)
    converted = named_form(single)
    (item,) = converted.case.disturbances
    assert item.name == "cold_water_flow" and item.unit == "m3/h"
    assert item.model == single.disturbance and item.sensor == single.sensor
    keys = {row.key for row in converted.case.uncertainty}
    assert {"disturbance.cold_water_flow.gain", "disturbance.cold_water_flow.sensor.time_constant"
            } <= keys and "disturbance.gain" not in keys and "sensor.time_constant" not in keys
    assert {event.disturbance for event in converted.case.events} == {"cold_water_flow"}
    assert "cold_water_flow" in converted.notes[0]
    assert named_form(converted.case).case == converted.case  # already named: unchanged


def test_adding_to_the_single_form_converts_it_and_adds_a_unique_measured_fopdt(
        tmp_path: Path) -> None:
    path = tmp_path / "heater.toml"
    shutil.copy(demo_case_path("wash-water-heater"), path)
    single = load_case(path)
    added = add_disturbance(single)
    first, second = added.case.disturbances
    assert first.name == "cold_water_flow" and second.name == "disturbance_2"
    assert second.measured and second.model.kind == "fopdt"
    # the new path starts from the first disturbance's dynamics, gain 1
    assert (second.model.gain, second.model.time_constant, second.model.dead_time) == (
        1.0, single.disturbance.time_constant, single.disturbance.dead_time)
    assert len(added.notes) == 2 and "No event moves it" in added.notes[1]
    again = add_disturbance(added.case).case
    assert [item.name for item in again.disturbances][-1] == "disturbance_3"


def test_a_case_without_a_disturbance_name_calls_the_first_disturbance_1() -> None:
    from case_texts import MINIMAL

    converted = named_form(parse_case(MINIMAL))
    assert converted.case.disturbances[0].name == "disturbance_1"


def test_removal_takes_its_events_rows_correlations_and_override_along(kettle: Path) -> None:
    case = load_case(kettle)
    removed = remove_disturbance(case, "feed_temperature")
    assert [item.name for item in removed.case.disturbances] == ["feed_flow", "solids"]
    assert all(event.disturbance != "feed_temperature" for event in removed.case.events)
    assert len(removed.case.events) == 2
    assert not any("feed_temperature" in row.key for row in removed.case.uncertainty)
    assert removed.case.correlations == ()  # it named feed_temperature's lag
    note = removed.notes[0]
    for said in ("event 2", "disturbance.feed_temperature.time_constant", "correlation",
                 "[feedforward.feed_temperature]", "Ctrl+Z"):
        assert said in note, said


def test_removal_is_refused_for_the_last_disturbance_or_the_last_event(kettle: Path) -> None:
    case = load_case(kettle)
    with pytest.raises(CaseError, match="one disturbance"):
        remove_disturbance(load_case(demo_case_path("syrup-dilution")), "disturbance")
    one = remove_disturbance(remove_disturbance(case, "solids").case, "feed_temperature").case
    with pytest.raises(CaseError, match="last disturbance"):
        remove_disturbance(one, "feed_flow")
    text = kettle.read_text()
    only_flow_moves = text.replace('disturbance = "feed_temperature"\nat = 120.0',
                                   'disturbance = "feed_flow"\nat = 120.0').replace(
        'disturbance = "solids"\nat = 200.0', 'disturbance = "feed_flow"\nat = 200.0')
    with pytest.raises(CaseError, match="every event of the case moves it"):
        remove_disturbance(parse_case(only_flow_moves), "feed_flow")
    with pytest.raises(CaseError, match="no disturbance of that name"):
        remove_disturbance(case, "steam")


def test_a_rename_carries_events_keys_correlations_and_the_override(kettle: Path) -> None:
    case = load_case(kettle)
    renamed = rename_disturbance(case, "feed_temperature", "inlet_temp").case
    item = renamed.disturbance_named("inlet_temp")
    assert item.model == case.disturbance_named("feed_temperature").model
    assert renamed.feedforward_of(item).structure == "static"
    assert [event.disturbance for event in renamed.events] == [
        "feed_flow", "inlet_temp", "solids"]
    assert "disturbance.inlet_temp.time_constant" in {row.key for row in renamed.uncertainty}
    assert renamed.correlations[0].first == "disturbance.inlet_temp.time_constant"
    # order kept: the names are the only difference
    assert [i.name for i in renamed.disturbances] == ["feed_flow", "inlet_temp", "solids"]


@pytest.mark.parametrize("name, reason", [
    ("feed_flow", "already has a disturbance"), ("gain", "not a parameter name"),
    ("2x", "starting with a letter"), ("a b", "letters, digits and '_'"), ("", "1 to 40"),
])
def test_a_bad_new_name_is_refused_with_the_reason(kettle: Path, name: str, reason: str) -> None:
    with pytest.raises(CaseError, match=reason):
        rename_disturbance(load_case(kettle), "solids", name)


def test_unmeasured_loses_its_transmitter_rows_and_override(kettle: Path) -> None:
    case = load_case(kettle)
    plain = set_measured(case, "feed_flow", False)
    item = plain.case.disturbance_named("feed_flow")
    assert not item.measured and item.feedforward is None
    assert item.sensor.time_constant == 0.0 and item.sensor.noise_std == 0.0
    assert "disturbance.feed_flow.sensor.time_constant" not in {
        row.key for row in plain.case.uncertainty}
    assert "disturbance.feed_flow.gain" in {row.key for row in plain.case.uncertainty}
    assert "transmitter" in plain.notes[0]
    override = set_measured(case, "feed_temperature", False)
    assert "[feedforward] override" in override.notes[0]
    back = set_measured(plain.case, "feed_flow", True).case.disturbance_named("feed_flow")
    assert back.measured and back.feedforward is None


def test_settings_are_read_and_set_as_text(kettle: Path) -> None:
    case = load_case(kettle)
    assert setting_text(case, "disturbance.solids.measured") == "no"
    assert setting_text(case, "disturbance.feed_flow.unit") == "m3/h"
    edited = edit_setting(case, "disturbance.feed_flow.unit", " t/h ").case
    assert edited.parameter_unit("disturbance.feed_flow.sensor.noise_std") == "t/h"
    assert edit_setting(case, "disturbance.solids.measured", "yes").case.disturbance_named(
        "solids").measured
    with pytest.raises(CaseError, match="yes or no"):
        edit_setting(case, "disturbance.solids.measured", "maybe")


def test_saving_an_edited_case_keeps_its_comments_and_reads_back(kettle: Path,
                                                                tmp_path: Path) -> None:
    case = load_case(kettle)
    original = kettle.read_text()
    edits = [rename_disturbance(case, "feed_temperature", "inlet_temp").case,
             add_disturbance(case).case, remove_disturbance(case, "feed_flow").case,
             set_measured(case, "feed_flow", False).case]
    for number, edited in enumerate(edits):
        out = tmp_path / f"saved-{number}.toml"
        assert save_case(edited, out, original) == []  # no "comments dropped" warning
        text = out.read_text()
        assert "# oil pressure varies" in text and "# nobody measures it" in text
        assert load_case(out) == edited
    renamed = (tmp_path / "saved-0.toml").read_text()
    assert "[disturbance.inlet_temp]   # warmer feed, warmer kettle" in renamed
    assert "[feedforward.inlet_temp]   # the slow one: static is enough" in renamed
