"""Keystrokes sent in one burst (no pause between keys, as a paste, a laggy SSH link or
``tmux send-keys`` deliver them) reach the widget that had focus when each key was typed."""

from __future__ import annotations

import asyncio
from pathlib import Path

import pytest

textual = pytest.importorskip("textual")

from studio_pilot import burst, field_input, keys_handled, studio, wait_until  # noqa: E402
from textual.widgets import Input  # noqa: E402

from robustff.tui.fit_screens import FitFormScreen  # noqa: E402

ROOT = Path(__file__).resolve().parents[2]
BUMP = ROOT / "cases" / "data" / "stock-heater-bump-1.csv"


def test_a_burst_fills_each_field_in_turn_and_the_rerun_uses_it(
        case_file: Path, tmp_path: Path) -> None:
    async def scenario() -> None:
        app = studio(case_file, tmp_path / "cache")
        async with app.run_test(size=(100, 30)) as pilot:
            await wait_until(pilot, lambda: app.results_version > 0, "first result")
            field_input(app, "process.gain").focus()
            await pilot.pause()
            version = app.results_version
            burst(app, "0.7<tab>50<enter>")
            await keys_handled(pilot, app)
            assert field_input(app, "process.gain").value == "0.7"
            assert field_input(app, "process.time_constant").value == "50"
            assert app.case.process.gain == 0.7 and app.case.process.time_constant == 50.0
            await wait_until(pilot, lambda: app.results_version > version
                             and app.last_result.case.process == app.case.process, "rerun")
            # Shift+Tab goes back the same way, still in one burst
            burst(app, "<shift+tab>0.65<tab><tab>9<enter>")
            await keys_handled(pilot, app)
            assert app.case.process.gain == 0.65 and app.case.process.dead_time == 9.0
            assert app.case.process.time_constant == 50.0

    asyncio.run(scenario())


def test_a_burst_reaches_the_fit_form_it_opens(case_file: Path, tmp_path: Path) -> None:
    async def scenario() -> None:
        app = studio(case_file, tmp_path / "cache", live=False)
        async with app.run_test(size=(100, 30)) as pilot:
            await pilot.pause()
            burst(app, f"<f7>{BUMP}<tab>steam_valve_pct<tab>stock_temp_degC<tab>time_min")
            await keys_handled(pilot, app)
            form = app.screen
            assert isinstance(form, FitFormScreen)
            values = {key: form.query_one(f"#fit-{key}", Input).value
                      for key in ("path", "input", "output", "time")}
            assert values == {"path": str(BUMP), "input": "steam_valve_pct",
                              "output": "stock_temp_degC", "time": "time_min"}
            burst(app, "<escape>0.5<enter>")  # closes the form, then types in the main screen
            await keys_handled(pilot, app)
            assert not isinstance(app.screen, FitFormScreen)

    asyncio.run(scenario())
