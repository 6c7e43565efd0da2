"""At 80x24 nothing is clipped: the footer's words, the feedforward structure, the histogram's
1.0 label; the caution folds to one sentence after the first results (F9 shows it in full);
clip bounds are offered only on rows whose distribution accepts them."""

from __future__ import annotations

import asyncio
import math
import shutil
from pathlib import Path

import numpy as np
import pytest

from robustff import CAUTION
from robustff.demo import demo_case_path

textual = pytest.importorskip("textual")

from studio_pilot import studio, wait_until  # noqa: E402
from textual.widgets import Select  # noqa: E402

from robustff.tui.charts import histogram_chart  # noqa: E402
from robustff.tui.messages import field_id  # noqa: E402


def test_nothing_is_clipped_at_80x24_and_the_caution_folds(case_file: Path,
                                                           tmp_path: Path) -> None:
    async def scenario() -> None:
        app = studio(case_file, tmp_path / "cache")
        async with app.run_test(size=(80, 24)) as pilot:
            caution = app.query_one("#caution")
            assert caution.region.height >= 5  # in full before the first results
            await wait_until(pilot, lambda: app.results_version > 0, "first result")
            await pilot.pause()
            lines = app.screen_text().splitlines()
            footer = lines[-1]
            for word in ("Quit", "Help", "Save", "Export", "Undo", "Rerun", "Robust", "Fit"):
                assert f" {word}" in footer, (word, footer)
            assert caution.region.height <= 3  # a border line and the folded sentence
            text = app.screen_text()
            assert "model-based estimates" in text and "management-of-change" in text
            await pilot.press("f9")
            await pilot.pause()
            assert caution.region.height >= 5
            assert str(caution.render()) == f"⚠ {CAUTION}"
            structure = app.query_one(f"#in-{field_id('feedforward.structure')}", Select)
            structure.focus()
            await pilot.pause()
            assert structure.value == "lead-lag-delay"
            assert "lead-lag-delay" in app.screen_text()  # shown uncut
            clip = {row.key: row.query_one(".uclip").display
                    for row in app.query(".urow")}
            assert clip == {"process.gain": False, "process.time_constant": False,
                            "process.dead_time": False, "disturbance.gain": True,
                            "disturbance.time_constant": True, "sensor.time_constant": False}

    asyncio.run(scenario())


def test_the_histograms_one_label_is_never_cut() -> None:
    # feedforward better on every plant: the 1.0 marker sits in the last column
    ratio = np.random.default_rng(5).uniform(0.2, 0.99, size=400)
    for width in (30, 36, 44):
        lines = histogram_chart(ratio, width, 11).plain.splitlines()
        ticks, legend = lines[-2], lines[-1]
        assert "1.0" in ticks, (width, ticks)
        assert len(ticks) <= width and len(legend) <= width
        assert "better" in legend and "worse" in legend and legend.rstrip().endswith("▶")


def test_adding_a_parameter_lists_every_candidate_in_a_dialog(case_file: Path,
                                                                tmp_path: Path) -> None:
    from studio_pilot import burst, keys_handled
    from textual.widgets import Button, OptionList

    from robustff.tui.dialogs import ListScreen
    from robustff.tui.editing import uncertain_candidates

    async def scenario() -> None:
        app = studio(case_file, tmp_path / "cache", live=False)
        async with app.run_test(size=(80, 24)) as pilot:
            await pilot.pause()
            candidates = uncertain_candidates(app.case)
            app.query_one("#add-row", Button).focus()
            await pilot.pause()
            burst(app, "<enter>")
            await keys_handled(pilot, app)
            assert isinstance(app.screen, ListScreen)
            options = app.screen.query_one(OptionList)
            # every candidate on screen at once, clear of the footer (the last line)
            assert options.option_count == len(candidates)
            assert options.region.height >= len(candidates) and options.region.bottom <= 23
            for key in candidates:
                assert key in app.screen_text(), key
            burst(app, "<down><enter>")
            await keys_handled(pilot, app)
            await wait_until(pilot, lambda: not app.workers, "panes rebuilt")
            assert app.case.uncertainty[-1].key == candidates[1]
            assert app.query_one(f"#u-{field_id(candidates[1])}")

    asyncio.run(scenario())


def test_table_cells_stay_short() -> None:
    from robustff.tui.results_pane import table_cell

    cells = {0.000123: "0.000123", 0.5: "0.5", 87.44: "87.4", 1031.4: "1031", 86912.0: "86912",
             123456.0: "1.23e5", -2.5e7: "-2.5e7", float("inf"): "n/a"}
    for value, text in cells.items():
        assert table_cell(value) == text and len(text) <= 8
        if math.isfinite(value):  # three significant digits at least
            assert float(text) == pytest.approx(value, rel=5e-3)



@pytest.mark.parametrize("demo", ["wash-water-heater", "steam-heater-sticky-valve",
                                  "pasteuriser-tempering-tank"])
def test_every_field_label_keeps_a_space_and_case_keys_show_as_typed(demo: str,
                                                                    tmp_path: Path) -> None:
    # "characteristic" ran into its value ("characteristnone"), and "[secondary]" was read as
    # markup and vanished from "add [secondary] in the case file".
    source = demo_case_path(demo)
    folder = shutil.copytree(source.parent, tmp_path / "demo")  # with its recorded traces
    case_file = Path(folder) / source.name

    async def scenario() -> None:
        app = studio(case_file, tmp_path / "cache")
        async with app.run_test(size=(160, 50)) as pilot:
            await pilot.pause()
            labels = list(app.query(".field-label"))
            assert len(labels) > 20
            for label in labels:
                text = str(label.render()).rstrip()
                assert len(text) < label.region.width, (text, label.region.width)
            section = [str(widget.render()) for widget in app.query(".section")]
            if app.case.secondary is None:
                assert "Secondary loop: none (add [secondary] in the case file)" in section

    asyncio.run(scenario())
