"""The models and design pane: nominal process/disturbance values, the feedback controller in
its form, the feedforward, the valve and the secondary (flow) loop. A case that names its
disturbances shows each one (name, unit, measured or not, path model, transmitter) with a
button to remove it, and a button to add one."""

from __future__ import annotations

from typing import Any

from textual.app import ComposeResult
from textual.containers import Horizontal, Vertical
from textual.markup import escape
from textual.widgets import Button, Input, Label, Select, Static

from robustff.case import Case, DisturbanceInput
from robustff.plant.models import MODEL_PARAMETERS, SENSOR_PARAMETERS
from robustff.tui.disturbance_edits import is_setting, setting_text
from robustff.tui.editing import CHOICE_FIELDS, OPTIONAL_FIELDS, VALVE_FIELDS, field_text
from robustff.tui.loop_fields import INSTALLED_FIELD, feedback_fields, secondary_fields
from robustff.tui.messages import (
    DisturbanceAddAsked,
    DisturbanceRemoveAsked,
    FieldEdited,
    field_id,
)
from robustff.units import per_unit

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
    # (at most 11 characters: the label column holds the focus mark, the label and a space)
    "valve.characteristic": "curve", "valve.rangeability": "rangeab. R",
    "valve.stiction_s": "stiction S", "valve.stiction_j": "slip jump J",
    "valve.deadband": "deadband", "valve.rate_limit": "rate limit",
    "valve.time_constant": "act. lag", INSTALLED_FIELD: "installed",
    # the controller as the control system writes it
    "feedback.proportional_band": "PB (manual)", "feedback.repeats": "repeats",
    "feedback.ki": "Ki (manual)", "feedback.kd": "Kd (manual)",
    "feedback.derivative_filter": "D filter", "feedback.setpoint_weight": "sp weight b",
    "feedback.derivative_setpoint_weight": "sp weight c",
    "secondary.scans_per_primary": "scans",
}
#: Labels of a named disturbance's transmitter fields (``disturbance.NAME.sensor.*``).
_METER_LABELS = {"time_constant": "meter lag", "noise_std": "meter noise"}
#: What a named disturbance's setting fields expect, shown while they are blank.
_SETTING_HINTS = {"name": "letters, digits, _", "unit": "e.g. m3/h", "measured": ""}

#: What a blank field means, where it is not "the rule decides".
_BLANK = {"feedback.proportional_band": "or Kc", "feedback.repeats": "or Ti",
          "feedback.derivative_filter": "blank = 0.1", INSTALLED_FIELD: "0:0, 50:0.2, 100:1"}


def _placeholder(case: Case, field: str, applied: str) -> str:
    """What a blank field means, or what it expects."""
    if is_setting(case, field):
        return _SETTING_HINTS[field.rsplit(".", 1)[1]]
    if field in _BLANK:
        return _BLANK[field]
    if field.startswith("valve.") and case.valve is None:
        return "no valve"
    return "blank = rule" if field in OPTIONAL_FIELDS else "a number"


def _field_label(field: str) -> str:
    parts = field.split(".")
    if len(parts) == 4 and parts[2] == "sensor":
        return _METER_LABELS.get(parts[3], parts[3])
    name = parts[-1] if len(parts) > 2 else field.split(".", 1)[1]
    return _LABELS.get(field, _LABELS.get(name, name))


def _text(case: Case, field: str) -> str:
    """The field's value as the row shows it."""
    return setting_text(case, field) if is_setting(case, field) else field_text(case, field)


def _choices(case: Case, field: str) -> tuple[str, ...] | None:
    """The words a choice field offers (None: a text field)."""
    if field in CHOICE_FIELDS:
        return CHOICE_FIELDS[field]
    return ("yes", "no") if field.endswith(".measured") and is_setting(case, field) else None




class FieldRow(Vertical):
    """One editable field: label, input (or choice) and an inline error line under it."""

    def __init__(self, case: Case, field: str) -> None:
        super().__init__(classes="field-row", id=f"row-{field_id(field)}")
        self.field = field
        self.applied = _text(case, field)
        self.has_valve = case.valve is not None
        self.choices = _choices(case, field)
        self.placeholder = _placeholder(case, field, self.applied)

    def compose(self) -> ComposeResult:
        with Horizontal(classes="field"):
            yield Label(focus_label(_field_label(self.field), False), classes="field-label")
            if self.choices is not None:
                options = [(choice, choice) for choice in self.choices]
                yield Select(options, value=self.applied, allow_blank=False, compact=True,
                             id=f"in-{field_id(self.field)}")
            else:
                yield Input(self.applied, compact=True, id=f"in-{field_id(self.field)}",
                            placeholder=self.placeholder)
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
        line.update(f"✗ {escape(error)}" if error else "")  # "[valve]" is text, not markup
        line.set_class(error is not None, "shown")
        if error is None:
            self.applied = text


    def show_warning(self, warning: str | None) -> None:
        """A review warning about the value (kept until an edit clears it), or none."""
        line = self.query_one(".warning", Static)
        line.update(f"⚠ {escape(warning)}" if warning else "")
        line.set_class(warning is not None, "shown")


