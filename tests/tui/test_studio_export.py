"""Export writes complete runs only: never the quick pass, never results of another case."""

from __future__ import annotations

import asyncio
import json
from pathlib import Path

import pytest

textual = pytest.importorskip("textual")

from studio_pilot import studio, wait_until  # noqa: E402
from textual.widgets import Input  # noqa: E402

from robustff.tui.app import QUICK_SAMPLES  # noqa: E402
from robustff.tui.dialogs import PathScreen  # noqa: E402


def test_the_quick_pass_is_not_exported(case_file: Path, tmp_path: Path) -> None:
    async def scenario() -> None:
        # many plants: the full run is still going when the quick pass is on screen
        app = studio(case_file, tmp_path / "cache", samples=400 * QUICK_SAMPLES)
        async with app.run_test(size=(100, 30)) as pilot:
            await wait_until(pilot, lambda: app.results_version > 0, "quick pass")
            assert app.last_view.quick and app.last_view.samples == QUICK_SAMPLES
            app.set_focus(None)
            await pilot.press("ctrl+e")
            await pilot.pause()
            assert not isinstance(app.screen, PathScreen)
            assert "quick pass" in app.export_problem()
            folder = tmp_path / "out"
            assert not app.export_to(folder) and not folder.exists()

    asyncio.run(scenario())


def test_a_full_run_is_exported_with_its_margins(case_file: Path, tmp_path: Path) -> None:
    async def scenario() -> None:
        app = studio(case_file, tmp_path / "cache", samples=300)  # one pass: the full run
        async with app.run_test(size=(100, 30)) as pilot:
            await wait_until(pilot, lambda: app.results_version > 0, "full run")
            app.set_focus(None)
            await pilot.press("ctrl+e")
            await pilot.pause()
            assert isinstance(app.screen, PathScreen)
            assert "full run of 300 plants" in app.screen.title_text
            folder = tmp_path / "out"
            app.screen.query_one("#path-input", Input).value = str(folder)
            await pilot.press("enter")
            await pilot.pause()
            summary = json.loads((folder / "summary.json").read_text())
            assert summary["samples"] == 300 and summary["partial"] is False
            assert summary["margins"] is not None
            # the same report as 'robustff run --report'
            report = (folder / "report.html").read_text()
            assert summary["reproducibility"]["case_file"]["sha256"] in report
            assert "management-of-change" in report

    asyncio.run(scenario())
