"""The studio edits several disturbances: every one shown at 80x24, renamed, made unmeasured,
added and removed by keys sent in one burst, each edit undone by Ctrl+Z, saved with comments."""

from __future__ import annotations

import asyncio
from pathlib import Path

import pytest

textual = pytest.importorskip("textual")

from studio_pilot import burst, field_input, keys_handled, studio, wait_until  # noqa: E402
from textual.widgets import Button, Select  # noqa: E402
from three_feeds import write_three_feeds  # noqa: E402

from robustff.case import load_case  # noqa: E402
from robustff.tui.messages import field_id  # noqa: E402
from robustff.tui.models_pane import FieldRow  # noqa: E402


def _rows(app: object) -> list[str]:
    return [row.field for row in app.query(FieldRow)]  # type: ignore[attr-defined]


async def _settled(pilot: object, app: object) -> None:
    await keys_handled(pilot, app)  # type: ignore[arg-type]
    await wait_until(pilot, lambda: not [w for w in app.workers  # type: ignore[attr-defined]
                                         if w.group == "rebuild" and not w.is_finished],
                     "panes rebuilt")
    await pilot.pause()  # type: ignore[attr-defined]


def test_every_disturbance_is_shown_with_its_unit_meter_and_state(tmp_path: Path) -> None:
    kettle = write_three_feeds(tmp_path)

    async def scenario() -> None:
        app = studio(kettle, tmp_path / "cache", live=False)
        async with app.run_test(size=(80, 24)) as pilot:
            await pilot.pause()
            rows = _rows(app)
            for name in ("feed_flow", "feed_temperature", "solids"):
                for part in ("name", "unit", "measured", "gain", "time_constant", "dead_time"):
                    assert f"disturbance.{name}.{part}" in rows, (name, part)
            assert "disturbance.feed_flow.sensor.noise_std" in rows
            assert not any(row.startswith("disturbance.solids.sensor") for row in rows)
            assert "disturbance.gain" not in rows  # no unnamed rows that would edit nothing
            hints = " ".join(str(hint.render()) for hint in app.query(".hint"))
            assert "feed_temperature overridden by [feedforward.NAME]" in hints
            seen = set()
            editor = app.query_one("#editor")
            for y in range(0, editor.max_scroll_y + 20, 18):  # page through as a user scrolls
                editor.scroll_to(y=y, animate=False)
                await pilot.pause()
                seen.update(app.screen_text().splitlines())
            text = "\n".join(seen)
            for words in ("feed_flow -> CV (FOPDT)", "solids -> CV (FOPDT)", "meter noise",
                          "not measured: feedback alone", "remove solids...",
                          "add a disturbance (F8)", "gain in degC per m3/h"):
                assert words in text, words
            assert all(len(line) <= 80 for line in seen)

    asyncio.run(scenario())


def test_the_single_disturbance_screen_is_unchanged(case_file: Path, tmp_path: Path) -> None:
    async def scenario() -> None:
        app = studio(case_file, tmp_path / "cache", live=False)
        async with app.run_test(size=(80, 24)) as pilot:
            await pilot.pause()
            rows = _rows(app)
            assert rows[:6] == ["process.gain", "process.time_constant", "process.dead_time",
                                "disturbance.gain", "disturbance.time_constant",
                                "disturbance.dead_time"]
            assert rows[6] == "feedback.form"
            assert not app.query("#add-disturbance") and not app.query(".dremove")

    asyncio.run(scenario())


def test_a_burst_renames_then_edits_the_renamed_disturbance_and_undo_reverts_each(
        tmp_path: Path) -> None:
    kettle = write_three_feeds(tmp_path)

    async def scenario() -> None:
        app = studio(kettle, tmp_path / "cache", live=False)
        original = app.case
        async with app.run_test(size=(80, 24)) as pilot:
            await pilot.pause()
            field_input(app, "disturbance.feed_temperature.name").focus()
            await pilot.pause()
            # Enter renames (the rows are rebuilt under the new name, the focus back on it);
            # the keys behind it reach the new rows
            burst(app, "inlet_temp<enter><tab>K<enter>")
            await _settled(pilot, app)
            item = app.case.disturbance_named("inlet_temp")
            assert item.unit == "K" and item.model == original.disturbance_named(
                "feed_temperature").model
            assert [e.disturbance for e in app.case.events] == ["feed_flow", "inlet_temp",
                                                                "solids"]
            assert app.case.correlations[0].first == "disturbance.inlet_temp.time_constant"
            assert app.query_one(f"#u-{field_id('disturbance.inlet_temp.time_constant')}")
            assert field_input(app, "disturbance.inlet_temp.unit").value == "K"
            hints = [str(hint.render()) for hint in app.query(".hint")]
            assert any("gain in degC per K" in hint for hint in hints), hints  # new unit shown
            burst(app, "<ctrl+z>")
            await _settled(pilot, app)
            assert app.case.disturbance_named("inlet_temp").unit == "degC"
            burst(app, "<ctrl+z>")
            await _settled(pilot, app)
            assert app.case == original
            assert field_input(app, "disturbance.feed_temperature.name").value == (
                "feed_temperature")

    asyncio.run(scenario())


