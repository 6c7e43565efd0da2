"""The studio's design summary shows the valve and the secondary loop of the case."""

from __future__ import annotations

import asyncio
from pathlib import Path

import pytest

from robustff.demo import demo_case_path

textual = pytest.importorskip("textual")

from studio_pilot import studio  # noqa: E402
from textual.widgets import Static  # noqa: E402


def test_the_design_summary_lists_the_installed_loop(tmp_path: Path) -> None:
    async def scenario() -> None:
        app = studio(demo_case_path("steam-heater-sticky-valve"), tmp_path / "cache",
                     live=False)
        async with app.run_test(size=(100, 40)) as pilot:
            await pilot.pause()
            text = str(app.query_one("#design-summary", Static).render())
            assert "Installed loop:" in text
            assert "equal-percentage, rangeability 30" in text and "S = 3 %" in text
            assert "secondary loop" in text and "Kc = 0.625" in text

    asyncio.run(scenario())


def test_an_ideal_actuator_adds_nothing(tmp_path: Path) -> None:
    async def scenario() -> None:
        app = studio(demo_case_path("wash-water-heater"), tmp_path / "cache", live=False)
        async with app.run_test(size=(100, 40)) as pilot:
            await pilot.pause()
            assert "Installed loop" not in str(app.query_one("#design-summary", Static).render())

    asyncio.run(scenario())
