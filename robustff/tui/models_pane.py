"""The models and design pane: nominal process/disturbance values, feedback, feedforward and
the valve."""

from __future__ import annotations

from typing import Any

from textual.app import ComposeResult
from textual.containers import Horizontal, Vertical
from textual.widgets import Input, Label, Select, Static

from robustff.case import Case
from robustff.plant.models import MODEL_PARAMETERS
from robustff.tui.editing import CHOICE_FIELDS, OPTIONAL_FIELDS, VALVE_FIELDS, field_text
from robustff.tui.messages import FieldEdited, field_id

__all__ = ["ModelsPane", "FieldRow", "focus_label", "FOCUS_MARK"]

#: Marks the label of the row that has focus (readable without colour).
FOCUS_MARK = "▸"


def focus_label(label: str, focused: bool) -> str:
    """A row label with the focus marker, or the same width of blank in front."""
    return f"{FOCUS_MARK if focused else ' '}{label}"

_LABELS = {
    "gain": "gain K", "time_constant": "lag tau", "time_constant_2": "lag tau2",
    "dead_time": "dead time", "form": "form", "tuning": "tuning rule",
    "closed_loop_time": "tau_c", "kc": "Kc (manual)", "ti": "Ti (manual)", "td": "Td (manual)",
    "structure": "structure", "gain_factor": "gain factor",
    "lead": "ff lead", "lag": "ff lag", "delay": "ff delay",
    # the valve (the same words as the design summary's installed loop)
    "valve.characteristic": "characteristic", "valve.rangeability": "rangeability",
    "valve.stiction_s": "stiction S", "valve.stiction_j": "slip jump J",
    "valve.deadband": "deadband", "valve.rate_limit": "rate limit",
    "valve.time_constant": "actuator lag",
}


def _field_label(field: str) -> str:
    name = field.split(".", 1)[1]
    return _LABELS.get(field, _LABELS.get(name, name))


class FieldRow(Vertical):
    """One editable field: label, input (or choice) and an inline error line under it."""

    def __init__(self, case: Case, field: str) -> None:
        super().__init__(classes="field-row", id=f"row-{field_id(field)}")
        self.field = field
        self.applied = field_text(case, field)

    def compose(self) -> ComposeResult:
        with Horizontal(classes="field"):
            yield Label(focus_label(_field_label(self.field), False), classes="field-label")
            if self.field in CHOICE_FIELDS:
                options = [(choice, choice) for choice in CHOICE_FIELDS[self.field]]
                yield Select(options, value=self.applied, allow_blank=False, compact=True,
                             id=f"in-{field_id(self.field)}")
            else:
                yield Input(self.applied, compact=True, id=f"in-{field_id(self.field)}",
                            placeholder="blank = rule" if self.field in OPTIONAL_FIELDS
                            else "no valve" if self.applied == "" and
                            self.field.startswith("valve.") else "a number")
        yield Static("", classes="error", id=f"err-{field_id(self.field)}")
        yield Static("", classes="warning", id=f"warn-{field_id(self.field)}")

    def on_descendant_focus(self) -> None:
        self.query_one(".field-label", Label).update(focus_label(self._label(), True))

    def on_descendant_blur(self) -> None:
        self.query_one(".field-label", Label).update(focus_label(self._label(), False))

    def _label(self) -> str:
        return _field_label(self.field)

    def _send(self, text: str) -> None:
        if text != self.applied or self.has_class("invalid"):
            self.post_message(FieldEdited(self.field, text))

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        self._send(event.value)

    def on_input_blurred(self, event: Input.Blurred) -> None:
        event.stop()
        self._send(event.value)

    def on_select_changed(self, event: Select.Changed) -> None:
        event.stop()
        if isinstance(event.value, str):
            self._send(event.value)

    def show_result(self, error: str | None, text: str) -> None:
        """Mark the edit applied (``error`` None) or refused (the reason shown, text kept)."""
        self.set_class(error is not None, "invalid")
        line = self.query_one(".error", Static)
        line.update(f"✗ {error}" if error else "")
        line.set_class(error is not None, "shown")
        if error is None:
            self.applied = text


    def show_warning(self, warning: str | None) -> None:
        """A review warning about the value (kept until an edit clears it), or none."""
        line = self.query_one(".warning", Static)
        line.update(f"⚠ {warning}" if warning else "")
        line.set_class(warning is not None, "shown")


class ModelsPane(Vertical):
    """Nominal models and the loop design; the design summary below is refreshed by the app."""

    def __init__(self, case: Case, **kwargs: Any) -> None:
        super().__init__(**kwargs)
        self.case = case

    def compose(self) -> ComposeResult:
        case = self.case
        for block, title in (("process", "Process: output -> CV"),
                             ("disturbance", "Disturbance: measured -> CV")):
            kind = getattr(case, block).kind.upper()
            yield Static(f"{title} ({kind})", classes="section")
            yield Static(f"  gain in {case.parameter_unit(f'{block}.gain')}; "
                         f"times in {case.time_unit}", classes="hint")
            for name in MODEL_PARAMETERS[getattr(case, block).kind]:
                yield FieldRow(case, f"{block}.{name}")
        yield Static("Feedback controller", classes="section")
        for name in ("form", "tuning", "closed_loop_time", "kc", "ti", "td"):
            yield FieldRow(case, f"feedback.{name}")
        yield Static("Feedforward", classes="section")
        for name in ("structure", "gain_factor", "lead", "lag", "delay"):
            yield FieldRow(case, f"feedforward.{name}")
        yield Static("Valve (none: ideal actuator)", classes="section")
        yield Static(f"  stiction S, J and deadband in % of travel; rate limit in "
                     f"%/{case.time_unit}; actuator lag in {case.time_unit}; rangeability "
                     "(equal-percentage only) dimensionless", classes="hint")
        for field in VALVE_FIELDS:
            yield FieldRow(case, field)
        yield Static("", id="design-summary")

    def row(self, field: str) -> FieldRow:
        """The row editing ``field``."""
        return self.query_one(f"#row-{field_id(field)}", FieldRow)

    def show_values(self, case: Case, fields: tuple[str, ...]) -> None:
        """Show the case's values in the rows of ``fields`` (rows holding a refused edit keep
        their text)."""
        for field in fields:
            row = self.row(field)
            if row.has_class("invalid"):
                continue
            row.applied = field_text(case, field)
            for widget in row.query(Input):
                widget.value = row.applied
                widget.placeholder = "no valve" if case.valve is None else "a number"

    def show_design(self, lines: list[str], warnings: dict[str, str]) -> None:
        """Show the design computed from the nominal models and the review's warnings.

        Parameters
        ----------
        lines : list of str
            The design summary (and warnings that concern no single field).
        warnings : dict
            Warning text by field (``"process.dead_time"``), shown under that field.
        """
        self.query_one("#design-summary", Static).update("\n".join(lines))
        for row in self.query(FieldRow):
            row.show_warning(warnings.get(row.field))
