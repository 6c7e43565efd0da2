"""The studio shows and edits the secondary (flow) loop, the controller as the control system
writes it (structure, proportional band, repeats, setpoint weights) and the valve's installed
table; edits are validated by the loader, undone with Ctrl+Z and saved with the comments."""

from __future__ import annotations

import asyncio
import shutil
from pathlib import Path

import pytest

from robustff.case import load_case
from robustff.demo import demo_case_path
from robustff.design.tuning import design_loop

textual = pytest.importorskip("textual")

from studio_pilot import burst, field_input, keys_handled, studio, wait_until  # noqa: E402
from textual.widgets import Input, Select, Static  # noqa: E402

from robustff.tui.messages import field_id  # noqa: E402


@pytest.fixture
def sticky_case(tmp_path: Path) -> Path:
    path = tmp_path / "steam-heater.toml"
    shutil.copy(demo_case_path("steam-heater-sticky-valve"), path)
    return path


@pytest.fixture
def spanned_case(tmp_path: Path) -> Path:
    """The wash-water heater with a transmitter span (0..100 degC), so a band can be given."""
    path = tmp_path / "heater.toml"
    text = demo_case_path("wash-water-heater").read_text(encoding="utf-8")
    path.write_text(text.replace('unit = "degC"\n', 'unit = "degC"\nrange = [0.0, 100.0]\n', 1),
                    encoding="utf-8")
    return path


async def _type(pilot, name: str, text: str) -> None:
    widget = field_input(pilot.app, name)
    widget.focus()
    widget.value = text
    await pilot.press("enter")
    await pilot.pause()


def _error(app, name: str) -> str:
    return str(app.query_one(f"#err-{field_id(name)}", Static).render())


def _choose(app, name: str, value: str) -> None:
    app.query_one(f"#in-{field_id(name)}", Select).value = value


async def _rebuilt(pilot) -> None:
    """Wait until the pane has its new rows (a structure, form or rule edit rebuilds it)."""
    await wait_until(pilot, lambda: not [worker for worker in pilot.app.workers
                                         if worker.group == "rebuild" and not worker.is_finished],
                     "the rows rebuilt")
    await pilot.pause()


def _summary(app) -> str:
    return str(app.query_one("#design-summary", Static).render())


def test_the_secondary_loop_is_edited_undone_and_saved_with_its_comments(
        sticky_case: Path, tmp_path: Path) -> None:
    async def scenario() -> None:
        app = studio(sticky_case, tmp_path / "cache", live=False)
        async with app.run_test(size=(80, 24)) as pilot:
            await pilot.pause()
            assert field_input(app, "secondary.gain").value == "8"
            assert field_input(app, "secondary.scans_per_primary").value == "4"
            await _type(pilot, "secondary.time_constant", "-3")
            error = _error(app, "secondary.time_constant")
            assert "secondary.time_constant: must be >= 0" in error
            assert "no [secondary]" not in error  # one reason, not its echo
            assert app.case.secondary.model.time_constant == 2.0
            await _type(pilot, "secondary.time_constant", "3")
            assert app.case.secondary.model.time_constant == 3.0
            assert _error(app, "secondary.time_constant") == ""
            await wait_until(pilot, lambda: "tau = 3 s" in _summary(app),
                             "the summary shows the new flow path")
            # Manual tuning starts from SIMC's PI (Skogestad 2003: Kc = tau / (K (tau_c +
            # theta)), Ti = min(tau, 4 (tau_c + theta)), tau_c = theta = 0.2 s): 0.9375, 1.6 s
            _choose(app, "secondary.tuning", "manual")
            await wait_until(pilot, lambda: app.case.secondary.tuning == "manual", "manual")
            await wait_until(pilot, lambda: field_input(app, "secondary.kc").value == "0.9375",
                             "the Kc row shows the rule's gain")
            assert field_input(app, "secondary.ti").value == "1.6"
            await pilot.press("ctrl+z")
            await wait_until(pilot, lambda: app.case.secondary.tuning == "simc", "undone")
            assert app.case.secondary.kc is None
            await _type(pilot, "secondary.scans_per_primary", "3")  # 4 substeps: no
            assert "must divide [simulation] substeps" in _error(app,
                                                                 "secondary.scans_per_primary")
            await _type(pilot, "secondary.scans_per_primary", "2")
            await pilot.press("ctrl+s")
            await pilot.pause()
            saved = sticky_case.read_text(encoding="utf-8")
            assert "# steam flow loop: valve % -> steam kg/h" in saved
            assert "# kg/h per % of travel at the nominal position" in saved
            again = load_case(sticky_case)
            assert again.secondary.model.time_constant == 3.0
            assert again.secondary.scans_per_primary == 2

    asyncio.run(scenario())


def test_keys_in_one_burst_fill_the_secondary_rows_in_turn(sticky_case: Path,
                                                          tmp_path: Path) -> None:
    async def scenario() -> None:
        app = studio(sticky_case, tmp_path / "cache", live=False)
        async with app.run_test(size=(80, 24)) as pilot:
            await pilot.pause()
            field_input(app, "secondary.gain").focus()
            await pilot.pause()
            burst(app, "7.5<tab>2.5<tab>0.3<enter>")
            await keys_handled(pilot, app)
            path = app.case.secondary.model
            assert (path.gain, path.time_constant, path.dead_time) == (7.5, 2.5, 0.3)
            await wait_until(pilot, lambda: "dead time = 0.3 s" in _summary(app), "summary")

    asyncio.run(scenario())


