"""Save, save-as, export, reload, quit and crash recovery for the studio app (a mixin).

Kept apart from :mod:`robustff.tui.app` so the app module holds only layout, edits and runs.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import replace
from pathlib import Path

from robustff.case import Case, load_case, save_case
from robustff.errors import RobustffError
from robustff.tui.dialogs import ChoiceScreen, HelpScreen, PathScreen
from robustff.tui.host import StudioHost
from robustff.tui.recovery import discard_recovery, read_recovery, recovery_path, write_recovery

__all__ = ["FileActions", "is_bundled"]


def is_bundled(path: Path) -> bool:
    """True for a demo case inside the installed package (never overwritten by save)."""
    package_demo = Path(__file__).resolve().parent.parent / "demo"
    return path.resolve().parent == package_demo


class FileActions(StudioHost):
    """File handling; mixed into :class:`robustff.tui.app.StudioApp`."""

    saved_case: Case
    case_path: Path
    original_text: str | None

    def init_files(self, case_path: Path, case: Case | None, recovery_folder: Path | None) -> None:
        self.case_path = Path(case_path)
        self.original_text = self.case_path.read_text(encoding="utf-8")
        loaded = case if case is not None else load_case(self.case_path)
        self.case = self.saved_case = replace(loaded, source_path=self.case_path)
        self.recovery_folder = recovery_folder
        self.recovery_file = recovery_path(self.case_path, recovery_folder)

    @property
    def dirty(self) -> bool:
        """True when the case differs from the file on disk."""
        return self.case != self.saved_case

    def refresh_title(self) -> None:
        self.sub_title = f"{self.case_path.name}{' (edited, not saved)' if self.dirty else ''}"

    # --- recovery ---------------------------------------------------------------------

    def autosave(self) -> None:
        """Write the edits to the recovery file (or remove it when nothing is unsaved)."""
        try:
            if self.dirty:
                write_recovery(self.recovery_file, self.case, self.original_text)
            else:
                discard_recovery(self.recovery_file)
        except (RobustffError, OSError) as exc:
            self.notify(f"autosave failed: {exc}", severity="warning")

    def offer_recovery(self) -> None:
        """Ask whether to restore edits a previous session left in the recovery file."""
        found = read_recovery(self.recovery_file, self.case_path)
        if found is None or found.case == self.saved_case:
            return

        def answer(choice: str | None) -> None:
            if choice == "r":
                self.remember("the restored edits")
                self.case = found.case
                self.refresh_title()
                self.rebuild_panes()
                self.show_design()
                self.start_run()
                self.notify("unsaved edits restored; Ctrl+S saves them")
            elif choice == "d":
                discard_recovery(self.recovery_file)

        question = (f"Unsaved edits of {self.case_path.name} from {found.age_text()} were found "
                    f"in {found.path}.\nRestore them?")
        self.push_screen(ChoiceScreen(question, [("r", "restore"), ("d", "discard"),
                                                 ("k", "keep file, not now")]), answer)

    # --- save, export, reload -----------------------------------------------------------------

    def action_save(self) -> None:
        self.unless_invalid(self._save)

    def _save(self) -> None:
        if is_bundled(self.case_path):
            self.notify("the bundled demo case is read-only; choose where to save a copy")
            self._save_as()
            return
        self.save_to(self.case_path)

    def unless_invalid(self, then: Callable[[], None]) -> None:
        """Run ``then`` now, or after asking when the case on screen does not validate."""
        problem = self.case_problem()
        if problem is None:
            then()
            return
        question = f"The case on screen does not validate: {problem}.\nSave it anyway?"
        self.push_screen(ChoiceScreen(question, [("s", "save anyway"), ("c", "cancel")]),
                         lambda choice: then() if choice == "s" else None)

    def action_save_as(self) -> None:
        self.unless_invalid(self._save_as)

    def _save_as(self) -> None:
        default = str(self.case_path if not is_bundled(self.case_path)
                      else Path.cwd() / self.case_path.name)

        def chosen(text: str | None) -> None:
            if text:
                self.save_to(Path(text).expanduser())

        self.push_screen(PathScreen("Save the case as (path of a .toml file):", default), chosen)

    def save_to(self, path: Path) -> bool:
        """Save atomically; warnings (e.g. comments dropped) are shown. True when written."""
        try:  # Save as writes a copy of the same document: its comments are kept too
            warnings = save_case(self.case, path, self.original_text)
        except RobustffError as exc:
            self.notify(f"not saved: {exc}", severity="error", timeout=8)
            return False
        discard_recovery(self.recovery_file)
        self.case_path = path
        self.original_text = path.read_text(encoding="utf-8")
        self.case = replace(self.case, source_path=path)
        self.saved_case = self.case
        self.recovery_file = recovery_path(path, self.recovery_folder)
        for warning in warnings:
            self.notify(f"{path.name}: {warning}", severity="warning", timeout=8)
        self.notify(f"saved {path}")
        self.refresh_title()
        return True

    def export_problem(self) -> str | None:
        """Why the results on screen cannot be exported now (None: they are a complete run)."""
        view = self.last_view
        if self.last_result is None or view is None:
            return "no results yet; wait for the first run"
        if self.stale_reason() is not None:
            return ("the results on screen are not those of the case on screen "
                    f"({self.stale_reason()}); export once its run has finished")
        if view.quick:
            return (f"only the quick pass of {view.samples} plants has finished; export writes "
                    f"complete runs only: wait for the {view.requested} plants of the full run")
        return None

    def action_export(self) -> None:
        problem = self.export_problem()
        if problem is not None:
            self.notify(f"not exported: {problem}", severity="warning", timeout=8)
            return
        view = self.last_view
        assert view is not None  # export_problem checked it
        default = str(Path("results") / self.case.name)
        state = "PARTIAL run (stopped)" if view.partial else "full run"
        title = (f"Export the {state} of {view.samples} plants (the files of 'robustff run "
                 "--out') to folder:")

        def chosen(text: str | None) -> None:
            if text:
                self.export_to(Path(text).expanduser())

        self.push_screen(PathScreen(title, default), chosen)

    def export_to(self, folder: Path) -> bool:
        """Write the result files (as ``robustff run --out``) of the latest complete run."""
        from robustff.output.result_files import write_results
        from robustff.stats import DEFAULT_PERCENTILES

        problem = self.export_problem()
        result, summary = self.last_result, self.last_summary
        if problem is not None or result is None or summary is None:
            self.notify(f"not exported: {problem}", severity="warning", timeout=8)
            return False
        notes: list[str] = []

        def report(staging: Path) -> None:
            # The same report as 'robustff run --report' (plots, report.html, and report.pdf /
            # report.xlsx where Chromium and openpyxl are there).
            try:
                from robustff.output.html_report import margin_values, write_report_files
            except ImportError as exc:  # matplotlib is an optional dependency
                notes.append(f"no report: {exc.name} is not installed")
                return
            files = write_report_files(result, summary, staging, DEFAULT_PERCENTILES,
                                       margin_values(result))
            notes.extend(files.notes)

        try:
            write_results(result, summary, folder, DEFAULT_PERCENTILES, extra=report)
        except (RobustffError, OSError) as exc:
            self.notify(f"not exported: {exc}", severity="error", timeout=8)
            return False
        self.notify(f"results and report of {result.samples} plants written to {folder}/"
                    + ("".join(f"; {note}" for note in notes)))
        return True

    def action_reload(self) -> None:
        if not self.dirty:
            self.reload_from_disk()
            return
        question = "Reloading drops the unsaved edits. Reload from disk?"
        self.push_screen(ChoiceScreen(question, [("y", "reload"), ("n", "cancel")]),
                         lambda choice: self.reload_from_disk() if choice == "y" else None)

    def reload_from_disk(self) -> None:
        try:
            case = load_case(self.case_path)
            text = self.case_path.read_text(encoding="utf-8")
        except (RobustffError, OSError) as exc:
            self.notify(f"not reloaded: {exc}", severity="error", timeout=8)
            return
        if case.balance is not None:  # its physical [process] has no editor yet
            self.notify("not reloaded: the studio does not yet edit plants built from balances",
                        severity="error", timeout=8)
            return
        self.remember("the reload from disk")
        self.case = self.saved_case = replace(case, source_path=self.case_path)
        self.original_text = text
        discard_recovery(self.recovery_file)
        self.refresh_title()
        self.rebuild_panes()
        self.show_design()
        self.start_run()
        self.notify(f"reloaded {self.case_path}")

    # --- help, quit ---------------------------------------------------------------------------

    def action_help(self) -> None:
        self.push_screen(HelpScreen())

    async def action_quit(self) -> None:
        if not self.dirty:
            self.exit()
            return

        def save_and_quit() -> None:
            if not is_bundled(self.case_path) and self.save_to(self.case_path):
                self.exit()
            elif is_bundled(self.case_path):
                self._save_as()

        def answer(choice: str | None) -> None:
            if choice == "s":
                self.unless_invalid(save_and_quit)  # asks first when the case does not validate
            elif choice == "d":
                discard_recovery(self.recovery_file)
                self.exit()

        question = "The case has unsaved edits."
        self.push_screen(ChoiceScreen(question, [("s", "save and quit"), ("d", "discard and quit"),
                                                 ("c", "cancel")]), answer)
