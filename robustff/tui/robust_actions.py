"""The robust feedforward search from the studio (a mixin of the app).

F6 asks for the objective, runs :func:`robustff.tune.search.robust_search` (the same search as
``robustff tune``) in a thread worker with a progress screen, then shows nominal against robust
settings and offers to write the searched values into the case's ``[feedforward]``. The search
checks a stop flag after each objective evaluation (its progress callback raises to stop).
"""

from __future__ import annotations

import threading
from dataclasses import replace
from typing import TYPE_CHECKING

from textual import work

from robustff.case import Case
from robustff.errors import CaseError, RobustffError
from robustff.tui import editing
from robustff.tui.dialogs import ChoiceScreen
from robustff.tui.host import StudioHost
from robustff.tui.robust_screens import (
    OBJECTIVE_CHOICES,
    OBJECTIVE_KEYS,
    OBJECTIVE_WORDS,
    RobustProgressScreen,
    RobustResultScreen,
    searched_values,
)

if TYPE_CHECKING:
    from robustff.tune.search import RobustResult

__all__ = ["RobustActions", "ROBUST_SAMPLES", "robust_sample_count", "with_robust_settings"]

#: The studio searches on at most this many plants (``robustff tune`` uses the case's count).
ROBUST_SAMPLES = 1000


class _Stopped(Exception):
    """Raised from the progress callback to end a search the user stopped."""


def robust_sample_count(case: Case) -> int:
    """Plants per sample set of a search started in the studio."""
    return min(case.study.samples, ROBUST_SAMPLES)


def with_robust_settings(case: Case, result: RobustResult) -> Case:
    """The case with the searched feedforward values of ``result`` (validated by the loader).

    Raises
    ------
    CaseError
        When the loader refuses the values.
    """
    values = searched_values(result)  # only the searched ones: the others keep the case's value
    old = case.feedforward
    feedforward = replace(old, gain_factor=values.get("gain_factor", old.gain_factor),
                          lead=values.get("lead", old.lead), lag=values.get("lag", old.lag),
                          delay=values.get("delay", old.delay))
    return editing.validated(replace(case, feedforward=feedforward))


class RobustActions(StudioHost):
    """Robust search actions; mixed into :class:`robustff.tui.app.StudioApp`."""

    #: Optimiser budget of studio searches (None: the search's default; tests set a small one).
    robust_budget: int | None = None
    _robust_stop: threading.Event | None = None
    _robust_screen: RobustProgressScreen | None = None

    def action_robust(self) -> None:
        if self._robust_screen is not None:
            return  # one search at a time
        question = ("Search robust feedforward settings (the search of 'robustff tune').\n"
                    "Minimise which objective? (P90: 90th percentile of IAE with feedforward; "
                    "CVaR: mean of its worst 10 %; P(harm): probability that feedforward "
                    "worsens IAE, with a median gain.)  Escape: cancel")
        self.push_screen(ChoiceScreen(question, OBJECTIVE_CHOICES), self._objective_chosen)

    def _objective_chosen(self, key: str | None) -> None:
        objective = OBJECTIVE_KEYS.get(key or "")
        if objective is None:
            return
        case = self.case
        samples = robust_sample_count(case)
        self._robust_stop = threading.Event()
        self._robust_screen = RobustProgressScreen(
            f"Searching: {OBJECTIVE_WORDS[objective]}, {samples} plants"
            + (f" (of the case's {case.study.samples})" if samples < case.study.samples else ""),
            self.robust_budget, self.stop_robust)
        self.push_screen(self._robust_screen)
        self._robust(case, objective, samples, self._robust_stop)

    def stop_robust(self) -> None:
        """Stop the running search (from its progress screen)."""
        if self._robust_stop is not None:
            self._robust_stop.set()

    @work(thread=True, exclusive=True, group="robust", exit_on_error=False)
    def _robust(self, case: Case, objective: str, samples: int, stop: threading.Event) -> None:
        from robustff.tune.search import robust_search

        def progress(done: int, budget: int) -> None:
            if stop.is_set():
                raise _Stopped
            self._from_thread(self._robust_progress, done, budget)

        try:
            result = robust_search(case, objective=objective, samples=samples,
                                   max_evaluations=self.robust_budget, progress=progress)
        except _Stopped:
            self._from_thread(self._robust_finished, case, None, "robust search stopped")
            return
        except (RobustffError, ArithmeticError, ValueError) as exc:
            self._from_thread(self._robust_finished, case, None, f"robust search failed: {exc}")
            return
        if stop.is_set():
            self._from_thread(self._robust_finished, case, None, "robust search stopped")
            return
        self._from_thread(self._robust_finished, case, result, None)

    def _robust_progress(self, done: int, budget: int) -> None:
        if self._robust_screen is not None:
            self._robust_screen.show_progress(done, budget)

    def _robust_finished(self, case: Case, result: RobustResult | None,
                         problem: str | None) -> None:
        if self._robust_screen is not None:
            self._robust_screen.dismiss(None)
        self._robust_screen = self._robust_stop = None
        if result is None:
            self.notify(problem or "robust search stopped", severity="warning", timeout=8)
            return
        note = ""
        if result.samples < case.study.samples:
            note = (f"Searched on {result.samples} of the case's {case.study.samples} plants "
                    "(quicker; 'robustff tune' uses all). ")
        from robustff.engine.metrics import METRIC_UNITS

        signals = case.signals
        iae_unit = METRIC_UNITS["iae"].format(cv=signals.controlled.unit or "CV",
                                              u=signals.output.unit or "output",
                                              t=case.time_unit)
        self.push_screen(RobustResultScreen(result, case.time_unit, note, iae_unit),
                         lambda apply: self._apply_robust(case, result) if apply else None)

    def _apply_robust(self, searched: Case, result: RobustResult) -> None:
        if self.case != searched:
            self.notify("the case changed since the search; not applied", severity="warning")
            return
        try:
            case = with_robust_settings(self.case, result)
        except CaseError as exc:
            self.notify(f"not applied: {exc}", severity="error", timeout=8)
            return
        values = ", ".join(f"{name} {value:.4g}" for name, value in searched_values(result).items())
        self.accept_edit(case, rebuild=True, what="the robust feedforward")
        against = ("" if result.recommended == "robust"
                   else ", against the verdict (see the robust search's reason)")
        self.notify(f"robust feedforward applied ({values}){against}; Ctrl+S saves it")
