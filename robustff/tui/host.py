"""What the studio's action mixins may use of the app, spelled out for the type checker.

:class:`~robustff.tui.app.StudioApp` is assembled from small mixins (files, robust search,
data fit) plus :class:`textual.app.App`. Each mixin calls App methods (``notify``,
``push_screen``, ``exit``) and a few of the studio's own (``accept_edit``, ``start_run``).
:class:`StudioHost` declares those for the checker, so a misspelt or missing call is found
before it runs. At run time it is plain ``object``: the app's method order and Textual's class
set-up (bindings, CSS) are exactly those of a mixin without a base.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

__all__ = ["StudioHost"]

if TYPE_CHECKING:
    from collections.abc import Callable

    from textual.app import App

    from robustff.case import Case
    from robustff.study import StudyResult
    from robustff.study.summary_types import Summary
    from robustff.tui.view import StudyView

    class StudioHost(App[None]):
        """The studio app as its mixins see it (implemented by ``StudioApp``)."""

        case: Case
        last_view: StudyView | None
        last_result: StudyResult | None
        last_summary: Summary | None

        def accept_edit(self, case: Case, rebuild: bool = False,
                        what: str = "the last edit") -> None:
            """Make ``case`` current: autosave, refresh the design, restart the study."""

        def rebuild_panes(self, focus: str | None = None) -> None:
            """Recompose the editor panes from the current case (then focus ``focus``)."""

        def show_design(self) -> None:
            """Show the nominal design of the current case."""

        def start_run(self) -> None:
            """Cancel the running study (if any) and start a new one."""

        def autosave(self) -> None:
            """Write the edits to the recovery file (or remove it when nothing is unsaved)."""

        def refresh_title(self) -> None:
            """Show the file name and whether the case has unsaved edits."""

        def remember(self, what: str) -> None:
            """Keep the current case for undo before ``what`` changes it."""

        def case_problem(self) -> str | None:
            """Why the case on screen should not be saved without asking (None: fine)."""

        def stale_reason(self) -> str | None:
            """Why the results on screen do not belong to the case on screen (None: they do)."""

        def refresh_staleness(self) -> None:
            """Dim the results and say why when they do not belong to the case on screen."""

        def _from_thread(self, callback: Callable[..., object], *args: object) -> None:
            """Call ``callback(*args)`` on the app's thread (ignored once the app closes)."""
else:
    StudioHost = object
