"""The text-UI studio, driven through Textual's pilot (small sample counts keep it fast).

The check against the outside world here is the direction of a physical effect: a feedforward
gain designed from the nominal disturbance model over- or under-compensates more often when the
true disturbance gain is spread more widely, so the probability that feedforward makes IAE worse
must rise when the disturbance-gain range is widened (common practice, no source: the usual
argument for detuning feedforward, e.g. a gain factor below 1, under model uncertainty).
"""

from __future__ import annotations

import asyncio
import shutil
import subprocess
import sys
import time
from dataclasses import replace
from pathlib import Path

import pytest

from robustff.case import load_case
from robustff.demo import demo_case_path
from robustff.errors import CaseError
from robustff.tui import editing
from robustff.tui.recovery import read_recovery, recovery_path, write_recovery

textual = pytest.importorskip("textual")

from textual.widgets import Input  # noqa: E402

from robustff.tui.app import StudioApp  # noqa: E402
from robustff.tui.dialogs import ChoiceScreen, HelpScreen  # noqa: E402
from robustff.tui.messages import field_id  # noqa: E402
from robustff.tui.robust_actions import ROBUST_SAMPLES, robust_sample_count  # noqa: E402
from robustff.tui.robust_screens import RobustResultScreen  # noqa: E402

SAMPLES = 300


@pytest.fixture
def case_file(tmp_path: Path) -> Path:
    """A writable copy of the demo case (comments included)."""
    path = tmp_path / "heater.toml"
    shutil.copy(demo_case_path("wash-water-heater"), path)
    return path


def _app(path: Path, recovery: Path, live: bool = True) -> StudioApp:
    case = load_case(path)
    return StudioApp(path, case=replace(case, study=replace(case.study, samples=SAMPLES)),
                     recovery_folder=recovery, live=live)


async def _wait_results(app: StudioApp, pilot, above: int, timeout: float = 90.0) -> None:
    """Poll until the results-version counter passes ``above``."""
    started = time.monotonic()
    while app.results_version <= above:
        if time.monotonic() - started > timeout:
            raise AssertionError("no refreshed result in time")
        await pilot.pause(0.05)


async def _type(pilot, widget: Input, text: str) -> None:
    widget.focus()
    widget.value = text
    await pilot.press("enter")
    await pilot.pause()


def _row_inputs(app: StudioApp, key: str) -> tuple[Input, Input]:
    row = app.query_one(f"#u-{field_id(key)}")
    return row.query_one(".uparams", Input), row.query_one(".uclip", Input)


def test_widening_disturbance_gain_raises_harm(case_file: Path, tmp_path: Path) -> None:
    async def scenario() -> None:
        app = _app(case_file, tmp_path / "cache")
        async with app.run_test(size=(100, 30)) as pilot:
            await _wait_results(app, pilot, 0)
            before = app.last_view.harm_probability
            version = app.results_version
            params, clip = _row_inputs(app, "disturbance.gain")
            clip.value = "-3.6, -0.2"
            await _type(pilot, params, "-1.8, 0.8")
            await _wait_results(app, pilot, version)
            after = app.last_view
            assert app.case.uncertainty[3].distribution.params == (-1.8, 0.8)
            assert after.samples == SAMPLES
            assert after.harm_probability > before + 0.05
            assert "P(harm) = " in app.screen_text()
            assert app.dirty

    asyncio.run(scenario())


def test_invalid_edits_show_the_loader_reason_and_keep_the_text(
        case_file: Path, tmp_path: Path) -> None:
    async def scenario() -> None:
        app = _app(case_file, tmp_path / "cache", live=False)
        async with app.run_test(size=(100, 30)) as pilot:
            original = app.case
            params, _ = _row_inputs(app, "process.time_constant")
            await _type(pilot, params, "60, 35")
            row = app.query_one(f"#u-{field_id('process.time_constant')}")
            assert "low must be below high" in str(row.query_one(".udesc").render())
            assert params.value == "60, 35"
            dead_time = app.query_one(f"#in-{field_id('process.dead_time')}", Input)
            await _type(pilot, dead_time, "-2")
            error = app.query_one(f"#err-{field_id('process.dead_time')}")
            assert "process.dead_time: must be >= 0" in str(error.render())
            await _type(pilot, dead_time, "eight")
            assert "must be a number" in str(error.render())
            assert dead_time.value == "eight"
            assert app.is_running and app.case == original and not app.dirty
            await _type(pilot, dead_time, "9")  # a valid value clears the error
            assert str(error.render()) == "" and app.case.process.dead_time == 9.0

    asyncio.run(scenario())


