"""The studio app: one screen, the case editor on the left, live results on the right.

Data flows one way: panes post edit messages up, the app turns them into a new validated
:class:`~robustff.case.Case` (:mod:`robustff.tui.editing`), autosaves it, and restarts the study
in a thread worker; finished passes come back through ``call_from_thread`` as a
:class:`~robustff.tui.view.StudyView` that the app hands down to the panes.
"""

from __future__ import annotations

import threading
import time
from collections.abc import Callable, Iterable
from dataclasses import replace
from functools import partial
from pathlib import Path
from typing import TYPE_CHECKING

from textual import work
from textual.app import App, ComposeResult, SystemCommand
from textual.binding import Binding
from textual.containers import Horizontal, Vertical
from textual.screen import Screen
from textual.widgets import Footer, Header

from robustff.case import Case, UncertainParameter
from robustff.errors import CaseError, RobustffError
from robustff.tui import editing
from robustff.tui.dialogs import ChoiceScreen
from robustff.tui.disturbance_actions import DisturbanceActions
from robustff.tui.disturbance_edits import is_setting
from robustff.tui.file_actions import FileActions
from robustff.tui.fit_actions import FitActions
from robustff.tui.key_order import KeyOrder
from robustff.tui.loop_fields import feedback_fields, secondary_fields
from robustff.tui.messages import (
    DistributionEdited,
    FieldEdited,
    KindChanged,
    RangeFixAsked,
    RowAdded,
    RowRemoved,
    field_id,
)
from robustff.tui.models_pane import FieldRow, ModelsPane
from robustff.tui.pictures import PicturesPane
from robustff.tui.results_pane import STARTING, CautionLine, ResultsPane, StaleLine
from robustff.tui.robust_actions import RobustActions
from robustff.tui.scroll_pane import ScrollPane
from robustff.tui.uncertainty_pane import UncertainRow, UncertaintyPane
from robustff.tui.undo import UndoActions
from robustff.tui.view import StudyView

if TYPE_CHECKING:
    from robustff.study import StudyResult
    from robustff.study.summary_types import Summary

__all__ = ["StudioApp", "QUICK_SAMPLES"]

#: Samples of the quick first pass after an edit.
QUICK_SAMPLES = 500
#: Shown instead of the stability margins until the full pass has computed them.
MARGINS_PENDING = "Margins: computed with the full run..."
#: Edits after which the pane has other rows (the controller's form and structure, the rule).
_ROW_SETS = frozenset({"feedback.tuning", "feedback.form", "feedback.structure"})


