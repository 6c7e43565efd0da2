"""The allowed CV band on the band plot, a recorded trace chart, and the setpoint they follow."""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

import numpy as np
from three_feeds import write_three_feeds

from robustff.case import Event, load_case
from robustff.tui.charts import BAND_GLYPHS, TRACE_GLYPH, band_chart, trace_chart
from robustff.tui.disturbance_view import record_views, setpoint_profile


def _plot_rows(text: str) -> list[str]:
    return [line.split("│", 1)[1] for line in text.splitlines() if "│" in line]


def test_the_allowed_band_lines_sit_at_plus_and_minus_band_about_the_setpoint() -> None:
    times = np.linspace(0.0, 100.0, 50)
    bands = np.zeros((2, 3, times.size))
    bands[:, 0], bands[:, 2] = -0.2, 0.2  # the CV stays within +-0.2
    rows = _plot_rows(band_chart(times, bands, 44, 15, "T [degC]", "s", band=0.5).plain)
    limit = [row for row, line in enumerate(rows) if BAND_GLYPHS["limit"] in line]
    # the axis runs from -0.5 to 0.5 over 11 rows: the lines are the top and the bottom row,
    # drawn across the whole width (common practice, no source)
    assert limit == [0, len(rows) - 1]
    assert all(rows[row].count(BAND_GLYPHS["limit"]) == 36 for row in limit)
    text = band_chart(times, bands, 44, 15, "T [degC]", "s", band=0.5).plain
    assert "allowed band: setpoint +-0.5 degC" in text
    assert "allowed band" not in band_chart(times, bands, 44, 15, "T [degC]", "s").plain


def test_the_band_lines_follow_a_setpoint_step() -> None:
    times = np.linspace(0.0, 100.0, 101)
    setpoint = np.where(times >= 50.0, 1.0, 0.0)
    bands = np.repeat(setpoint[None, None, :], 3, axis=1).repeat(2, axis=0)
    rows = _plot_rows(band_chart(times, bands, 44, 15, "T [degC]", "s", band=0.25,
                                 setpoint=setpoint).plain)
    # before the step the lines are at -0.25 and 0.25, after it at 0.75 and 1.25: the top row
    # (1.25) holds the line only in the second half of the columns
    top = rows[0]
    assert BAND_GLYPHS["limit"] not in top[:18] and BAND_GLYPHS["limit"] in top[18:]
    bottom = rows[-1]  # -0.25, before the step only
    assert BAND_GLYPHS["limit"] in bottom[:18] and BAND_GLYPHS["limit"] not in bottom[19:]


def test_a_recorded_step_shows_where_it_happens() -> None:
    times = np.arange(0.0, 360.0, 1.0)
    values = np.where(times >= 120.0, 2.0, 0.0)  # a step a third of the way
    chart = trace_chart(times, values, 44, 10, "feed record", "m3/h", "s").plain
    rows = _plot_rows(chart)
    top, zero = rows[0], rows[-1]
    # 36 columns: column k holds times k*10 .. k*10+10 s; the step at 120 s is column 12
    assert top.index(TRACE_GLYPH) == 12 and top.count(TRACE_GLYPH) == 24
    assert zero.startswith(TRACE_GLYPH * 12)
    assert "m3/h" in chart and "0 .. 359 s" in chart


def test_a_record_is_drawn_from_its_event_start_and_the_setpoint_adds_its_steps(
        tmp_path: Path) -> None:
    case = load_case(write_three_feeds(tmp_path, record=True))
    (view,) = record_views(case)
    event = next(e for e in case.events if e.record is not None)
    np.testing.assert_array_equal(view.times, event.at + event.record.times)
    assert view.unit == "m3/h" and "feed_flow" in view.title and "first value" in view.title
    assert not setpoint_profile(case, np.array([0.0, 500.0])).any()  # no setpoint step
    steps = (Event("setpoint-step", 50.0, 1.5), Event("setpoint-step", 80.0, -0.5))
    stepped = replace(case, events=case.events + steps)
    np.testing.assert_array_equal(setpoint_profile(stepped, np.array([0.0, 50.0, 79.0, 90.0])),
                                  [0.0, 1.5, 1.5, 1.0])