def test_a_refused_name_keeps_the_text_and_says_why(tmp_path: Path) -> None:
    kettle = write_three_feeds(tmp_path)

    async def scenario() -> None:
        app = studio(kettle, tmp_path / "cache", live=False)
        original = app.case
        async with app.run_test(size=(80, 24)) as pilot:
            await pilot.pause()
            field_input(app, "disturbance.solids.name").focus()
            await pilot.pause()
            burst(app, "feed_flow<enter>")
            await _settled(pilot, app)
            assert app.case == original
            row = app.query_one(f"#row-{field_id('disturbance.solids.name')}", FieldRow)
            assert row.has_class("invalid")
            assert "already has a disturbance called 'feed_flow'" in str(
                row.query_one(".error").render())
            assert field_input(app, "disturbance.solids.name").value == "feed_flow"

    asyncio.run(scenario())


def test_unmeasured_drops_the_meter_rows_and_ranges_and_undo_brings_them_back(
        tmp_path: Path) -> None:
    kettle = write_three_feeds(tmp_path)

    async def scenario() -> None:
        app = studio(kettle, tmp_path / "cache", live=False)
        original = app.case
        async with app.run_test(size=(80, 24)) as pilot:
            await pilot.pause()
            measured = app.query_one(f"#in-{field_id('disturbance.feed_flow.measured')}", Select)
            measured.focus()
            await pilot.pause()
            burst(app, "<enter><down><enter>")  # open the list, choose "no"
            await _settled(pilot, app)
            item = app.case.disturbance_named("feed_flow")
            assert not item.measured
            assert "disturbance.feed_flow.sensor.time_constant" not in _rows(app)
            assert not app.query(f"#u-{field_id('disturbance.feed_flow.sensor.time_constant')}")
            assert app.focused is app.query_one(
                f"#in-{field_id('disturbance.feed_flow.measured')}")
            burst(app, "<ctrl+z>")
            await _settled(pilot, app)
            assert app.case == original
            assert "disturbance.feed_flow.sensor.noise_std" in _rows(app)

    asyncio.run(scenario())


def test_f8_converts_the_single_form_adds_one_and_the_burst_sets_its_gain(
        case_file: Path, tmp_path: Path) -> None:
    async def scenario() -> None:
        app = studio(case_file, tmp_path / "cache", live=False)
        original = app.case
        async with app.run_test(size=(80, 24)) as pilot:
            await pilot.pause()
            burst(app, "<f8>0.5<enter>")  # focus lands on the new disturbance's gain
            await _settled(pilot, app)
            first, second = app.case.disturbances
            assert first.name == "cold_water_flow" and second.name == "disturbance_2"
            assert second.model.gain == 0.5
            assert "disturbance.cold_water_flow.gain" in {r.key for r in app.case.uncertainty}
            assert "disturbance.disturbance_2.gain" in _rows(app)
            app.query_one("#remove-disturbance-2", Button).focus()
            await pilot.pause()
            burst(app, "<enter>r")  # the confirmation, then its key
            await _settled(pilot, app)
            assert [item.name for item in app.case.disturbances] == ["cold_water_flow"]
            for expected_gain in (0.5, 1.0):
                burst(app, "<ctrl+z>")
                await _settled(pilot, app)
                assert app.case.disturbance_named("disturbance_2").model.gain == expected_gain
            burst(app, "<ctrl+z>")
            await _settled(pilot, app)
            assert app.case == original and "disturbance.gain" in _rows(app)

    asyncio.run(scenario())


def test_removing_the_last_disturbance_or_its_only_events_is_refused_with_the_reason(
        tmp_path: Path) -> None:
    kettle = write_three_feeds(tmp_path)
    text = kettle.read_text()
    for name in ("feed_temperature", "solids"):  # every event moves feed_flow
        text = text.replace(f'disturbance = "{name}"', 'disturbance = "feed_flow"')
    kettle.write_text(text)

    async def scenario() -> None:
        app = studio(kettle, tmp_path / "cache", live=False)
        original = app.case
        async with app.run_test(size=(80, 24)) as pilot:
            await pilot.pause()
            app.query_one("#remove-feed-flow", Button).focus()
            await pilot.pause()
            burst(app, "<enter>")
            await _settled(pilot, app)
            question = str(app.screen.query_one(".question").render())
            assert "events 1, 2, 3" in question and "Ctrl+Z" in question
            burst(app, "r")
            await _settled(pilot, app)
            assert app.case == original
            shown = [n.message for n in app._notifications]
            assert any("every event of the case moves it" in m for m in shown), shown

    asyncio.run(scenario())


def test_saving_after_studio_edits_keeps_the_comments(tmp_path: Path) -> None:
    kettle = write_three_feeds(tmp_path)

    async def scenario() -> None:
        app = studio(kettle, tmp_path / "cache", live=False)
        async with app.run_test(size=(80, 24)) as pilot:
            await pilot.pause()
            field_input(app, "disturbance.feed_flow.name").focus()
            await pilot.pause()
            burst(app, "inflow<enter>")
            await _settled(pilot, app)
            burst(app, "<f8><ctrl+s>")
            await _settled(pilot, app)
            await wait_until(pilot, lambda: not app.dirty, "saved")
        saved = kettle.read_text()
        assert "[disturbance.inflow]          # more cold feed, colder kettle" in saved
        assert "# oil pressure varies" in saved and "# nobody measures it" in saved
        case = load_case(kettle)
        assert [item.name for item in case.disturbances] == [
            "inflow", "feed_temperature", "solids", "disturbance_4"]

    asyncio.run(scenario())
