"""Adding, removing, renaming disturbances and making them measured or not, in the studio (a
mixin of the app).

The case transformations are :mod:`robustff.tui.disturbance_edits`; this mixin asks to confirm
a removal, applies an edit through ``accept_edit`` (so Ctrl+Z undoes it), rebuilds the editor
panes (their rows follow the disturbances) with the focus back on the field that was edited,
and tells the engineer what else changed.
"""

from __future__ import annotations

from collections.abc import Callable

from robustff.errors import CaseError
from robustff.tui import disturbance_edits, editing
from robustff.tui.dialogs import ChoiceScreen
from robustff.tui.disturbance_edits import DisturbanceEdit
from robustff.tui.host import StudioHost
from robustff.tui.messages import DisturbanceAddAsked, DisturbanceRemoveAsked, FieldEdited

__all__ = ["DisturbanceActions"]

#: Seconds a note about what else an edit changed stays on screen.
_NOTE_SECONDS = 10


class DisturbanceActions(StudioHost):
    """The disturbance edits; mixed into :class:`robustff.tui.app.StudioApp`."""

    def edit_disturbance_setting(self, message: FieldEdited) -> None:
        """A name, unit or measured field of a named disturbance was edited."""
        from robustff.tui.models_pane import ModelsPane

        row = self.query_one(ModelsPane).row(message.field)
        try:
            edit = disturbance_edits.edit_setting(self.case, message.field, message.text)
        except CaseError as exc:
            row.show_result(_reason(exc), message.text)
            self.refresh_staleness()
            return
        row.show_result(None, message.text)
        if edit.case == self.case:
            return
        setting = message.field.rsplit(".", 1)[1]
        focus = message.field
        if setting == "name":  # the rows of the renamed disturbance carry its new name
            focus = f"disturbance.{message.text.strip()}.name"
        # every setting shows elsewhere (the unit in the hints and the ranges' descriptions):
        # the rows are rebuilt for each
        self._apply(edit, f"{message.field} = {message.text.strip()}", focus=focus)

    def action_add_disturbance(self) -> None:
        """F8: one more disturbance (the single ``[disturbance]`` becomes the first named)."""
        self._try(lambda: disturbance_edits.add_disturbance(self.case), "add a disturbance",
                  focus_new=True)

    def on_disturbance_add_asked(self, message: DisturbanceAddAsked) -> None:
        self.action_add_disturbance()

    def on_disturbance_remove_asked(self, message: DisturbanceRemoveAsked) -> None:
        name = message.disturbance
        try:
            effects = disturbance_edits.removal_effects(self.case, name)
        except CaseError as exc:
            self.notify(f"not removed: {_reason(exc)}", severity="error", timeout=_NOTE_SECONDS)
            return
        also = f"\nThis also removes {'; '.join(effects)}." if effects else ""
        question = f"Remove the disturbance {name}?{also}\nCtrl+Z brings it all back."

        def answer(choice: str | None) -> None:
            if choice == "r":
                self._try(lambda: disturbance_edits.remove_disturbance(self.case, name),
                          f"remove disturbance {name}")

        self.push_screen(ChoiceScreen(question, [("r", "remove"), ("c", "cancel")]), answer)

    def _try(self, make: Callable[[], DisturbanceEdit], what: str,
             focus_new: bool = False) -> None:
        try:
            edit = make()
        except CaseError as exc:
            self.notify(f"not done ({what}): {_reason(exc)}", severity="error",
                        timeout=_NOTE_SECONDS)
            return
        focus = None
        if focus_new:  # start on the new disturbance's gain
            focus = f"{edit.case.disturbances[-1].key_prefix}.gain"
        self._apply(edit, what, focus=focus)

    def _apply(self, edit: DisturbanceEdit, what: str, focus: str | None) -> None:
        self.accept_edit(edit.case, rebuild=False, what=what)
        self.rebuild_panes(focus)
        for note in edit.notes:
            self.notify(note, timeout=_NOTE_SECONDS)


def _reason(exc: CaseError) -> str:
    return "; ".join(editing.short_message(problem) for problem in exc.problems)
