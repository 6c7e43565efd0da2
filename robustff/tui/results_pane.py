"""The results pane: run status and progress, percentile table, risk of harm, unstable counts,
and the caution line, which is docked so it stays visible whatever is scrolled."""

from __future__ import annotations

import math

from rich.table import Table
from rich.text import Text
from textual.app import ComposeResult
from textual.containers import Vertical
from textual.widgets import ProgressBar, Static

from robustff import CAUTION
from robustff.tui.view import TABLE_PERCENTILES, StudyView

__all__ = ["ResultsPane", "StaleLine", "CautionLine", "MARKS", "percentile_table", "risk_text",
           "table_cell"]

#: Verdict marks: a symbol and a word, so nothing depends on colour.
MARKS = {"better": ("▼ better", "green"), "worse": ("▲ WORSE", "bold red"), "same": ("= same", "")}


def table_cell(value: float) -> str:
    """Three significant digits in at most 6 characters (the table fits 80 columns)."""
    if not math.isfinite(value):
        return "n/a"
    if 1e3 <= abs(value) < 1e5:
        return f"{value:.0f}"  # 1031 rather than 1.03e+03
    if abs(value) >= 1e5:
        mantissa, exponent = f"{value:.2e}".split("e")
        return f"{float(mantissa):.3g}e{int(exponent)}"  # 1.23e5
    return f"{value:.3g}"


def percentile_table(view: StudyView) -> Table:
    """fb vs fbff percentiles of IAE, peak deviation and valve travel, with a verdict column."""
    table = Table(box=None, padding=(0, 1, 0, 0), show_edge=False, header_style="bold")
    table.add_column("metric", no_wrap=True)
    table.add_column("arm", no_wrap=True)
    for p in TABLE_PERCENTILES:
        table.add_column(f"P{p:g}", justify="right", no_wrap=True)
    table.add_column("verdict", no_wrap=True)
    for row in view.rows:
        table.add_row(Text(row.label), "fb", *map(table_cell, row.fb), "")
        mark, style = MARKS[row.verdict]
        table.add_row(Text(f" [{row.unit}]"), "fbff", *map(table_cell, row.fbff), Text(mark, style))
    return table


def risk_text(view: StudyView) -> Text:
    """Probability that feedforward makes IAE worse, its 95 % interval, and unstable counts."""
    text = Text()
    if view.harm_probability is None:
        text.append("P(harm) (fbff IAE > fb IAE): no usable samples\n")
    else:
        low, high = view.harm_interval
        p = 100 * view.harm_probability
        style = "bold red" if p >= 5.0 else ""
        text.append("P(harm) = ")
        text.append(f"{p:.1f} %", style)
        text.append(f" of plants have a worse IAE with feedforward (95 % interval "
                    f"{100 * low:.1f}-{100 * high:.1f} %; {view.harm_count} of {view.harm_n})\n")
    warn = "  ⚠ check" if view.unstable_fb or view.unstable_fbff else ""
    text.append(f"Unstable loops: fb {view.unstable_fb}, fbff {view.unstable_fbff}{warn}")
    for line in (*view.design_lines, *view.compensator_lines, *view.margin_lines,
                 *view.driver_lines):
        text.append("\n" + line, "bold" if line.startswith("⚠") else "")
    return text


#: Shown until the first run reports: the simulator is compiled on the first start on a machine.
STARTING = ("Starting: loading the simulator. The first start on a machine compiles it "
            "(about 10-30 s, the screen may not respond meanwhile); later starts take 1-3 s.")


class ResultsPane(Vertical):
    """Shows the latest :class:`~robustff.tui.view.StudyView` the app hands down."""

    def compose(self) -> ComposeResult:
        yield Static(STARTING, id="run-status")
        yield ProgressBar(total=100, show_eta=False, id="run-progress")
        yield Static("", id="percentiles")
        yield Static("", id="risk")

    def show_status(self, text: str) -> None:
        """One line about the run in progress."""
        self.query_one("#run-status", Static).update(text)

    def show_progress(self, done: int, total: int) -> None:
        """Advance the progress bar (samples)."""
        self.query_one("#run-progress", ProgressBar).update(total=max(total, 1), progress=done)

    def show_view(self, view: StudyView) -> None:
        """Draw a finished pass."""
        self.query_one("#percentiles", Static).update(percentile_table(view))
        self.query_one("#risk", Static).update(risk_text(view))


class StaleLine(Static):
    """Docked above the results: why they do not belong to the case on screen (else hidden)."""

    def __init__(self) -> None:
        super().__init__("", id="stale")

    def show_reason(self, reason: str | None) -> None:
        """Show ``reason`` (the results are stale) or hide the line (None: they are current)."""
        self.update(f"⚠ STALE: {reason}" if reason else "")
        self.set_class(reason is not None, "shown")


class CautionLine(Static):
    """The model-based-estimate caution (always on screen).

    Shown in full until the first results have been seen, then folded to one sentence that
    still names the essentials; F9 (:meth:`toggle`) shows the full text again.
    """

    def __init__(self) -> None:
        super().__init__(f"⚠ {CAUTION}", id="caution")
        self.folded = False

    def fold(self, folded: bool = True) -> None:
        """Fold to the short caution (True) or show the full one (False)."""
        self.folded = folded
        self.update(f"⚠ {CAUTION_SHORT}" if folded else f"⚠ {CAUTION}")

    def toggle(self) -> None:
        """Switch between the short and the full caution."""
        self.fold(not self.folded)


#: The folded caution: the essentials of :data:`robustff.CAUTION` in one sentence.
CAUTION_SHORT = ("Caution: model-based estimates only;\n"
                 "commission under management-of-change (F9)")
