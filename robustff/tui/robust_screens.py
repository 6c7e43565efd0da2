"""Screens of the robust feedforward search: its progress, and nominal against robust settings.

The comparison is formatted from a :class:`~robustff.tune.search.RobustResult` (no numbers are
computed here): the verdict of ``robustff tune`` with its reason (harm probability and median
improvement of both designs against the case's ``[recommendation]``, and whether the winner is
clear of Monte Carlo noise), then the table. Every figure carries its label and unit in words,
nothing depends on colour.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from typing import TYPE_CHECKING

from rich.table import Table
from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical, VerticalScroll
from textual.markup import escape
from textual.screen import ModalScreen
from textual.widgets import Button, ProgressBar, Static

from robustff import CAUTION

if TYPE_CHECKING:
    from robustff.tune.search import RobustResult

__all__ = ["OBJECTIVE_CHOICES", "OBJECTIVE_WORDS", "RobustProgressScreen", "RobustResultScreen",
           "apply_label", "comparison_table", "searched_values"]

#: Keys and labels of the objective question (the first is the default).
OBJECTIVE_CHOICES: list[tuple[str, str]] = [("p", "P90 of IAE"), ("c", "CVaR"), ("h", "P(harm)")]
#: Key -> objective name of :func:`robustff.tune.search.robust_search`.
OBJECTIVE_KEYS = {"p": "p90", "c": "cvar", "h": "harm"}
#: What each objective minimises, in words.
OBJECTIVE_WORDS = {
    "p90": "P90 of IAE with feedforward",
    "cvar": "CVaR90 of IAE with feedforward (mean of the worst 10 %)",
    "harm": "probability that feedforward worsens IAE, with a median improvement",
}


def _number(value: float, digits: str = ".4g") -> str:
    return "unstable" if not math.isfinite(value) else format(value, digits)


def _percent(value: float | None) -> str:
    return "n/a" if value is None else f"{100 * value:.1f} %"


def searched_values(result: RobustResult) -> dict[str, float]:
    """The searched feedforward parameters of the robust settings (what applying writes)."""
    return {name: float(getattr(result.robust, name)) for name in result.space.names}


def comparison_table(result: RobustResult, time_unit: str, iae_unit: str) -> Table:
    """Nominal against robust: settings, P90 IAE on both sample sets, probability of harm.

    Parameters
    ----------
    result : robustff.tune.search.RobustResult
    time_unit : str
        The case's time unit (lead, lag and delay).
    iae_unit : str
        Unit of IAE for the case, e.g. ``degC*s``.
    """
    table = Table(box=None, padding=(0, 2, 0, 0), show_edge=False, header_style="bold")
    table.add_column("", no_wrap=True)
    table.add_column("nominal", justify="right", no_wrap=True)
    table.add_column("robust", justify="right", no_wrap=True)
    searched = set(result.space.names)
    for name, label in (("gain_factor", "gain factor"), ("lead", f"lead [{time_unit}]"),
                        ("lag", f"lag [{time_unit}]"), ("delay", f"delay [{time_unit}]")):
        mark = "" if name in searched else " (kept)"
        table.add_row(Text(label + mark), _number(getattr(result.nominal, name)),
                      _number(getattr(result.robust, name)))
    nominal, robust = result.figures["nominal"], result.figures["robust"]
    for key, label in (("optimisation", "optimisation"), ("fresh", "fresh")):
        table.add_row(Text(f"P90 IAE, {label} samples [{iae_unit}]"),
                      _number(nominal[key].iae_p90),
                      _number(robust[key].iae_p90))
    for key, label in (("optimisation", "optimisation"), ("fresh", "fresh")):
        table.add_row(f"P(harm), {label}", f"{100 * nominal[key].harm:.1f} %",
                      f"{100 * robust[key].harm:.1f} %")
    judged = result.verdict.designs
    table.add_row("P(harm) 95 % bound, fresh", *(_percent(judged[name]["harm_ci95"][1])
                                                 for name in ("nominal", "robust")))
    table.add_row("median IAE improvement, fresh",
                  *(_percent(judged[name]["improvement_p50"]) for name in ("nominal", "robust")))
    table.add_row("meets the criteria", *("yes" if judged[name]["passes"] else "no"
                                          for name in ("nominal", "robust")))
    if result.objective == "cvar":  # p90 and harm are rows above already
        table.add_row(Text(f"CVaR90 IAE, fresh [{iae_unit}]"), _number(nominal["fresh"].objective),
                      _number(result.objective_fresh))
    return table


class RobustProgressScreen(ModalScreen[None]):
    """Shown while the search runs; Escape calls ``stop`` (the app owns the worker).

    Parameters
    ----------
    text : str
        What is searched, in words.
    budget : int or None
        Most objective evaluations (None: not known until the search reports).
    stop : callable
        Asks the search to stop (it ends after the running evaluation).
    """

    BINDINGS = [Binding("escape", "stop", "Stop the search")]

    def __init__(self, text: str, budget: int | None, stop: Callable[[], None]) -> None:
        super().__init__()
        self.text = text
        self.budget = budget
        self.stop_search = stop

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog"):
            yield Static(self.text, classes="question", id="robust-what")
            yield ProgressBar(total=self.budget, show_eta=False, id="robust-progress")
            yield Static("Preparing the sample sets...", id="robust-state")
            yield Static("Escape: stop the search", classes="hint")

    def show_progress(self, done: int, budget: int) -> None:
        """One more objective evaluation finished."""
        self.query_one("#robust-progress", ProgressBar).update(total=budget, progress=done)
        self.query_one("#robust-state", Static).update(f"{done} of at most {budget} evaluations")

    def action_stop(self) -> None:
        self.query_one("#robust-state", Static).update("Stopping...")
        self.stop_search()


class RobustResultScreen(ModalScreen[bool]):
    """Nominal against robust settings; ``a`` applies (dismisses True), Escape keeps the case."""

    BINDINGS = [Binding("a", "apply", "Apply"), Binding("escape,k", "keep", "Keep current")]

    def __init__(self, result: RobustResult, time_unit: str, note: str,
                 iae_unit: str = "IAE units") -> None:
        super().__init__()
        self.result = result
        self.time_unit = time_unit
        self.iae_unit = iae_unit
        self.note = note

    def compose(self) -> ComposeResult:
        result = self.result
        head = (f"Robust feedforward, minimising {OBJECTIVE_WORDS[result.objective]}: "
                f"{result.evaluations_text}, re-checked on {result.samples} fresh ones.")
        with Vertical(classes="dialog", id="robust-dialog"):
            with VerticalScroll(id="robust-body"):
                yield Static(head, classes="question")
                # the verdict first: at 24 rows the table below may need scrolling
                yield Static(_recommendation(result), classes="hint",
                             id="robust-verdict")
                yield Static(comparison_table(result, self.time_unit, self.iae_unit),
                             id="robust-table")
                yield Static(f"{self.note}Optimisation figures flatter the winner (chosen on "
                             "those plants); compare the fresh ones.", classes="hint")
            yield Static(f"⚠ {CAUTION}", id="robust-caution")
            with Horizontal(classes="buttons"):
                yield Button(escape(apply_label(result)), id="robust-apply", compact=True)
                yield Button(escape("[k] keep current"), id="robust-keep", compact=True)

    def on_button_pressed(self, event: Button.Pressed) -> None:
        self.dismiss(event.button.id == "robust-apply")

    def action_apply(self) -> None:
        self.dismiss(True)

    def action_keep(self) -> None:
        self.dismiss(False)


def apply_label(result: RobustResult) -> str:
    """The apply button: plain when the verdict recommends the search's winner."""
    if result.recommended == "robust":
        return "[a] apply to the case"
    return "[a] apply anyway (not recommended)"


def _recommendation(result: RobustResult) -> str:
    """The verdict of ``robustff tune`` in brief (the figures are in the table below; the
    text carries its units, taken from the case as the studio's own are)."""
    return f"Verdict: {result.verdict.brief}"
