"""The studio's data fit (F7), driven through Textual's pilot, and its case edit.

Outside references:
- the demo bump test was generated outside robustff (scipy.signal.lsim on a fine grid, see
  cases/data/make_demo_bump_test.py) from a true FOPDT of K = 0.64 degC/%, tau = 5.1 min,
  dead time = 1.32 min, with AR(1) noise; the fit must land near those values;
- the RMSE shown is checked against numpy on the data and the fitted response;
- unit conversion: 1 min = 60 s (Source: BIPM, The International System of Units, 9th edition,
  2019, Table 8, non-SI units accepted for use with the SI).
"""

from __future__ import annotations

import asyncio
import json
import shutil
import subprocess
import sys
import time
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from robustff.case import load_case
from robustff.demo import demo_case_path
from robustff.errors import CaseError
from robustff.plant.models import TransferModel
from robustff.tui import editing
from robustff.tui.fit_apply import (
    FormError,
    converted_model,
    csv_columns,
    parse_fit_form,
    with_fitted_model,
)

textual = pytest.importorskip("textual")

from textual.widgets import Input, Select, Static  # noqa: E402

from robustff.tui.app import StudioApp  # noqa: E402
from robustff.tui.fit_screens import FitFormScreen, FitResultScreen  # noqa: E402
from robustff.tui.messages import field_id  # noqa: E402

ROOT = Path(__file__).resolve().parents[2]
DATA = ROOT / "cases" / "data"
BUMP = DATA / "stock-heater-bump-1.csv"
COLUMNS = {"input": "steam_valve_pct", "output": "stock_temp_degC", "time": "time_min"}
SAMPLES = 300


@pytest.fixture
def heater_case(tmp_path: Path) -> Path:
    """A writable copy of the stock-heater template case (time unit: min)."""
    path = tmp_path / "stock-heater.toml"
    shutil.copy(DATA / "stock-heater-template.toml", path)
    return path


def _app(path: Path, recovery: Path, live: bool = True) -> StudioApp:
    case = load_case(path)
    return StudioApp(path, case=replace(case, study=replace(case.study, samples=SAMPLES)),
                     recovery_folder=recovery, live=live)


async def _wait(pilot, condition, what: str, timeout: float = 90.0) -> None:
    started = time.monotonic()
    while not condition():
        if time.monotonic() - started > timeout:
            raise AssertionError(f"{what}: not in time")
        await pilot.pause(0.05)


async def _open_form(app: StudioApp, pilot, values: dict[str, str]) -> FitFormScreen:
    await pilot.press("f7")
    await pilot.pause()
    form = app.screen
    assert isinstance(form, FitFormScreen)
    for key, value in values.items():
        widget = form.query_one(f"#fit-{key}")
        if isinstance(widget, Select):
            widget.value = value
        else:
            widget.value = value
    await pilot.pause()
    return form


def _cli_fit() -> dict:
    """``robustff fit --json`` on the demo record (Jacobian intervals, as the studio's default)."""
    command = [sys.executable, "-m", "robustff", "fit", str(BUMP), "--input", COLUMNS["input"],
               "--output", COLUMNS["output"], "--time", COLUMNS["time"], "--time-unit", "min",
               "--ci", "jacobian", "--json"]
    out = subprocess.run(command, capture_output=True, text=True, check=True, cwd=ROOT)
    return json.loads(out.stdout)


