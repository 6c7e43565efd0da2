"""The studio's results per disturbance at 80x24: the compensators, where in frequency
feedforward helps (error-ratio bands, the crossover), a recorded trace and the allowed band."""

from __future__ import annotations

import asyncio
from pathlib import Path

import numpy as np
import pytest

textual = pytest.importorskip("textual")

from harm_case import matched_case_text  # noqa: E402
from studio_pilot import studio, wait_until  # noqa: E402
from textual.widgets import Static  # noqa: E402
from three_feeds import write_three_feeds  # noqa: E402

from robustff.tui.frequency_chart import FREQUENCY_GLYPHS, frequency_chart  # noqa: E402


def _plain(widget: Static) -> str:
    return str(widget.render())


async def _full_result(pilot: object, app: object) -> None:
    await wait_until(pilot, lambda: app.last_view is not None  # type: ignore[attr-defined]
                     and not app.last_view.quick, "full run")  # type: ignore[attr-defined]
    await pilot.pause()  # type: ignore[attr-defined]


def test_the_results_show_each_compensator_record_band_and_frequency_view(
        tmp_path: Path) -> None:
    kettle = write_three_feeds(tmp_path, record=True, band=0.3)

    async def scenario() -> None:
        app = studio(kettle, tmp_path / "cache", samples=200)
        async with app.run_test(size=(80, 24)) as pilot:
            await _full_result(pilot, app)
            risk = _plain(app.query_one("#risk", Static))
            assert "Feedforward from feed_flow (lead-lag): gain = " in risk
            assert "Feedforward from feed_temperature (static)" in risk
            assert "Feedforward from solids: none (not measured)" in risk
            records = app.query_one("#records", Static)
            assert records.display and "feed_flow record feed-flow.csv" in _plain(records)
            assert "m3/h" in _plain(records)
            band = _plain(app.query_one("#band", Static))
            assert "allowed band: setpoint +-0.3 degC" in band and "╌" in band
            frequency = app.query_one("#frequency", Static)
            text = _plain(frequency)
            assert "Where feedforward helps: feed_flow" in text
            assert "Where feedforward helps: feed_temperature" in text
            assert "solids" not in text  # not measured: no feedforward, no ratio
            assert "of the recorded trace's variance lies there" in text  # feed_flow's record
            assert FREQUENCY_GLYPHS["crossover"] in text
            # the charts fit the pane: no chart line is wider than the widget
            width = frequency.content_region.width
            chart_lines = [line for line in text.splitlines() if "│" in line or "└" in line]
            assert chart_lines and max(len(line) for line in chart_lines) <= width
            # and they are on screen when scrolled to, at 80x24
            scroll = app.query_one("#results-scroll")
            scroll.scroll_to_widget(frequency, animate=False, top=True)
            await pilot.pause()
            assert "Where feedforward helps: feed_flow" in app.screen_text()

    asyncio.run(scenario())


def test_the_frequency_view_shows_the_analytic_ratio_of_matched_paths(tmp_path: Path) -> None:
    # Matched process and disturbance paths (same lag and dead time), no transmitter lag and a
    # static feedforward of gain factor 1 designed for Kd0 = 1: a plant with disturbance gain
    # Kd has the error ratio |1 + Kp Kff / Kd| = |1 - Kd0 / Kd| = 1 - 1/Kd at every frequency
    # (for Kd > 1). With Kd uniform on [1.2, 3.0] the ratio's percentiles are those of Kd
    # mapped through 1 - 1/Kd (monotonic): P50 = 1 - 1/2.1, P5 = 1 - 1/1.29, P95 = 1 - 1/2.91.
    # Source: the error-ratio formula |1 + Gp Gff Gm / Gd| with Gff = -Gd/Gp designed from the
    # nominal models (Seborg, Edgar, Mellichamp and Doyle, "Process Dynamics and Control",
    # 4th ed., 2016, ch. 15, from memory); the percentiles of a uniform distribution.
    path = tmp_path / "matched.toml"
    path.write_text(matched_case_text(title="matched paths", kd0=1.0, kd_low=1.2, kd_high=3.0,
                                      duration=200.0, event_at=10.0,
                                      study="samples = 400\nseed = 3"))

    async def scenario() -> None:
        app = studio(path, tmp_path / "cache", samples=400)
        async with app.run_test(size=(80, 24)) as pilot:
            await _full_result(pilot, app)
            (found,) = app.last_view.frequencies
            for key, kd in (("p5", 1.29), ("p50", 2.1), ("p95", 2.91)):
                np.testing.assert_allclose(found.bands[key], 1.0 - 1.0 / kd, rtol=0.02)
            assert "at every frequency up to the scan's Nyquist frequency" in found.words
            text = _plain(app.query_one("#frequency", Static))
            plot = [line.split("│", 1)[1] for line in text.splitlines() if "│" in line]
            # it helps everywhere: no crossover bar
            assert not any(FREQUENCY_GLYPHS["crossover"] in line for line in plot)
            # the median is drawn on the row of 1 - 1/2.1 = 0.524 in every column: on the axis
            # 0 .. 1.5 (the ceiling above P95 = 0.66) over 9 rows that is row round(5.21) = 5
            lines = text.splitlines()
            chart = lines[lines.index(next(line for line in lines if "Where feedforward" in line))
                          + 1:][:9]
            median_rows = {row for row, line in enumerate(chart)
                           if FREQUENCY_GLYPHS["median"] in line.split("│", 1)[1]}
            assert median_rows == {5}

    asyncio.run(scenario())


def test_the_crossover_bar_sits_at_its_frequency_on_the_log_axis() -> None:
    # 1 .. 1000 rad/s over 36 columns: 10 rad/s is a third of the way along the log axis
    # (log10 10 = 1 of 3 decades), column round(35 / 3) = 12 (common practice, no source)
    omega = np.geomspace(1.0, 1000.0, 50)
    ratio = np.where(omega < 10.0, 0.2, 1.8)
    bands = {"p5": ratio * 0.8, "p50": ratio, "p95": ratio * 1.1}
    chart = frequency_chart(omega, bands, 10.0, 44, 14, "test", "s").plain.splitlines()
    plot = [line.split("│", 1)[1] for line in chart[1:10]]
    columns = {line.index(FREQUENCY_GLYPHS["crossover"]) for line in plot
               if FREQUENCY_GLYPHS["crossover"] in line}
    assert columns == {12}
    ticks = chart[11]
    assert ticks.index("10") == 8 + 12  # the crossover's value under its bar
