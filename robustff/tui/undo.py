"""Undo of the studio's applied edits (Ctrl+Z), deletions, reloads and applied fits included.

Every change of the case on screen goes through :meth:`UndoActions.remember` first, which keeps
the case as it was; :meth:`UndoActions.action_undo` brings back the latest one (the panes are
rebuilt from it and the study reruns). Text that was refused never reached the case, so there
is nothing to undo for it: the field still holds it.
"""

from __future__ import annotations

from robustff.case import Case
from robustff.tui.host import StudioHost

__all__ = ["UndoActions", "UNDO_DEPTH"]

#: Most edits kept for undo.
UNDO_DEPTH = 100


class UndoActions(StudioHost):
    """The undo stack; mixed into :class:`robustff.tui.app.StudioApp`."""

    undo_stack: list[tuple[Case, str]]

    def init_undo(self) -> None:
        """Start with nothing to undo (called from the app's ``__init__``)."""
        self.undo_stack = []

    def remember(self, what: str) -> None:
        """Keep the current case before ``what`` (e.g. ``"remove process.gain"``) changes it."""
        self.undo_stack.append((self.case, what))
        del self.undo_stack[:-UNDO_DEPTH]

    def action_undo(self) -> None:
        if not self.undo_stack:
            self.notify("nothing to undo", severity="warning")
            return
        case, what = self.undo_stack.pop()
        self.case = case
        self.autosave()
        self.refresh_title()
        self.rebuild_panes()
        self.show_design()
        self.start_run()
        left = f" ({len(self.undo_stack)} more)" if self.undo_stack else ""
        self.notify(f"undone: {what}{left}")