def test_the_controller_form_rows_follow_the_structure_and_keep_the_controller(
        spanned_case: Path, tmp_path: Path) -> None:
    async def scenario() -> None:
        app = studio(spanned_case, tmp_path / "cache", live=False)
        async with app.run_test(size=(80, 24)) as pilot:
            await pilot.pause()
            _choose(app, "feedback.tuning", "manual")
            await wait_until(pilot, lambda: app.case.feedback.tuning == "manual", "manual")
            await _rebuilt(pilot)
            assert field_input(app, "feedback.kc").value != ""  # the rule's settings
            ideal = design_loop(app.case).feedback
            _choose(app, "feedback.structure", "parallel")
            await wait_until(pilot, lambda: app.case.feedback.structure == "parallel", "parallel")
            await _rebuilt(pilot)
            assert app.query(f"#in-{field_id('feedback.ki')}")  # the parallel form's Ki row
            assert not app.query(f"#in-{field_id('feedback.ti')}")
            parallel = design_loop(app.case).feedback
            assert parallel.kc == pytest.approx(ideal.kc) and parallel.ti == pytest.approx(ideal.ti)
            assert app.case.feedback.ki == pytest.approx(ideal.kc / ideal.ti)  # ki = Kc / Ti
            _choose(app, "feedback.structure", "ideal")
            await wait_until(pilot, lambda: app.case.feedback.structure == "ideal", "ideal")
            await _rebuilt(pilot)
            assert app.query(f"#in-{field_id('feedback.repeats')}")  # the repeats row is back
            # A band replaces the gain: PB = 100 / Kc%, Kc% = Kc span_cv / span_out (Astrom and
            # Hagglund, Advanced PID Control, ISA 2006, ch. 3): PB 40 % with 100 degC and 100 %
            # spans is Kc = 2.5 %/degC.
            await _type(pilot, "feedback.proportional_band", "40")
            assert app.case.feedback.proportional_band == 40.0 and app.case.feedback.kc is None
            await wait_until(pilot, lambda: field_input(app, "feedback.kc").value == "",
                             "the Kc row is cleared")
            assert design_loop(app.case).feedback.kc == pytest.approx(2.5)
            await _type(pilot, "feedback.repeats", "0.05")  # repeats per s: Ti = 20 s
            assert app.case.feedback.ti is None
            assert design_loop(app.case).feedback.ti == pytest.approx(20.0)
            await _type(pilot, "feedback.setpoint_weight", "1.5")
            assert "feedback.setpoint_weight" in _error(app, "feedback.setpoint_weight")
            assert app.case.feedback.setpoint_weight == 1.0
            await _type(pilot, "feedback.setpoint_weight", "0.5")
            assert app.case.feedback.setpoint_weight == 0.5
            await pilot.press("ctrl+z")
            await wait_until(pilot, lambda: app.case.feedback.setpoint_weight == 1.0, "undo")

    asyncio.run(scenario())


def test_the_installed_table_is_typed_as_pairs(sticky_case: Path, tmp_path: Path) -> None:
    async def scenario() -> None:
        app = studio(sticky_case, tmp_path / "cache", live=False)
        async with app.run_test(size=(80, 24)) as pilot:
            await pilot.pause()
            await _type(pilot, "valve.installed", "0:0, 50")
            assert "position % : flow fraction pairs" in _error(app, "valve.installed")
            await _type(pilot, "valve.installed", "0:0, 50:0.6, 100:0.4")  # flow falls
            assert "valve.installed" in _error(app, "valve.installed")
            assert app.case.valve.characteristic == "equal-percentage"
            await _type(pilot, "valve.installed", "0:0, 50:0.3, 100:1")
            assert app.case.valve.characteristic == "installed"
            assert app.case.valve.installed == ((0.0, 0.0), (50.0, 0.3), (100.0, 1.0))
            choice = app.query_one(f"#in-{field_id('valve.characteristic')}", Select)
            await wait_until(pilot, lambda: choice.value == "installed", "the choice follows")
            assert isinstance(field_input(app, "valve.installed"), Input)
            await wait_until(pilot, lambda: "installed characteristic (0 % -> 0, 50 % -> 0.3"
                             in _summary(app), "the summary lists the table")

    asyncio.run(scenario())


def test_a_case_without_a_secondary_loop_says_so(case_file: Path, tmp_path: Path) -> None:
    async def scenario() -> None:
        app = studio(case_file, tmp_path / "cache", live=False)
        async with app.run_test(size=(80, 24)) as pilot:
            await pilot.pause()
            assert not app.query(f"#in-{field_id('secondary.gain')}")
            texts = [str(widget.render()) for widget in app.query(".section")]
            assert any("Secondary loop: none" in text for text in texts)

    asyncio.run(scenario())
