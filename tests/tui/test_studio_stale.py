"""Results that do not belong to the case on screen are dimmed and say why, wherever the results
are scrolled: during a rerun, after a failed run and while a field holds refused text. Saving a
case that does not validate asks first."""

from __future__ import annotations

import asyncio
from pathlib import Path

import pytest

from robustff.tui import editing

textual = pytest.importorskip("textual")

from studio_pilot import burst, keys_handled, studio, wait_until  # noqa: E402
from textual.widgets import Input  # noqa: E402

from robustff.tui.dialogs import ChoiceScreen  # noqa: E402
from robustff.tui.messages import field_id  # noqa: E402


def _stale(app) -> str:
    """The stale line's text ('' when hidden); checks the dimming goes with it."""
    line = app.query_one("#stale")
    dimmed = app.query_one("#right").has_class("stale")
    assert dimmed == bool(line.display), "dimming and the stale line disagree"
    return str(line.render()) if line.display else ""


async def _edit(app, pilot, field: str, text: str) -> None:
    app.query_one(f"#in-{field_id(field)}", Input).focus()
    await pilot.pause()
    burst(app, f"{text}<enter>")
    await keys_handled(pilot, app)


def test_results_are_marked_stale_while_they_belong_to_another_case(
        case_file: Path, tmp_path: Path) -> None:
    async def scenario() -> None:
        app = studio(case_file, tmp_path / "cache")
        async with app.run_test(size=(100, 30)) as pilot:
            await wait_until(pilot, lambda: app.results_version > 0, "first result")
            assert _stale(app) == ""
            # during a rerun: the edit is applied, the new case's first pass has not come back
            version = app.results_version
            app.accept_edit(editing.edit_field(app.case, "process.gain", "0.7"))
            assert "case before the edit; rerunning" in _stale(app)
            await wait_until(pilot, lambda: app.results_version > version, "rerun")
            assert _stale(app) == ""
            # a failed run: lag tau 0 loads, but no tuning rule can use it
            await _edit(app, pilot, "process.time_constant", "0")
            await wait_until(pilot, lambda: app.run_failure is not None, "failed run")
            assert app.case.process.time_constant == 0.0
            assert "run of the edited case failed" in _stale(app)
            app.query_one("#results-scroll").scroll_end(animate=False)
            await pilot.pause()
            assert "STALE" in app.screen_text()  # visible however the results are scrolled
            before = case_file.read_text()
            await pilot.press("ctrl+s")
            await pilot.pause()
            assert isinstance(app.screen, ChoiceScreen)
            assert "does not validate" in app.screen.question
            await pilot.press("c")
            await pilot.pause()
            assert case_file.read_text() == before and app.dirty
            await pilot.press("ctrl+q")  # "save and quit" asks the same question first
            await pilot.pause()
            await pilot.press("s")
            await pilot.pause()
            assert isinstance(app.screen, ChoiceScreen)
            assert "does not validate" in app.screen.question
            await pilot.press("c")
            await pilot.pause()
            assert app.is_running and case_file.read_text() == before
            # back to a valid value: the new results are current again
            version = app.results_version
            await _edit(app, pilot, "process.time_constant", "45")
            await wait_until(pilot, lambda: app.results_version > version, "rerun")
            assert _stale(app) == ""
            # refused text: the results are for the last accepted value
            await _edit(app, pilot, "process.dead_time", "-2")
            assert "process.dead_time: refused text" in _stale(app)
            await pilot.press("ctrl+s")
            await pilot.pause()
            assert isinstance(app.screen, ChoiceScreen)
            await pilot.press("s")  # saved anyway, with the last accepted values
            await pilot.pause()
            assert "dead_time = 8.0" in case_file.read_text() and not app.dirty

    asyncio.run(scenario())
