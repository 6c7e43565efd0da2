"""Saving keeps the file's mode and comments; Save as writes a copy of the same document."""

from __future__ import annotations

import asyncio
import os
import shutil
import stat
from pathlib import Path

import pytest

from robustff.case import load_case
from robustff.demo import demo_case_path

textual = pytest.importorskip("textual")

from studio_pilot import burst, keys_handled, studio  # noqa: E402
from textual.widgets import Input  # noqa: E402

from robustff.tui.dialogs import PathScreen  # noqa: E402
from robustff.tui.messages import field_id  # noqa: E402


@pytest.fixture
def case_file(tmp_path: Path) -> Path:
    path = tmp_path / "heater.toml"
    shutil.copy(demo_case_path("wash-water-heater"), path)
    os.chmod(path, 0o644)
    return path


def test_save_keeps_the_mode_and_save_as_keeps_the_comments(
        case_file: Path, tmp_path: Path) -> None:
    async def scenario() -> None:
        app = studio(case_file, tmp_path / "cache", live=False)
        async with app.run_test(size=(100, 30)) as pilot:
            await pilot.pause()
            app.query_one(f"#in-{field_id('process.gain')}", Input).focus()
            await pilot.pause()
            burst(app, "0.7<enter><ctrl+s>")
            await keys_handled(pilot, app)
            assert load_case(case_file).process.gain == 0.7 and not app.dirty
            assert stat.S_IMODE(case_file.stat().st_mode) == 0o644
            copy = tmp_path / "copy.toml"
            await pilot.press("f2")
            await pilot.pause()
            assert isinstance(app.screen, PathScreen)
            app.screen.query_one("#path-input", Input).value = str(copy)
            await pilot.press("enter")
            await pilot.pause()
            text = copy.read_text()
            assert "# steam pressure varies" in text
            assert "# A steam-heated plate exchanger warms wash water" in text  # description
            assert load_case(copy).process.gain == 0.7 and app.case_path == copy

    asyncio.run(scenario())