def test_save_and_reload_round_trip_the_edit(case_file: Path, tmp_path: Path) -> None:
    async def scenario() -> None:
        app = _app(case_file, tmp_path / "cache", live=False)
        async with app.run_test(size=(100, 30)) as pilot:
            gain = app.query_one(f"#in-{field_id('feedforward.gain_factor')}", Input)
            await _type(pilot, gain, "0.7")
            assert app.dirty and app.recovery_file.exists()
            await pilot.press("ctrl+s")
            await pilot.pause()
            assert not app.dirty and not app.recovery_file.exists()
            saved = load_case(case_file)
            assert saved.feedforward.gain_factor == 0.7
            assert "# steam pressure varies" in case_file.read_text()  # comments kept
            case_file.write_text(case_file.read_text().replace("gain_factor = 0.7",
                                                               "gain_factor = 0.4"))
            await pilot.press("ctrl+r")
            await pilot.pause()
            assert app.case.feedforward.gain_factor == 0.4 and not app.dirty
            await pilot.pause(0.2)
            assert app.query_one(f"#in-{field_id('feedforward.gain_factor')}", Input).value == "0.4"

    asyncio.run(scenario())


def test_recovery_file_restores_edits_after_a_lost_session(
        case_file: Path, tmp_path: Path) -> None:
    async def scenario() -> None:
        first = _app(case_file, tmp_path / "cache", live=False)
        async with first.run_test(size=(100, 30)) as pilot:
            params, _ = _row_inputs(first, "process.gain")
            await _type(pilot, params, "0.4")
            assert first.case.uncertainty[0].distribution.params == (0.4,)
        # the session ends without saving (as when an SSH connection drops)
        assert recovery_path(case_file).exists()
        second = _app(case_file, tmp_path / "cache", live=False)
        async with second.run_test(size=(100, 30)) as pilot:
            await pilot.pause()
            assert isinstance(second.screen, ChoiceScreen)
            await pilot.press("r")
            await pilot.pause(0.2)
            assert second.case.uncertainty[0].distribution.params == (0.4,)
            assert second.dirty
            assert _row_inputs(second, "process.gain")[0].value == "0.4"
            await pilot.press("ctrl+q")  # unsaved edits: asks first
            await pilot.pause()
            assert isinstance(second.screen, ChoiceScreen) and second.is_running
            await pilot.press("c")
            await pilot.pause()
            assert second.is_running

    asyncio.run(scenario())


def test_screen_text_at_small_and_large_terminals(case_file: Path, tmp_path: Path) -> None:
    async def scenario() -> None:
        app = _app(case_file, tmp_path / "cache")
        async with app.run_test(size=(80, 24)) as pilot:
            await _wait_results(app, pilot, 0)
            for size in ((80, 24), (120, 40)):
                await pilot.resize_terminal(*size)
                await pilot.pause(0.3)
                text = app.screen_text()
                lines = text.splitlines()
                assert len(lines) == size[1] and max(map(len, lines)) <= size[0]
                for label in ("Help", "Save", "Export", "Reload", "Quit", "Caution", "Process",
                              "management-of-change", "P50", "better", "IAE"):
                    assert label in text, (size, label)
                assert "…" not in text  # nothing truncated in the table
            assert "P(harm) = " in text and "▼ better" in text
            await pilot.press("f1")
            await pilot.pause()
            assert isinstance(app.screen, HelpScreen) and "Ctrl+S" in app.screen_text()
            await pilot.press("escape")

    asyncio.run(scenario())


async def _wait_screen(app: StudioApp, pilot, kind: type, timeout: float = 90.0) -> None:
    started = time.monotonic()
    while not isinstance(app.screen, kind):
        if time.monotonic() - started > timeout:
            raise AssertionError(f"no {kind.__name__} in time (screen {app.screen!r})")
        await pilot.pause(0.05)