class ModelsPane(Vertical):
    """Nominal models and the loop design; the design summary below is refreshed by the app."""

    def __init__(self, case: Case, **kwargs: Any) -> None:
        super().__init__(**kwargs)
        self.case = case

    def compose(self) -> ComposeResult:
        case = self.case
        blocks = [("process", "Process: output -> CV")]
        if not case.disturbances:
            blocks.append(("disturbance", "Disturbance: measured -> CV"))
        for block, title in blocks:
            kind = getattr(case, block).kind.upper()
            yield Static(f"{title} ({kind})", classes="section")
            yield Static(f"  gain in {case.parameter_unit(f'{block}.gain')}; "
                         f"times in {case.time_unit}", classes="hint")
            for name in MODEL_PARAMETERS[getattr(case, block).kind]:
                yield FieldRow(case, f"{block}.{name}")
        for item in case.disturbances:
            yield from self._disturbance_rows(item)
        if case.disturbances:
            yield Button("add a disturbance (F8)", compact=True, id="add-disturbance",
                         tooltip="one more disturbance: a default FOPDT to set from a bump test")
        yield Static(f"Feedback controller ({case.feedback.structure} form)", classes="section")
        gain_unit = per_unit(case.signals.output.unit or "output unit",
                             case.signals.controlled.unit or "CV unit")
        yield Static(f"  Kc in {gain_unit}, PB in %, "
                     f"Ti in {case.time_unit} per repeat, repeats per {case.time_unit}; "
                     + (f"Ki in {gain_unit}/{case.time_unit}, Kd in {gain_unit} x "
                        f"{case.time_unit}; " if case.feedback.structure == "parallel" else "")
                     + "setpoint weights b, c 0..1", classes="hint")
        for field in feedback_fields(case):
            yield FieldRow(case, field)
        yield Static("Feedforward", classes="section")
        overridden = [item.name for item in case.disturbances if item.feedforward is not None]
        if case.disturbances:  # [feedforward] is every measured disturbance's rule
            yield Static(escape("  for every measured disturbance" + (
                f"; {', '.join(overridden)} overridden by [feedforward.NAME] in the case file"
                if overridden else "")), classes="hint")
        for name in ("structure", "gain_factor", "lead", "lag", "delay"):
            yield FieldRow(case, f"feedforward.{name}")
        yield Static("Valve (none: ideal actuator)", classes="section")
        yield Static(f"  curve: the valve's characteristic; stiction S, J and deadband in % of "
                     f"travel; rate limit in %/{case.time_unit}; act. lag (the actuator's) in "
                     f"{case.time_unit}; rangeab. R: rangeability (equal-percentage only), "
                     "dimensionless; installed: position % : flow fraction pairs",
                     classes="hint")
        for field in VALVE_FIELDS:
            yield FieldRow(case, field)
        yield from self._secondary_rows(case)
        yield Static("", id="design-summary")

    def _secondary_rows(self, case: Case) -> ComposeResult:
        if case.secondary is None:
            yield Static(escape("Secondary loop: none (add [secondary] in the case file)"),
                         classes="section")
            return
        flow = case.signals.output.unit or "flow unit"
        yield Static(f"Secondary loop: % -> {flow} ({case.secondary.model.kind.upper()})",
                     classes="section")
        yield Static(f"  gain in {flow} per %; times in {case.time_unit}; Kc in %/({flow}); "
                     "scans: secondary scans per primary scan", classes="hint")
        for field in secondary_fields(case):
            yield FieldRow(case, field)

    def _disturbance_rows(self, item: DisturbanceInput) -> ComposeResult:
        """One named disturbance: its settings, path model, transmitter and a remove button."""
        case, time_unit = self.case, self.case.time_unit
        yield Static(f"{item.name} -> CV ({item.model.kind.upper()})", classes="section")
        noise = f"; noise in {item.unit}" if item.measured and item.unit else ""
        yield Static(f"  gain in {case.parameter_unit(f'{item.key_prefix}.gain')}; times in "
                     f"{time_unit}{noise}", classes="hint")
        if not item.measured:
            yield Static("  not measured: feedback alone", classes="hint")
        for setting in ("name", "unit", "measured"):
            yield FieldRow(case, f"disturbance.{item.name}.{setting}")
        for name in MODEL_PARAMETERS[item.model.kind]:
            yield FieldRow(case, f"{item.key_prefix}.{name}")
        if item.measured:
            for name in SENSOR_PARAMETERS:
                yield FieldRow(case, f"{item.sensor_prefix}.{name}")
        yield Button(f"remove {item.name}...", compact=True, classes="dremove",
                     id=f"remove-{field_id(item.name)}", name=item.name,
                     tooltip=f"remove {item.name} and the events and ranges that name it")

    def on_button_pressed(self, event: Button.Pressed) -> None:
        if event.button.id == "add-disturbance":
            event.stop()
            self.post_message(DisturbanceAddAsked())
        elif event.button.has_class("dremove") and event.button.name:
            event.stop()
            self.post_message(DisturbanceRemoveAsked(event.button.name))

    def row(self, field: str) -> FieldRow:
        """The row editing ``field``."""
        return self.query_one(f"#row-{field_id(field)}", FieldRow)

    def show_values(self, case: Case, fields: tuple[str, ...]) -> None:
        """Show the case's values in the rows of ``fields`` (rows holding a refused edit keep
        their text)."""
        shown = {row.field for row in self.query(FieldRow)}
        for field in fields:
            if field not in shown:
                continue
            row = self.row(field)
            if row.has_class("invalid"):
                continue
            row.applied = field_text(case, field)
            row.has_valve = case.valve is not None
            for widget in row.query(Input):
                widget.value = row.applied
                widget.placeholder = _placeholder(case, field, row.applied)
            for choice in row.query(Select):
                choice.value = row.applied

    def show_design(self, lines: list[str], warnings: dict[str, str]) -> None:
        """Show the design computed from the nominal models and the review's warnings.

        Parameters
        ----------
        lines : list of str
            The design summary (and warnings that concern no single field).
        warnings : dict
            Warning text by field (``"process.dead_time"``), shown under that field.
        """
        self.query_one("#design-summary", Static).update(escape("\n".join(lines)))
        for row in self.query(FieldRow):
            row.show_warning(warnings.get(row.field))
