"""The studio edits the valve: characteristic, stiction S and J, deadband, rate limit and the
actuator lag, validated by the case loader like every other edit."""

from __future__ import annotations

import asyncio
from pathlib import Path

import pytest

from robustff.case import load_case
from robustff.demo import demo_case_path
from robustff.errors import CaseError
from robustff.tui.editing import edit_field, field_text

textual = pytest.importorskip("textual")

from studio_pilot import studio, wait_until  # noqa: E402
from textual.widgets import Input, Select, Static  # noqa: E402

from robustff.tui.messages import field_id  # noqa: E402


async def _type(pilot, widget: Input, text: str) -> None:
    widget.focus()
    widget.value = text
    await pilot.press("enter")
    await pilot.pause()


def _summary(app) -> str:
    return str(app.query_one("#design-summary", Static).render())


def test_the_valve_rows_edit_the_case_and_the_summary_follows(tmp_path: Path) -> None:
    async def scenario() -> None:
        app = studio(demo_case_path("steam-heater-sticky-valve"), tmp_path / "cache",
                     live=False)
        async with app.run_test(size=(100, 40)) as pilot:
            await pilot.pause()
            lag = app.query_one(f"#in-{field_id('valve.time_constant')}", Input)
            assert lag.value == "0"
            await _type(pilot, lag, "1.5")
            assert app.case.valve.time_constant == 1.5
            await wait_until(pilot, lambda: "actuator lag 1.5 s" in _summary(app),
                             "the summary shows the actuator lag")
            await _type(pilot, app.query_one(f"#in-{field_id('valve.stiction_s')}", Input),
                        "2.5")
            assert app.case.valve.stiction_s == 2.5
            # a deadband beside stiction: refused with the loader's reason, the case kept
            deadband = app.query_one(f"#in-{field_id('valve.deadband')}", Input)
            await _type(pilot, deadband, "1")
            error = str(app.query_one(f"#err-{field_id('valve.deadband')}", Static).render())
            assert "give either a deadband or stiction" in error
            assert app.case.valve.deadband == 0.0 and deadband.value == "1"
            await _type(pilot, app.query_one(f"#in-{field_id('valve.rate_limit')}", Input),
                        "-3")
            error = str(app.query_one(f"#err-{field_id('valve.rate_limit')}", Static).render())
            assert "valve.rate_limit" in error and app.case.valve.rate_limit == 10.0

    asyncio.run(scenario())


def test_a_valve_is_added_and_removed_by_its_characteristic(tmp_path: Path) -> None:
    async def scenario() -> None:
        app = studio(demo_case_path("wash-water-heater"), tmp_path / "cache", live=False)
        async with app.run_test(size=(100, 40)) as pilot:
            await pilot.pause()
            assert app.case.valve is None
            choice = app.query_one(f"#in-{field_id('valve.characteristic')}", Select)
            assert choice.value == "none"
            choice.value = "equal-percentage"
            await wait_until(pilot, lambda: app.case.valve is not None, "a valve is added")
            assert app.case.valve.characteristic == "equal-percentage"
            # the rows are rebuilt and show the new valve's numbers
            await wait_until(pilot, lambda: app.query_one(
                f"#in-{field_id('valve.rangeability')}", Input).value == "50",
                "the rangeability row shows the default")
            await wait_until(pilot, lambda: "Installed loop:" in _summary(app),
                             "the summary lists the valve")
            app.query_one(f"#in-{field_id('valve.characteristic')}", Select).value = "none"
            await wait_until(pilot, lambda: app.case.valve is None, "the valve is removed")
            await wait_until(pilot, lambda: "Installed loop" not in _summary(app),
                             "the summary drops the valve")

    asyncio.run(scenario())


def test_valve_edits_refuse_what_the_case_file_cannot_hold() -> None:
    case = load_case(demo_case_path("wash-water-heater"))
    assert field_text(case, "valve.characteristic") == "none"
    assert field_text(case, "valve.time_constant") == ""
    # a number typed without a valve adds a linear one
    lagged = edit_field(case, "valve.time_constant", "2")
    assert lagged.valve.characteristic == "linear" and lagged.valve.time_constant == 2.0
    with pytest.raises(CaseError, match="only with characteristic = 'equal-percentage'"):
        edit_field(lagged, "valve.rangeability", "30")
    with pytest.raises(CaseError, match="installed characteristic needs its table"):
        edit_field(lagged, "valve.characteristic", "installed")
    with pytest.raises(CaseError, match="must be a number"):
        edit_field(lagged, "valve.stiction_s", "sticky")
    with pytest.raises(CaseError, match="stiction_j"):  # a slip jump needs S > 0
        edit_field(lagged, "valve.stiction_j", "1")
