"""The uncertainty table: one row per uncertain parameter, edited in place; add and remove rows."""

from __future__ import annotations

from typing import Any

from textual.app import ComposeResult
from textual.containers import Horizontal, Vertical
from textual.widgets import Button, Input, Label, Select, Static

from robustff.case import DISTRIBUTION_KINDS, Case, UncertainParameter
from robustff.tui.dialogs import ListScreen
from robustff.tui.editing import clip_text, params_text, uncertain_candidates
from robustff.tui.messages import (
    DistributionEdited,
    KindChanged,
    RangeFixAsked,
    RowAdded,
    RowRemoved,
    field_id,
)
from robustff.tui.models_pane import focus_label

__all__ = ["UncertaintyPane", "UncertainRow", "BOUNDED_KINDS"]

#: Distributions with bounds of their own: a clip is refused for them, so none is offered.
BOUNDED_KINDS = frozenset({"uniform", "relative", "triangular"})

_HINTS = {
    "uniform": "low, high", "relative": "r (0.2 = +-20 %)", "normal": "mean, std",
    "triangular": "low, mode, high", "lognormal": "median, factor",
}


class UncertainRow(Vertical):
    """One uncertain parameter: kind, numbers, optional clip, description or inline error."""

    def __init__(self, case: Case, row: UncertainParameter) -> None:
        super().__init__(classes="urow", id=f"u-{field_id(row.key)}")
        self.key = row.key
        self.kind = row.distribution.kind
        self.set_class(self.kind in BOUNDED_KINDS, "bounded")
        self.applied = (params_text(row.distribution), clip_text(row.distribution))
        self.description = _describe(case, row)

    def compose(self) -> ComposeResult:
        with Horizontal(classes="uline"):
            yield Label(focus_label(self.key, False), classes="ukey")
            yield Button("del", compact=True, classes="udel", tooltip=f"remove {self.key}")
        with Horizontal(classes="uline"):
            yield Select([(k, k) for k in DISTRIBUTION_KINDS], value=self.kind, compact=True,
                         allow_blank=False, classes="ukind")
            yield Input(self.applied[0], compact=True, classes="uparams",
                        placeholder=_HINTS[self.kind])
            yield Input(self.applied[1], compact=True, classes="uclip", placeholder="clip lo, hi")
        yield Static(self.description, classes="udesc")
        with Horizontal(classes="uwarn-line"):
            yield Static("", classes="uwarn")
            yield Button("fix range", compact=True, classes="ufix",
                         tooltip=f"widen or move the range of {self.key} to its nominal value")

    def on_descendant_focus(self) -> None:
        self.query_one(".ukey", Label).update(focus_label(self.key, True))

    def on_descendant_blur(self) -> None:
        self.query_one(".ukey", Label).update(focus_label(self.key, False))

    def _send(self) -> None:
        params = self.query_one(".uparams", Input).value
        clip = self.query_one(".uclip", Input).value
        if (params, clip) != self.applied or self.has_class("invalid"):
            self.post_message(DistributionEdited(self.key, self.kind, params, clip))

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        self._send()

    def on_input_blurred(self, event: Input.Blurred) -> None:
        event.stop()
        self._send()

    def on_select_changed(self, event: Select.Changed) -> None:
        event.stop()
        if isinstance(event.value, str) and event.value != self.kind:
            self.post_message(KindChanged(self.key, event.value))

    def on_button_pressed(self, event: Button.Pressed) -> None:
        event.stop()
        if event.button.has_class("ufix"):
            self.post_message(RangeFixAsked(self.key))
        else:
            self.post_message(RowRemoved(self.key))

    def show_warning(self, warning: str | None, offer_fix: bool) -> None:
        """A review warning about this range (kept until an edit clears it), or none.

        ``offer_fix`` shows the button that widens or moves the range to the nominal value.
        """
        self.query_one(".uwarn", Static).update(f"⚠ {warning}" if warning else "")
        self.set_class(warning is not None, "warned")
        self.set_class(offer_fix, "fixable")

    def show_result(self, case: Case, error: str | None) -> None:
        """Show the applied distribution, or the reason an edit was refused (text kept)."""
        self.set_class(error is not None, "invalid")
        row = next((r for r in case.uncertainty if r.key == self.key), None)
        if error is None and row is not None:
            self.kind = row.distribution.kind
            self.set_class(self.kind in BOUNDED_KINDS, "bounded")
            self.applied = (params_text(row.distribution), clip_text(row.distribution))
            self.query_one(".uparams", Input).value = self.applied[0]
            self.query_one(".uparams", Input).placeholder = _HINTS[self.kind]
            self.query_one(".uclip", Input).value = self.applied[1]
            with self.prevent(Select.Changed):
                self.query_one(".ukind", Select).value = self.kind
        text = f"✗ {error}" if error else (_describe(case, row) if row else "")
        self.query_one(".udesc", Static).update(text)


def _describe(case: Case, row: UncertainParameter) -> str:
    from robustff.case.sampling import describe_distribution

    return describe_distribution(row, case.nominal_value(row.key), case.parameter_unit(row.key))


class UncertaintyPane(Vertical):
    """The table; the app recomposes it when rows are added or removed."""

    def __init__(self, case: Case, **kwargs: Any) -> None:
        super().__init__(**kwargs)
        self.case = case

    def compose(self) -> ComposeResult:
        yield Static(f"Uncertainty ({len(self.case.uncertainty)} parameters)", classes="section")
        for row in self.case.uncertainty:
            yield UncertainRow(self.case, row)
        if uncertain_candidates(self.case):
            with Horizontal(classes="uline", id="add-line"):
                yield Button("add an uncertain parameter...", compact=True, id="add-row")
        yield Static("", classes="error", id="table-error")

    def on_button_pressed(self, event: Button.Pressed) -> None:
        if event.button.id == "add-row":
            event.stop()
            candidates = uncertain_candidates(self.case)

            def chosen(key: str | None) -> None:
                if key is not None:
                    self.post_message(RowAdded(key))

            self.app.push_screen(ListScreen("Make a plant parameter uncertain:", candidates),
                                 chosen)

    def row(self, key: str) -> UncertainRow:
        """The row of uncertain parameter ``key``."""
        return self.query_one(f"#u-{field_id(key)}", UncertainRow)

    def show_warnings(self, case: Case, warnings: dict[str, str]) -> None:
        """Review warnings by uncertain parameter key (``"process.dead_time"``)."""
        from robustff.design.case_review import nominal_outside_range

        for parameter in case.uncertainty:
            rows = self.query(f"#u-{field_id(parameter.key)}").results(UncertainRow)
            for row in rows:
                row.show_warning(warnings.get(parameter.key),
                                 nominal_outside_range(case, parameter))

    def show_table_error(self, error: str | None) -> None:
        """An add/remove that was refused."""
        line = self.query_one("#table-error", Static)
        line.update(f"✗ {error}" if error else "")
        line.set_class(error is not None, "shown")
