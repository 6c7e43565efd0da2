"""Every footer action works from anywhere (a text field does not swallow it), Escape leaves a
field, the command palette holds the studio's actions, and Ctrl+Z undoes applied edits,
deletions of uncertain parameters included."""

from __future__ import annotations

import asyncio
from pathlib import Path

import pytest

textual = pytest.importorskip("textual")

from studio_pilot import burst, field_input, keys_handled, studio, wait_until  # noqa: E402
from textual.widgets import Button, Input  # noqa: E402

from robustff.tui.dialogs import HelpScreen, PathScreen  # noqa: E402
from robustff.tui.messages import field_id  # noqa: E402


def test_footer_keys_work_from_a_text_field_and_escape_leaves_it(
        case_file: Path, tmp_path: Path) -> None:
    async def scenario() -> None:
        app = studio(case_file, tmp_path / "cache")
        async with app.run_test(size=(100, 30)) as pilot:
            await wait_until(pilot, lambda: app.results_version > 0, "full run")
            field = field_input(app, "process.gain")
            field.focus()
            await pilot.pause()
            await pilot.press("ctrl+e")  # Ctrl+E is also a text field's "end of line"
            await pilot.pause()
            assert isinstance(app.screen, PathScreen) and "Export" in app.screen.title_text
            await pilot.press("escape")  # closes the dialog, not the studio's Escape
            await pilot.pause()
            assert not isinstance(app.screen, PathScreen) and app.focused is field
            burst(app, "0.7<escape>")  # Escape leaves the field; what was typed is applied
            await keys_handled(pilot, app)
            assert app.focused is None and app.case.process.gain == 0.7
            await pilot.press("f1")
            await pilot.pause()
            assert isinstance(app.screen, HelpScreen)
            await pilot.press("f1")  # in the help, F1 closes it (the dialog's own key)
            await pilot.pause()
            assert not isinstance(app.screen, HelpScreen)

    asyncio.run(scenario())


def test_the_command_palette_finds_the_studios_actions(case_file: Path, tmp_path: Path) -> None:
    async def scenario() -> None:
        app = studio(case_file, tmp_path / "cache")
        async with app.run_test(size=(100, 30)) as pilot:
            await wait_until(pilot, lambda: app.results_version > 0, "full run")
            field_input(app, "process.gain").focus()
            await pilot.pause()
            burst(app, "<ctrl+p>export")
            await keys_handled(pilot, app)
            await pilot.pause(0.5)  # the palette searches in a worker
            await pilot.press("enter")
            await wait_until(pilot, lambda: isinstance(app.screen, PathScreen), "export dialog",
                             timeout=10)

    asyncio.run(scenario())


def test_undo_brings_back_a_deleted_row_and_an_edited_value(
        case_file: Path, tmp_path: Path) -> None:
    async def scenario() -> None:
        app = studio(case_file, tmp_path / "cache", live=False)
        async with app.run_test(size=(100, 40)) as pilot:
            await pilot.pause()
            original = app.case
            field_input(app, "process.gain").focus()
            await pilot.pause()
            burst(app, "0.7<enter>")
            await keys_handled(pilot, app)
            assert app.case.process.gain == 0.7
            delete = app.query_one(f"#u-{field_id('process.time_constant')}").query_one(
                ".udel", Button)
            delete.focus()
            await pilot.pause()
            burst(app, "<enter>")  # one Enter deletes the row...
            await keys_handled(pilot, app)
            await wait_until(pilot, lambda: not app.workers, "panes rebuilt")
            assert "process.time_constant" not in {r.key for r in app.case.uncertainty}
            await pilot.press("ctrl+z")  # ...and Ctrl+Z brings it back, with its range
            await wait_until(pilot, lambda: not app.workers, "panes rebuilt")
            assert app.case.uncertainty == original.uncertainty
            assert app.case.correlations == original.correlations
            row = app.query_one(f"#u-{field_id('process.time_constant')}")
            assert row.query_one(".uparams", Input).value == "35, 60"
            await pilot.press("ctrl+z")
            await wait_until(pilot, lambda: not app.workers, "panes rebuilt")
            assert app.case == original and not app.dirty
            assert field_input(app, "process.gain").value == "0.6"
            await pilot.press("ctrl+z")  # nothing more: the case stays
            await pilot.pause()
            assert app.case == original

    asyncio.run(scenario())