def test_fit_key_fits_the_demo_bump_test_and_applies_it(heater_case: Path, tmp_path: Path) -> None:
    cli = _cli_fit()

    async def scenario() -> None:
        app = _app(heater_case, tmp_path / "cache")
        async with app.run_test(size=(100, 30)) as pilot:
            await _wait(pilot, lambda: app.results_version > 0, "first result")
            await _open_form(app, pilot, {"path": str(BUMP), **COLUMNS, "time_unit": "min"})
            await pilot.press("ctrl+f")
            await _wait(pilot, lambda: isinstance(app.screen, FitResultScreen), "fit result")
            screen = app.screen
            result = screen.result
            for name in ("gain", "time_constant", "dead_time"):
                estimate = result.estimates[name]
                assert float(f"{estimate.value:.6g}") == cli[name]["value"], name
                assert [float(f"{v:.6g}") for v in estimate.ci95] == cli[name]["ci95"], name
            # near the true model the data were generated from (scipy.signal.lsim, see top)
            assert result.estimates["gain"].value == pytest.approx(0.64, rel=0.02)
            assert result.estimates["time_constant"].value == pytest.approx(5.1, rel=0.03)
            assert result.estimates["dead_time"].value == pytest.approx(1.32, abs=0.12)
            record = result.record  # its two blank output cells stay NaN, outside the RMSE
            assert result.rmse == pytest.approx(
                float(np.sqrt(np.nanmean((record.output - result.fitted) ** 2))), rel=1e-9)
            await pilot.pause(0.2)
            text = app.screen_text()
            for label in ("gain K", "lag tau", "dead time", "95 % interval", "RMSE", "min",
                          "• data", "Caution", "management-of-change", "[a] apply to process"):
                assert label in text, label
            notes = str(screen.query_one("#fit-notes", Static).render())
            assert "times in min, the case's unit" in notes and "2 missing output values" in notes
            for name in ("gain", "time_constant", "dead_time"):
                assert f"{result.estimates[name].value:.4g}" in text, name
            plot = str(screen.query_one("#fit-plot", Static).render())
            assert "\x1b" not in plot and "┤" in plot  # plain text: no colour codes
            await pilot.resize_terminal(80, 24)
            await pilot.pause(0.3)
            small = app.screen_text().splitlines()
            assert len(small) == 24 and max(map(len, small)) <= 80
            assert any("[a] apply" in line for line in small)
            assert any("Caution" in line for line in small)
            await pilot.resize_terminal(100, 30)
            await pilot.press("p")  # the picture file of 'robustff fit --plot'
            await pilot.pause()
            picture = tmp_path / "fit.svg"
            app.screen.query_one("#path-input", Input).value = str(picture)
            await pilot.press("enter")
            await _wait(pilot, picture.exists, "saved plot")
            assert "<svg" in picture.read_text() and app.screen is screen
            version, before = app.results_version, app.case
            await pilot.press("a")
            await _wait(pilot, lambda: app.results_version > version, "rerun after applying")
            gain = float(f"{result.estimates['gain'].value:.4g}")  # written to 4 digits
            assert app.case.process.gain == gain != before.process.gain
            assert app.case.process.dead_time == float(f"{cli['dead_time']['value']:.4g}")
            assert app.case.disturbance == before.disturbance
            assert app.dirty and app.recovery_file.exists()
            assert app.last_result.case.process == app.case.process  # the rerun used the fit
            await pilot.pause(0.2)
            field = app.query_one(f"#in-{field_id('process.gain')}", Input)
            assert field.value == f"{gain:g}"

    asyncio.run(scenario())


def test_bad_entries_show_inline_errors_and_keep_the_text(heater_case: Path,
                                                          tmp_path: Path) -> None:
    async def scenario() -> None:
        app = _app(heater_case, tmp_path / "cache", live=False)
        async with app.run_test(size=(80, 24)) as pilot:
            original = app.case
            form = await _open_form(app, pilot, {"path": str(BUMP), **COLUMNS,
                                                 "input": "steam_valve"})
            await pilot.press("ctrl+f")
            error = form.query_one("#fit-error", Static)
            await _wait(pilot, lambda: "no column" in str(error.render()), "inline error")
            message = str(error.render())
            assert "no column 'steam_valve'" in message and "steam_valve_pct" in message
            field = form.query_one("#fit-input", Input)
            assert field.value == "steam_valve" and field.has_class("invalid")
            assert app.screen is form and app.is_running
            form.query_one("#fit-time", Input).value = ""
            form.query_one("#fit-sample_time", Input).value = "fast"
            await pilot.press("ctrl+f")
            await pilot.pause()
            assert "sample time must be a number" in str(error.render())
            assert form.query_one("#fit-sample_time", Input).has_class("invalid")
            await pilot.press("escape")
            await pilot.pause()
            assert not isinstance(app.screen, FitFormScreen) and app.is_running
            assert app.case == original and not app.dirty
            await pilot.press("f7")  # the texts are kept for the next try
            await pilot.pause()
            assert app.screen.query_one("#fit-sample_time", Input).value == "fast"
            assert app.screen.query_one("#fit-input", Input).value == "steam_valve"

    asyncio.run(scenario())


