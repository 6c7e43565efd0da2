"""One name for one thing, as in the result files and the CLI (fb and fbff arms, P(harm),
unstable loops), and units on the values shown."""

from __future__ import annotations

import asyncio
from pathlib import Path

import pytest

textual = pytest.importorskip("textual")

from studio_pilot import studio, wait_until  # noqa: E402

from robustff.tui.dialogs import HELP_TEXT  # noqa: E402
from robustff.tui.messages import field_id  # noqa: E402


def test_one_name_each_and_units_on_the_main_screen(case_file: Path, tmp_path: Path) -> None:
    async def scenario() -> None:
        app = studio(case_file, tmp_path / "cache")
        async with app.run_test(size=(160, 90)) as pilot:  # everything on one screen
            await wait_until(pilot, lambda: app.results_version > 0, "first result")
            await pilot.pause()
            text = app.screen_text()
            for old in ("+ff", "fb+ff", "with ff", "P(feedforward", "Unstable plants"):
                assert old not in text, old
            for word in ("fbff", "P(harm) = ", "Unstable loops: fb 0, fbff 0",
                         "median: o fb, x fbff", "IAE ratio fbff/fb"):
                assert word in text, word
            row = app.query_one(f"#u-{field_id('process.time_constant')}")
            assert str(row.query_one(".udesc").render()) == "uniform 35 .. 60 s"
            row = app.query_one(f"#u-{field_id('disturbance.gain')}")
            assert "mean -1.8 degC per m3/h" in str(row.query_one(".udesc").render())

    asyncio.run(scenario())


def test_help_explains_the_terms_shown_and_fits_80_columns() -> None:
    for term in ("tau_c ", "Tt ", "Ms ", "CVaR90 ", "P(harm):", "fbff = feedback with feedforward",
                 "Ctrl+Z", "F9", "Escape  leave the field"):
        assert term in HELP_TEXT, term
    # the help box at 80 columns leaves 72 for the text: no line wraps
    assert max(len(line) for line in HELP_TEXT.splitlines()) <= 72