def test_robust_search_key_applies_the_searched_feedforward(
        case_file: Path, tmp_path: Path) -> None:
    """F6 runs the search of 'robustff tune' and applying writes its values into the case.

    Outside check: on the optimisation samples the search starts from the nominal design and
    keeps the best point it evaluated, so the robust P90 can be no worse than the nominal P90
    (definition of a minimisation; the P90 is the linear-interpolation percentile, the same
    definition as numpy.percentile's default, checked against it below).
    """

    async def scenario() -> None:
        app = _app(case_file, tmp_path / "cache")
        app.robust_budget = 6  # a few evaluations keep the test quick
        async with app.run_test(size=(100, 40)) as pilot:  # the verdict's reason and the table
            await _wait_results(app, pilot, 0)
            await pilot.press("f6")
            await pilot.pause()
            assert isinstance(app.screen, ChoiceScreen) and "objective" in app.screen_text()
            await pilot.press("p")
            await _wait_screen(app, pilot, RobustResultScreen)
            await pilot.pause()  # drawn once before its text is read
            result = app.screen.result
            assert result.objective == "p90" and result.samples == SAMPLES
            optimisation = result.figures["robust"]["optimisation"]
            assert optimisation.iae_p90 <= result.figures["nominal"]["optimisation"].iae_p90
            text = app.screen_text()
            for label in ("nominal", "robust", "gain factor", "lead [s]", "lag [s]",
                          "P90 IAE, fresh samples", "P(harm), fresh", "apply"):
                assert label in text, label
            assert f"{result.figures['robust']['fresh'].iae_p90:.4g}" in text
            assert "P90 IAE, fresh samples [degC*s]" in text  # units on the P90 rows
            verdict = str(app.screen.query_one("#robust-verdict").render())
            assert "bootstrap interval" in verdict and "degC*s" in verdict
            await pilot.resize_terminal(80, 24)  # verdict and buttons above the fold
            await pilot.pause(0.3)
            small = app.screen_text()
            assert "Verdict:" in small and "[a] apply" in small and "Caution" in small
            await pilot.resize_terminal(100, 40)
            await pilot.pause(0.3)
            before, version = app.case.feedforward, app.results_version
            await pilot.press("a")
            await _wait_results(app, pilot, version)
            after = app.case.feedforward
            assert after != before and after.structure == before.structure
            for name in result.space.names:
                assert getattr(after, name) == getattr(result.robust, name), name
            assert app.dirty and app.recovery_file.exists()
            assert read_recovery(app.recovery_file, case_file).case.feedforward == after
            assert app.last_result.case.feedforward == after  # the rerun used the new values
            await pilot.pause(0.2)
            lag = app.query_one(f"#in-{field_id('feedforward.lag')}", Input)
            assert lag.value == f"{after.lag:g}"
        assert robust_sample_count(replace(app.case, study=replace(
            app.case.study, samples=5 * ROBUST_SAMPLES))) == ROBUST_SAMPLES

    asyncio.run(scenario())


def test_p90_used_by_the_search_is_numpys_percentile() -> None:
    import numpy as np

    from robustff.tune.search import objective_value

    # Source: NumPy reference, numpy.percentile, method="linear" (the default), NumPy 1.22+.
    values = np.random.default_rng(3).lognormal(size=101)
    assert objective_value("p90", values, values) == pytest.approx(np.percentile(values, 90.0))


def test_robust_search_can_be_stopped(case_file: Path, tmp_path: Path) -> None:
    async def scenario() -> None:
        app = _app(case_file, tmp_path / "cache", live=False)
        async with app.run_test(size=(80, 24)) as pilot:
            await pilot.press("f6")
            await pilot.pause()
            await pilot.press("p")
            await pilot.pause()
            await pilot.press("escape")  # stops at the next objective evaluation
            started = time.monotonic()
            while app._robust_screen is not None:
                assert time.monotonic() - started < 60
                await pilot.pause(0.05)
            assert not isinstance(app.screen, RobustResultScreen)
            assert app.is_running and app.case.feedforward.lead is None

    asyncio.run(scenario())


def test_edits_use_the_loaders_messages() -> None:
    case = load_case(demo_case_path())
    with pytest.raises(CaseError) as caught:
        editing.edit_distribution(case, "disturbance.gain", "uniform", "-1.0, -3.0", "")
    assert caught.value.problems == [
        "edit: uncertainty.disturbance.gain.uniform: low must be below high (got [-1.0, -3.0])"]
    manual = editing.edit_field(case, "feedback.tuning", "manual")
    assert manual.feedback.kc is not None and manual.feedback.ti is not None
    added = editing.add_uncertain(case, "disturbance.dead_time")
    assert added.uncertainty[-1].distribution.params == (0.2,)
    removed = editing.remove_uncertain(case, "process.dead_time")
    assert not removed.correlations  # the correlation naming it goes too


def test_recovery_of_a_bundled_demo_goes_to_the_cache(tmp_path: Path) -> None:
    demo = demo_case_path()
    path = recovery_path(demo, cache=tmp_path)
    assert path.parent == tmp_path
    case = load_case(demo)
    edited = editing.edit_field(case, "process.gain", "0.8")
    write_recovery(path, edited, demo.read_text())
    found = read_recovery(path, demo)
    assert found is not None and found.case == edited and "steam pressure" in found.text


def test_run_command_does_not_import_textual() -> None:
    code = ("import sys; from robustff.cli import build_parser; build_parser(); "
            "print('textual' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"