def test_form_checks_name_the_field() -> None:
    good = {"path": str(BUMP), **COLUMNS, "sample_time": "", "time_unit": "", "kind": "sopdt",
            "block": "disturbance", "intervals": "bootstrap"}
    request = parse_fit_form(good)
    assert request.time_unit is None and request.kind == "sopdt" and request.block == "disturbance"
    for change, field in (({"path": "nowhere.csv"}, "path"), ({"output": " "}, "output"),
                          ({"sample_time": "0.1"}, "sample_time"),
                          ({"time": "", "sample_time": "-1"}, "sample_time"),
                          ({"kind": "pid"}, "kind"), ({"time_unit": "day"}, "time_unit")):
        with pytest.raises(FormError) as caught:
            parse_fit_form({**good, **change})
        assert caught.value.field == field, change
    assert csv_columns(BUMP) == ["time_min", "steam_valve_pct", "stock_temp_degC"]


def test_fitted_times_are_converted_to_the_case_unit() -> None:
    fitted = TransferModel("fopdt", 0.645013, 5.109, 0.0, 1.24088)
    in_seconds, note = converted_model(fitted, "min", "s")
    # 1 min = 60 s (Source: BIPM SI Brochure, 9th edition, 2019, Table 8)
    # written to four significant digits: 5.109 min = 306.54 s -> 306.5 s
    assert in_seconds.time_constant == 306.5 and in_seconds.gain == 0.645
    assert in_seconds.dead_time == 74.45 and "from min" in note
    same, note = converted_model(fitted, None, "s")
    assert same == TransferModel("fopdt", 0.645, 5.109, 0.0, 1.241)
    assert "not given" in note and "(s)" in note
    # an integrating gain is per time unit: K/min -> K/60 per s
    slope, _ = converted_model(TransferModel("ipdt", 0.06, 0.0, 0.0, 2.0), "min", "s")
    assert slope.gain == pytest.approx(0.001) and slope.dead_time == pytest.approx(120.0)
    case = load_case(demo_case_path("wash-water-heater"))
    changed, notes = with_fitted_model(case, "process", in_seconds)
    assert changed.process == in_seconds and changed.time_unit == "s"
    # the demo's uniform 35 .. 60 s range of the lag misses the new 306.5 s: reported
    assert any("process.time_constant" in n and "misses" in n for n in notes)


def test_a_new_model_kind_drops_parameters_it_lacks() -> None:
    case = load_case(demo_case_path("syrup-dilution"))
    case = editing.add_uncertain(case, "disturbance.time_constant_2")
    fopdt = TransferModel("fopdt", 0.15, 22.0, 0.0, 18.0)
    changed, notes = with_fitted_model(case, "disturbance", fopdt)
    assert changed.disturbance.kind == "fopdt"
    assert "disturbance.time_constant_2" not in {row.key for row in changed.uncertainty}
    assert any("time_constant_2" in note for note in notes)
    with pytest.raises(CaseError):  # the loader refuses a negative lag
        with_fitted_model(case, "process", TransferModel("fopdt", -0.1, -3.0, 0.0, 1.0))
