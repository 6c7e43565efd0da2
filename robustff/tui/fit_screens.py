"""Screens of the studio's data fit: the form (with the fit running in a thread worker) and
the result (parameters with 95 % intervals, RMSE, notes, a text plot of data against fit).

Nothing here computes a fit figure: the numbers come from a
:class:`~robustff.fit.least_squares.FitResult`, the plot from
:func:`robustff.output.fit_plot.terminal_fit_plot` (always colourless: dots are data, the line
is the fit, so NO_COLOR terminals lose nothing).
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path
from typing import TYPE_CHECKING

from rich.console import JustifyMethod
from rich.table import Table
from rich.text import Text
from textual import work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical, VerticalScroll
from textual.markup import escape
from textual.screen import ModalScreen
from textual.widgets import Button, Input, Label, Select, Static

from robustff import CAUTION
from robustff.case import TIME_UNITS
from robustff.errors import DataError
from robustff.plant.models import MODEL_KINDS, TransferModel
from robustff.tui.fit_apply import (
    FIT_BLOCKS,
    FIT_RESAMPLES,
    FitRequest,
    FormError,
    csv_columns,
    error_field,
    fit_from_request,
    parse_fit_form,
)

if TYPE_CHECKING:
    from robustff.fit.least_squares import FitResult, ParameterEstimate

__all__ = ["FitFormScreen", "FitResultScreen", "estimates_table", "DEFAULT_FORM"]

#: Starting texts of the form.
DEFAULT_FORM: dict[str, str] = {"kind": "fopdt", "block": "process", "intervals": "jacobian",
                                "time_unit": ""}
_LABELS = {"gain": "gain K", "time_constant": "lag tau", "time_constant_2": "lag tau2",
           "dead_time": "dead time"}
_INPUTS = (("path", "CSV file", "path/to/bump-test.csv"),
           ("input", "input column", "e.g. the valve % column"),
           ("output", "output column", "the controlled variable"))


class FitFormScreen(ModalScreen["tuple[FitRequest, FitResult] | None"]):
    """Ask for the data and the model; Enter fits (in a worker), Escape cancels.

    Dismissed with ``(request, FitResult)`` once a fit succeeded. Problems with the entries or
    the data are shown in the form (the field marked, its text kept).
    """

    BINDINGS = [Binding("escape", "cancel", "Cancel"), Binding("ctrl+f", "fit", "Fit")]

    def __init__(self, values: dict[str, str], case_unit: str) -> None:
        super().__init__()
        self.values = values  # shared with the app: the texts survive closing the form
        self.case_unit = case_unit
        self.running = False

    def compose(self) -> ComposeResult:
        v = {**DEFAULT_FORM, **self.values}
        with Vertical(classes="dialog", id="fit-dialog"):
            yield Static("Fit a model to a bump test (CSV file with a header row)",
                         classes="question")
            for key, label, hint in _INPUTS:
                with Horizontal(classes="field"):
                    yield Label(label, classes="fit-label")
                    yield Input(v.get(key, ""), placeholder=hint, compact=True, id=f"fit-{key}")
            yield Static(self._columns_text(v.get("path", "")), id="fit-columns", classes="hint")
            with Horizontal(classes="field"):
                yield Label("time column", classes="fit-label")
                yield Input(v.get("time", ""), placeholder="or blank", compact=True, id="fit-time")
                yield Label(" or sample time ", classes="fit-or")
                yield Input(v.get("sample_time", ""), placeholder="dt", compact=True,
                            id="fit-sample_time")
            units = [(f"not given: as the case ({self.case_unit})", "")]
            units += [(unit, unit) for unit in TIME_UNITS]
            for key, label, options in (
                    ("time_unit", "data time unit", units),
                    ("kind", "model", [(k.upper(), k) for k in MODEL_KINDS]),
                    ("block", "for the case's", [(f"{b} model", b) for b in FIT_BLOCKS]),
                    ("intervals", "95 % intervals",
                     [("Jacobian (quick)", "jacobian"),
                      (f"bootstrap ({FIT_RESAMPLES} refits)", "bootstrap")])):
                with Horizontal(classes="field"):
                    yield Label(label, classes="fit-label")
                    yield Select(options, value=v.get(key, ""), allow_blank=False, compact=True,
                                 id=f"fit-{key}")
            yield Static("", classes="error", id="fit-error")
            yield Static("Enter in a text field or Ctrl+F: fit   Escape: cancel", classes="hint",
                         id="fit-state")
            with Horizontal(classes="buttons"):
                yield Button(escape("[ctrl+f] fit"), id="fit-run", compact=True)
                yield Button(escape("[esc] cancel"), id="fit-cancel", compact=True)

    def on_mount(self) -> None:
        self.query_one("#fit-path", Input).focus()

    @staticmethod
    def _columns_text(path: str) -> str:
        columns = csv_columns(Path(path)) if path.strip() else None
        return f"columns: {', '.join(columns)}" if columns else ""

    def on_input_changed(self, event: Input.Changed) -> None:
        if event.input.id == "fit-path":
            self.query_one("#fit-columns", Static).update(self._columns_text(event.value))

    def form_values(self) -> dict[str, str]:
        """The texts and choices as they stand."""
        values = {key: self.query_one(f"#fit-{key}", Input).value
                  for key in ("path", "input", "output", "time", "sample_time")}
        for key in ("time_unit", "kind", "block", "intervals"):
            choice = self.query_one(f"#fit-{key}", Select).value
            values[key] = choice if isinstance(choice, str) else ""
        return values

    def show_error(self, message: str | None, field: str | None = None) -> None:
        """Show why the fit was refused (text kept, ``field`` marked) or clear the error."""
        for widget in self.query(".field Input, .field Select"):
            widget.set_class(widget.id == f"fit-{field}", "invalid")
        line = self.query_one("#fit-error", Static)
        line.update(Text(f"✗ {message}") if message else "")
        line.set_class(message is not None, "shown")

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        self.action_fit()

    def on_button_pressed(self, event: Button.Pressed) -> None:
        if event.button.id == "fit-run":
            self.action_fit()
        else:
            self.action_cancel()

    def action_fit(self) -> None:
        if self.running:
            return
        self.values.update(self.form_values())
        try:
            request = parse_fit_form(self.values)
        except FormError as exc:
            self.show_error(str(exc), exc.field)
            return
        self.show_error(None)
        self.running = True
        how = "Jacobian" if request.intervals == "jacobian" else f"{FIT_RESAMPLES} bootstrap refits"
        self.query_one("#fit-state", Static).update(
            f"Fitting {request.kind.upper()} to {request.path.name} ({how})...")
        self._fit(request)

    @work(thread=True, exclusive=True, group="fit", exit_on_error=False)
    def _fit(self, request: FitRequest) -> None:
        try:
            result = fit_from_request(request)
        except DataError as exc:
            self._back(self._failed, request, str(exc))
            return
        self._back(self._fitted, request, result)

    def _back(self, callback: Callable[..., object], *args: object) -> None:
        try:
            self.app.call_from_thread(callback, *args)
        except RuntimeError:
            pass  # the app is closing

    def _failed(self, request: FitRequest, message: str) -> None:
        self.running = False
        if self.is_attached:
            self.query_one("#fit-state", Static).update("Enter or Ctrl+F: fit   Escape: cancel")
            self.show_error(message, error_field(message, request))

    def _fitted(self, request: FitRequest, result: FitResult) -> None:
        self.running = False
        if self.is_attached and self.app.screen is self:
            self.dismiss((request, result))

    def action_cancel(self) -> None:
        self.values.update(self.form_values())
        self.dismiss(None)


def _interval(estimate: ParameterEstimate) -> str:
    if estimate.ci95 is None:
        return "not computed"
    return f"{estimate.ci95[0]:.4g} .. {estimate.ci95[1]:.4g}"


def estimates_table(result: FitResult, time_unit: str) -> Table:
    """Fitted parameters with their 95 % intervals (times in ``time_unit``, the data's)."""
    table = Table(box=None, padding=(0, 2, 0, 0), show_edge=False, header_style="bold")
    columns: tuple[tuple[str, JustifyMethod], ...] = (
        ("parameter", "left"), ("value", "right"), ("95 % interval", "right"), ("unit", "left"))
    for title, justify in columns:
        table.add_column(title, justify=justify, no_wrap=True)
    record = result.record
    for name, estimate in result.estimates.items():
        if name == "gain":
            unit = f"{record.output_name}/{record.input_name}"
            unit += f" per {time_unit}" if result.model.integrating else ""
        else:
            unit = time_unit
        table.add_row(_LABELS.get(name, name), f"{estimate.value:.4g}", _interval(estimate), unit)
    return table


def _describe(model: TransferModel, unit: str) -> str:
    spec = model.spec
    parts = [f"K = {model.gain:.4g}"]
    parts += [f"{spec.parameter(name).symbol} = {getattr(model, name):.4g} {unit}"
              for name in spec.lag_parameters]
    parts.append(f"dead time = {model.dead_time:.4g} {unit}")
    return f"{model.kind.upper()} " + ", ".join(parts)


class FitResultScreen(ModalScreen[bool]):
    """A fit's result; ``a`` applies it to the case (dismisses True), ``k``/Escape keeps the case,
    ``p`` saves a PNG/SVG picture of data against fit."""

    BINDINGS = [Binding("a", "apply", "Apply"), Binding("escape,k", "keep", "Keep current"),
                Binding("p", "save_plot", "Save plot")]

    def __init__(self, request: FitRequest, result: FitResult, applied: TransferModel,
                 case_unit: str, unit_note: str) -> None:
        super().__init__()
        self.request, self.result = request, result
        self.applied, self.case_unit, self.unit_note = applied, case_unit, unit_note

    @property
    def data_unit(self) -> str:
        """Time unit of the fitted numbers, in words."""
        unit = self.result.record.time_unit
        return unit if unit else f"{self.case_unit} (assumed)"

    def compose(self) -> ComposeResult:
        result, record = self.result, self.result.record
        how = ("the Jacobian" if result.ci_method == "jacobian"
               else f"{FIT_RESAMPLES} bootstrap refits")
        head = (f"{result.model.kind.upper()} fitted to {Path(record.source).name}: "
                f"{record.input_name} -> {record.output_name}; least squares on the simulated "
                f"response, 95 % intervals by {how}; {record.size} samples every "
                f"{record.sample_time:g} {self.data_unit}.")
        notes = [f"note: {w}" for w in result.warnings]
        notes.append(f"Applying sets the case's {self.request.block} model to "
                     f"{_describe(self.applied, self.case_unit)} ({self.unit_note}).")
        with Vertical(classes="dialog", id="fit-result"):
            with VerticalScroll(id="fit-body"):
                yield Static(Text(head), classes="question")
                yield Static(estimates_table(result, self.data_unit), id="fit-table")
                yield Static(Text(f"RMSE of the fit: {result.rmse:.4g} {record.output_name}"),
                             id="fit-rmse")
                yield Static("", id="fit-plot")
                yield Static(Text("\n".join(notes)), classes="hint", id="fit-notes")
            yield Static(f"⚠ {CAUTION}", id="fit-caution")
            with Horizontal(classes="buttons"):
                yield Button(escape(f"[a] apply to {self.request.block}"), id="fit-apply",
                             compact=True)
                yield Button(escape("[k] keep current"), id="fit-keep", compact=True)
                yield Button(escape("[p] save plot"), id="fit-save-plot", compact=True)

    def on_mount(self) -> None:
        self.query_one("#fit-body").focus()  # arrows and Page keys scroll on small terminals
        self.call_after_refresh(self.draw_plot)

    def on_resize(self) -> None:
        self.call_after_refresh(self.draw_plot)

    def plot_size(self) -> tuple[int, int]:
        """Cells of the text plot: the width of its place, about half the terminal's height."""
        # less 2 cells for the scrollbar, which may appear once the plot is drawn
        width = self.query_one("#fit-plot", Static).content_region.width - 2
        if width <= 0:  # not laid out yet: the dialog's CSS width less borders and scrollbar
            width = min(100, int(self.app.size.width * 0.95)) - 7
        return max(30, width), max(8, min(20, self.app.size.height - 19))

    def draw_plot(self) -> None:
        """Draw data (dots) and fit (line) at the current terminal size, without colour."""
        from robustff.output.fit_plot import terminal_fit_plot

        record = self.result.record
        width, height = self.plot_size()
        text = terminal_fit_plot(record.times, record.output, self.result.fitted, width, height,
                                 colorless=True)
        legend = f"{record.output_name} against time [{self.data_unit}]: • data, line: fit"
        self.query_one("#fit-plot", Static).update(Text(f"{legend}\n{text}"))

    def on_button_pressed(self, event: Button.Pressed) -> None:
        if event.button.id == "fit-save-plot":
            self.action_save_plot()
        else:
            self.dismiss(event.button.id == "fit-apply")

    def action_apply(self) -> None:
        self.dismiss(True)

    def action_keep(self) -> None:
        self.dismiss(False)

    def action_save_plot(self) -> None:
        from robustff.tui.dialogs import PathScreen

        default = str(self.request.path.with_name(self.request.path.stem + "-fit.png"))
        self.app.push_screen(PathScreen("Save data and fit as (a .png or .svg file):", default),
                             self.save_plot)

    def save_plot(self, text: str | None) -> None:
        """Write the PNG/SVG picture of ``robustff fit --plot`` to the path ``text``."""
        if not text:
            return
        from robustff.output.fit_plot import save_fit_plot

        path = Path(text).expanduser()
        try:
            save_fit_plot([self.result], path, self.result.record.time_unit)
        except DataError as exc:
            self.app.notify(f"plot not saved: {exc}", severity="error", timeout=8)
            return
        self.app.notify(f"plot saved to {path}")
