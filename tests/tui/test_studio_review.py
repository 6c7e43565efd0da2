"""The studio shows the case review next to what it concerns, and keeps the design summary.

Outside check: a nominal dead time of 20 s against the range ``triangular 6 .. 12 s`` is outside
that range by the definition of a triangular distribution's support [low, high] (Source: Evans,
Hastings and Peacock, Statistical Distributions, 3rd edition, 2000, chapter 40, triangular
distribution).
"""

from __future__ import annotations

import asyncio
from pathlib import Path

import pytest

from robustff.demo import demo_case_path

textual = pytest.importorskip("textual")

from studio_pilot import burst, keys_handled, studio, wait_until  # noqa: E402
from textual.widgets import Button, Input, Static  # noqa: E402

from robustff.tui.dialogs import ChoiceScreen  # noqa: E402
from robustff.tui.messages import field_id  # noqa: E402


def _text(widget: Static) -> str:
    return str(widget.render()) if widget.display else ""


def _field_warning(app, name: str) -> str:
    row = app.query_one(f"#row-{field_id(name)}")
    return _text(row.query_one(".warning", Static))


def _range_warning(app, key: str) -> tuple[str, bool]:
    """The warning under an uncertainty row and whether its fix button is shown."""
    row = app.query_one(f"#u-{field_id(key)}")
    line = row.query_one(".uwarn-line")
    text = str(row.query_one(".uwarn", Static).render()) if line.display else ""
    return text, line.display and row.query_one(".ufix", Button).display


def test_a_nominal_outside_its_range_is_flagged_until_the_range_is_fixed(
        case_file: Path, tmp_path: Path) -> None:
    async def scenario() -> None:
        app = studio(case_file, tmp_path / "cache", live=False)
        async with app.run_test(size=(100, 40)) as pilot:
            await pilot.pause()
            assert _field_warning(app, "process.dead_time") == ""
            assert _range_warning(app, "process.dead_time") == ("", False)
            app.query_one(f"#in-{field_id('process.dead_time')}", Input).focus()
            await pilot.pause()
            burst(app, "20<enter>")
            await keys_handled(pilot, app)
            assert app.case.process.dead_time == 20.0  # accepted: the case still loads
            note = _field_warning(app, "process.dead_time")
            assert "outside its uncertainty range 6 .. 12 s" in note
            text, fixable = _range_warning(app, "process.dead_time")
            assert "nominal value 20 s lies outside" in text and fixable
            # persistent: another edit does not clear it
            app.query_one(f"#in-{field_id('process.gain')}", Input).focus()
            await pilot.pause()
            burst(app, "0.65<enter>")
            await keys_handled(pilot, app)
            assert app.case.process.gain == 0.65
            assert "outside its uncertainty range" in _field_warning(app, "process.dead_time")
            row = app.query_one(f"#u-{field_id('process.dead_time')}")
            row.query_one(".ufix", Button).press()
            await pilot.pause()
            assert isinstance(app.screen, ChoiceScreen) and "20 s" in app.screen.question
            await pilot.press("w")
            await pilot.pause()
            distribution = next(r.distribution for r in app.case.uncertainty
                                if r.key == "process.dead_time")
            assert distribution.kind == "triangular" and distribution.params == (6.0, 8.0, 20.0)
            assert row.query_one(".uparams", Input).value == "6, 8, 20"
            assert _field_warning(app, "process.dead_time") == ""
            assert _range_warning(app, "process.dead_time") == ("", False)

    asyncio.run(scenario())


def test_moving_a_range_onto_the_nominal() -> None:
    from robustff.case import load_case
    from robustff.design.case_review import nominal_outside_range
    from robustff.tui import editing

    case = load_case(demo_case_path("wash-water-heater"))
    for key, text in (("process.dead_time", "20"), ("process.time_constant", "70"),
                      ("disturbance.gain", "-4"), ("disturbance.time_constant", "90")):
        edited = editing.edit_field(case, key, text)
        row = next(r for r in edited.uncertainty if r.key == key)
        assert nominal_outside_range(edited, row), key
        for change in (editing.widen_to_nominal, editing.move_to_nominal):
            fixed = change(edited, key)
            row = next(r for r in fixed.uncertainty if r.key == key)
            assert row.distribution.kind == next(
                r for r in case.uncertainty if r.key == key).distribution.kind
            assert not nominal_outside_range(fixed, row), (key, change.__name__)
    moved = editing.move_to_nominal(editing.edit_field(case, "process.time_constant", "70"),
                                    "process.time_constant")
    # uniform 35 .. 60 s keeps its 25 s width, centred on 70 s
    assert next(r for r in moved.uncertainty
                if r.key == "process.time_constant").distribution.params == (57.5, 82.5)


def test_the_design_summary_stays_after_reload_and_row_deletion(
        case_file: Path, tmp_path: Path) -> None:
    async def scenario() -> None:
        app = studio(case_file, tmp_path / "cache", live=False)
        async with app.run_test(size=(100, 40)) as pilot:
            await pilot.pause()

            def summary() -> str:
                found = app.query("#design-summary").results(Static)
                return "\n".join(str(widget.render()) for widget in found)

            def shown() -> bool:  # the panes are rebuilt and the summary filled in
                return not app.workers and "Kc" in summary() and "Feedforward" in summary()

            assert shown()
            await pilot.press("ctrl+r")
            await wait_until(pilot, shown, "design summary after reload", timeout=10)
            row = app.query_one(f"#u-{field_id('sensor.time_constant')}")
            row.query_one(".udel", Button).press()
            await pilot.pause()
            assert "sensor.time_constant" not in {r.key for r in app.case.uncertainty}
            await wait_until(pilot, shown, "design summary after deleting a row", timeout=10)

    asyncio.run(scenario())