class StudioApp(KeyOrder, UndoActions, FileActions, RobustActions, FitActions,
                DisturbanceActions, App[None]):
    """Edit a case and watch the feedforward risk move.

    Parameters
    ----------
    case_path : Path
        The case file (a bundled demo case is saved elsewhere: save asks for a path).
    case : Case, optional
        Use this case instead of loading ``case_path`` (tests set a small sample count).
    recovery_folder : Path, optional
        Fallback folder of recovery files (default ``~/.cache/robustff``).
    live : bool
        False runs no study (editing and files only; for tests that need no results).
    """

    CSS_PATH = "studio.tcss"
    TITLE = "robustff studio"
    #: Priority bindings: they work whatever has focus (a text field does not swallow
    #: Ctrl+E or Ctrl+Z); while a dialog is open :meth:`check_action` passes the key on to it.
    BINDINGS = [
        Binding("f1", "help", "Help", priority=True),
        Binding("question_mark", "help", "Help", show=False),
        Binding("ctrl+s", "save", "Save", priority=True),
        Binding("f2", "save_as", "Save as", priority=True, show=False),
        Binding("ctrl+e", "export", "Export", priority=True),
        Binding("ctrl+z", "undo", "Undo", priority=True),
        Binding("ctrl+r", "reload", "Reload", priority=True),
        Binding("f5", "rerun", "Rerun", priority=True),
        Binding("f6", "robust", "Robust", priority=True),
        Binding("f7", "fit_data", "Fit", priority=True),
        Binding("f8", "add_disturbance", "Add disturbance", priority=True, show=False),
        Binding("escape", "leave_field", "Leave field", show=False),
        Binding("f9", "caution", "Caution", show=False, priority=True),
        Binding("ctrl+q", "quit", "Quit", priority=True),
    ]
    #: The studio's own actions (footer and command palette): title, what it does.
    COMMANDS_TEXT: dict[str, tuple[str, str]] = {
        "help": ("Help", "keys and how to read the results (F1)"),
        "save": ("Save", "save the case to its file (Ctrl+S)"),
        "save_as": ("Save as", "save the case to another file (F2)"),
        "export": ("Export results", "write the result files of the full run (Ctrl+E)"),
        "undo": ("Undo", "undo the last applied edit, deletions included (Ctrl+Z)"),
        "reload": ("Reload", "reload the case from its file (Ctrl+R)"),
        "rerun": ("Rerun", "run the study again (F5)"),
        "robust": ("Robust feedforward", "search feedforward settings robust to the "
                                         "uncertainty (F6)"),
        "fit_data": ("Fit data", "fit a model to a bump test (F7)"),
        "add_disturbance": ("Add a disturbance", "one more disturbance to the CV, measured or "
                                                 "not (F8)"),
        "caution": ("Caution", "show the full caution, or fold it to one sentence (F9)"),
    }

    def __init__(self, case_path: Path, case: Case | None = None,
                 recovery_folder: Path | None = None, live: bool = True) -> None:
        super().__init__()
        self.live = live
        self.init_key_order()
        self.init_undo()
        self.init_files(case_path, case, recovery_folder)
        self.results_version = 0
        #: The case the results on screen belong to, and why the latest run of the case on
        #: screen failed (None when it did not).
        self.results_case: Case | None = None
        self.run_failure: str | None = None
        self.last_view: StudyView | None = None
        self.last_result: StudyResult | None = None
        self.last_summary: Summary | None = None
        #: (perf_counter time, quick) of each result handed to the panes (for the benchmark).
        self.result_log: list[tuple[float, bool]] = []
        self._generation = 0
        self._cancel = threading.Event()

    # --- layout -------------------------------------------------------------------------

    def compose(self) -> ComposeResult:
        yield Header(show_clock=False)
        with Horizontal(id="main"):
            with ScrollPane(id="editor"):
                yield ModelsPane(self.case, id="models")
                yield UncertaintyPane(self.case, id="uncertainty")
            with Vertical(id="right"):
                yield StaleLine()
                with ScrollPane(id="results-scroll"):
                    yield ResultsPane(id="results")
                    yield PicturesPane(id="pictures")
                yield CautionLine()
        yield Footer(compact=True, show_command_palette=False)

    def on_mount(self) -> None:
        self.refresh_title()
        self.show_design()
        self.offer_recovery()
        # The first run imports and loads the compiled simulator, which holds the GIL for a
        # while: start it once the first frame is drawn so the screen appears at once.
        self.call_after_refresh(self.start_run)

    # --- keys and commands -----------------------------------------------------------------

    def check_action(self, action: str, parameters: tuple[object, ...]) -> bool | None:
        """The studio's actions belong to the main screen: in a dialog its keys are its own."""
        if action in self.COMMANDS_TEXT or action == "leave_field":
            return self.screen is self.screen_stack[0]
        return True

    def action_caution(self) -> None:
        self.query_one(CautionLine).toggle()

    def action_leave_field(self) -> None:
        """Escape: leave the text field or list (what was typed is applied as on Tab)."""
        self.set_focus(None)

    def get_system_commands(self, screen: Screen[object]) -> Iterable[SystemCommand]:
        yield from super().get_system_commands(screen)
        if screen is not self.screen_stack[0]:
            return
        for action, (title, text) in self.COMMANDS_TEXT.items():
            yield SystemCommand(title, text, partial(self.run_action, action))

    # --- edits ------------------------------------------------------------------------------

    def on_field_edited(self, message: FieldEdited) -> None:
        if is_setting(self.case, message.field):  # a named disturbance's name, unit, measured
            self.edit_disturbance_setting(message)
            return
        row = self.query_one(ModelsPane).row(message.field)
        try:
            case = editing.edit_field(self.case, message.field, message.text)
        except CaseError as exc:
            row.show_result(_reason(exc), message.text)
            self.refresh_staleness()
            return
        row.show_result(None, message.text)
        rebuild = message.field in _ROW_SETS
        self.accept_edit(case, rebuild=rebuild, what=f"{message.field} = {message.text.strip()}")
        pane = self.query_one(ModelsPane)
        if rebuild:
            pass  # the new rows show the new values
        elif message.field.startswith("valve."):  # a valve added, removed or of another kind
            pane.show_values(case, editing.VALVE_FIELDS)
        elif message.field.startswith("secondary."):  # manual settings filled or cleared
            pane.show_values(case, secondary_fields(case))
        elif message.field.startswith("feedback."):  # the other spelling of a setting cleared
            pane.show_values(case, feedback_fields(case))

    def on_distribution_edited(self, message: DistributionEdited) -> None:
        pane = self.query_one(UncertaintyPane)
        try:
            case = editing.edit_distribution(self.case, message.key, message.kind,
                                             message.params, message.clip)
        except CaseError as exc:
            pane.row(message.key).show_result(self.case, _reason(exc))
            self.refresh_staleness()
            return
        pane.row(message.key).show_result(case, None)
        self.accept_edit(case, what=f"the range of {message.key}")

    def on_kind_changed(self, message: KindChanged) -> None:
        pane = self.query_one(UncertaintyPane)
        try:
            distribution = editing.convert_distribution(self.case, message.key, message.kind)
            case = editing.edit_distribution(
                self.case, message.key, message.kind, editing.params_text(distribution),
                editing.clip_text(distribution))
        except CaseError as exc:
            pane.row(message.key).show_result(self.case, _reason(exc))
            return
        pane.row(message.key).show_result(case, None)
        self.accept_edit(case, what=f"{message.key} made {message.kind}")

    def on_row_added(self, message: RowAdded) -> None:
        self._table_edit(lambda: editing.add_uncertain(self.case, message.key),
                         f"add uncertain {message.key}")

    def on_row_removed(self, message: RowRemoved) -> None:
        self._table_edit(lambda: editing.remove_uncertain(self.case, message.key),
                         f"remove uncertain {message.key}")
        if message.key not in {row.key for row in self.case.uncertainty}:
            self.notify(f"removed the uncertainty of {message.key}; Ctrl+Z brings it back")

    def _table_edit(self, make: Callable[[], Case], what: str) -> None:
        try:
            case = make()
        except CaseError as exc:
            self.query_one(UncertaintyPane).show_table_error(_reason(exc))
            return
        self.accept_edit(case, rebuild=True, what=what)

    def accept_edit(self, case: Case, rebuild: bool = False, what: str = "the last edit") -> None:
        """Make ``case`` current: keep the old one for undo (Ctrl+Z undoes ``what``),
        autosave, refresh the design, restart the study."""
        self.remember(what)
        self.case = case
        self.autosave()
        self.refresh_title()
        if rebuild:
            self.rebuild_panes()  # shows the design once the new rows are there
        else:
            self.show_design()
        self.start_run()

    def rebuild_panes(self, focus: str | None = None) -> None:
        """Recompose the editor panes from the current case (rows added, reload, restore);
        the focus goes to ``focus`` (a field such as ``"disturbance.feed.gain"``) when given
        and shown, else stays on the widget that had it."""
        focused = (f"in-{field_id(focus)}" if focus else
                   self.focused.id if self.focused is not None else None)

        async def rebuild() -> None:
            for pane in (self.query_one(ModelsPane), self.query_one(UncertaintyPane)):
                pane.case = self.case
                await pane.recompose()
            self.show_design()  # the new widgets start blank
            found = self.query(f"#{focused}") if focused else None
            if found:  # keep the user's place in the pane (the rebuild moved focus)
                widget = found.first()
                self.set_focus(widget, scroll_visible=False)
                # scrolled to once laid out (a widget just mounted has no place yet)
                self.call_after_refresh(widget.scroll_visible, animate=False)

        # A worker (its own task): awaiting the new widgets' mounting from one of the app's
        # own messages would hold the app's queue that the mounting goes through.
        self.run_worker(rebuild(), group="rebuild", exit_on_error=False)

    def show_design(self) -> None:
        """Show the nominal design and the case review's warnings next to what they concern."""
        from robustff.design.case_review import nominal_outside_range, review_case

        try:
            review = review_case(self.case)
        except (RobustffError, ArithmeticError) as exc:
            self.query_one(ModelsPane).show_design([f"✗ design: {exc}"], {})
            self.query_one(UncertaintyPane).show_warnings(self.case, {})
            return
        from robustff.design.installed_loop import installed_loop_lines

        lines = review.design.summary_lines(self.case)
        # The valve and the secondary loop, as check prints them.
        lines += [line.strip() for line in installed_loop_lines(self.case, review.design)[1:]]
        lines += [f"✗ {finding.text()}" for finding in review.errors]
        fields: dict[str, str] = {}
        ranges: dict[str, str] = {}
        fields_shown = {row.field for row in self.query(FieldRow)}
        for finding in review.warnings:
            if finding.key.startswith("uncertainty."):
                key = finding.key.removeprefix("uncertainty.")
                ranges[key] = _joined(ranges.get(key), finding.message)
            elif finding.key in fields_shown:
                fields[finding.key] = _joined(fields.get(finding.key), finding.message)
            else:
                lines.append(f"⚠ {finding.text()}")
        for parameter in self.case.uncertainty:
            if parameter.key in fields_shown and nominal_outside_range(self.case, parameter):
                fields[parameter.key] = _joined(fields.get(parameter.key),
                                                _outside_note(self.case, parameter))
        self.query_one(ModelsPane).show_design(lines, fields)
        self.query_one(UncertaintyPane).show_warnings(self.case, ranges)

    def on_range_fix_asked(self, message: RangeFixAsked) -> None:
        key = message.key
        nominal = self.case.nominal_value(key)
        question = (f"The nominal {key} = {nominal:g} {self.case.parameter_unit(key)} is outside "
                    "its uncertainty range. Change the range?")

        def answer(choice: str | None) -> None:
            change = {"w": editing.widen_to_nominal, "m": editing.move_to_nominal}.get(choice or "")
            if change is not None:
                self._range_edit(key, lambda: change(self.case, key))

        self.push_screen(ChoiceScreen(question, [("w", "widen it to the nominal"),
                                                 ("m", "move it onto the nominal"),
                                                 ("c", "cancel")]), answer)

    def _range_edit(self, key: str, make: Callable[[], Case]) -> None:
        pane = self.query_one(UncertaintyPane)
        try:
            case = make()
        except CaseError as exc:
            pane.row(key).show_result(self.case, _reason(exc))
            return
        pane.row(key).show_result(case, None)
        self.accept_edit(case, what=f"the range fix of {key}")

    # --- runs ---------------------------------------------------------------------------------

    def action_rerun(self) -> None:
        self.start_run()

    def start_run(self) -> None:
        """Cancel the running study (if any) and start a new one on the current case."""
        if not self.live:
            return
        self._cancel.set()
        self._cancel = threading.Event()
        self._generation += 1
        self.run_failure = None
        self.refresh_staleness()
        results = self.query_one(ResultsPane)
        results.show_status("Running a quick pass..." if self.results_version else STARTING)
        results.show_progress(0, self.case.study.samples)
        self._study(self.case, self._generation, self._cancel)

    @work(thread=True, exclusive=True, group="study", exit_on_error=False)
    def _study(self, case: Case, generation: int, cancel: threading.Event) -> None:
        from robustff.stats import DEFAULT_PERCENTILES
        from robustff.study import run_study
        from robustff.study.summary import summarize_study
        from robustff.tui.view import build_view

        total = case.study.samples
        passes = [(min(QUICK_SAMPLES, total), total <= QUICK_SAMPLES)]
        if total > QUICK_SAMPLES:
            passes.append((total, True))
        for samples, last in passes:
            def progress(done: int, of: int) -> None:
                self._from_thread(self._on_progress, generation, done, of)

            try:
                # The stability margins cost about as much as the quick pass's simulation:
                # only the last pass computes them, so the first result comes sooner.
                result = run_study(case, samples=samples, cancel=cancel, margins=last,
                                   progress=progress if last else None)
                if cancel.is_set() or result.samples == 0:
                    return
                summary = summarize_study(result, DEFAULT_PERCENTILES)
                view = build_view(result, summary, quick=not last)
                if not last:
                    view = replace(view, margin_lines=(MARGINS_PENDING,))
            except (RobustffError, ArithmeticError, ValueError) as exc:
                self._from_thread(self._on_failure, generation, str(exc))
                return
            self._from_thread(self._on_result, generation, case, result, summary, view)

    def _from_thread(self, callback: Callable[..., object], *args: object) -> None:
        try:
            self.call_from_thread(callback, *args)
        except RuntimeError:
            pass  # the app is closing

    def _on_progress(self, generation: int, done: int, total: int) -> None:
        if generation == self._generation:
            self.query_one(ResultsPane).show_progress(done, total)

    def _on_failure(self, generation: int, message: str) -> None:
        if generation == self._generation:
            self.run_failure = message
            self.query_one(ResultsPane).show_status(f"✗ run failed: {message}")
            self.refresh_staleness()

    def _on_result(self, generation: int, case: Case, result: StudyResult, summary: Summary,
                   view: StudyView) -> None:
        if generation != self._generation:
            return  # an older case's run finished after an edit
        self.results_case = case
        self.last_view, self.last_result, self.last_summary = view, result, summary
        self.results_version += 1
        self.result_log.append((time.perf_counter(), view.quick))
        pane = self.query_one(ResultsPane)
        state = ("quick pass; refining to "
                 f"{self.case.study.samples}..." if view.quick else "full run")
        if view.partial:
            state = "PARTIAL (stopped)"
        pane.show_status(f"{view.samples} plants, {state}, {view.elapsed:.2f} s")
        if not view.quick:
            pane.show_progress(view.samples, view.requested)
        pane.show_view(view)
        self.query_one(PicturesPane).show_view(view)
        self.refresh_staleness()
        if self.results_version == 1:  # read once in full: fold it to make room for results
            self.query_one(CautionLine).fold()

    # --- stale results ------------------------------------------------------------------------

    def refused_fields(self) -> list[str]:
        """Fields and uncertain parameters whose text on screen was refused (not in the case)."""
        fields = [row.field for row in self.query(FieldRow) if row.has_class("invalid")]
        return fields + [row.key for row in self.query(UncertainRow) if row.has_class("invalid")]

    def stale_reason(self) -> str | None:
        """Why the results on screen do not belong to the case on screen (None when they do)."""
        refused = self.refused_fields()
        if refused:
            return f"{', '.join(refused)}: refused text (✗); results of the last accepted value"
        if self.results_case is None or self.results_case == self.case:
            return None
        if self.run_failure is not None:
            return "results of an earlier version: the run of the edited case failed"
        return "results of the case before the edit; rerunning..."

    def refresh_staleness(self) -> None:
        """Dim the results and say why when they do not belong to the case on screen."""
        reason = self.stale_reason()
        self.query_one("#right").set_class(reason is not None, "stale")
        self.query_one(StaleLine).show_reason(reason)

    def case_problem(self) -> str | None:
        """Why the case on screen should not be saved without asking (None when it is fine)."""
        refused = self.refused_fields()
        if refused:
            return (f"{', '.join(refused)} holds refused text; the saved file would keep the "
                    "last accepted value instead")
        from robustff.design.case_review import review_case

        try:
            review = review_case(self.case)
        except (RobustffError, ArithmeticError) as exc:
            return f"the design fails: {exc}"
        if review.errors:
            return "; ".join(finding.text() for finding in review.errors)
        if self.run_failure is not None and self.results_case != self.case:
            return f"its run failed: {self.run_failure}"
        return None

    def screen_text(self) -> str:
        """The screen as plain text (for tests and the benchmark; needs a running app)."""
        import io

        from rich.console import Console

        width, height = self.size
        console = Console(width=width, height=height, file=io.StringIO(), record=True,
                          color_system=None, legacy_windows=False, safe_box=False)
        console.print(self.screen._compositor.render_update(
            full=True, screen_stack=self._background_screens))
        return console.export_text()

    def on_unmount(self) -> None:
        self._cancel.set()
        self.stop_robust()


def _joined(first: str | None, second: str) -> str:
    return second if first is None else f"{first}; {second}"


def _outside_note(case: Case, parameter: UncertainParameter) -> str:
    """Under a nominal field: its value is outside the parameter's uncertainty range."""
    from robustff.case.sampling import distribution_bounds

    low, high = distribution_bounds(parameter, case.nominal_value(parameter.key))
    return (f"outside its uncertainty range {low:.4g} .. {high:.4g} "
            f"{case.parameter_unit(parameter.key)}: no simulated plant has this value "
            "(fix range: under Uncertainty)")


def _reason(exc: CaseError) -> str:
    return "; ".join(editing.short_message(problem) for problem in exc.problems)
