"""Modal screens of the studio: help, yes/no style questions, and a path prompt."""

from __future__ import annotations

from textual import events
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical, VerticalScroll
from textual.markup import escape
from textual.screen import ModalScreen
from textual.widgets import Button, Input, OptionList, Static

__all__ = ["HelpScreen", "ChoiceScreen", "PathScreen", "ListScreen", "HELP_TEXT"]

HELP_TEXT = """\
robustff studio: edit the case on the left; the study reruns by itself
on the right.

Editing
  Tab / Shift+Tab  move between fields (leaving a field applies it)
  Enter            apply the field       Escape  leave the field
  Up/Down, Enter   choose in a list      Ctrl+Z  undo the last edit
  del              remove an uncertain parameter (Ctrl+Z brings it back)
  The focused field is in reverse video and its label carries ▸.
  Numbers: '-2.6, -1.0' (commas); a blank optional field lets the tuning
  rule decide. A refused edit keeps your text and shows the reason (✗)
  under the field; the results are marked STALE (dimmed, with the
  reason) until the field holds an accepted value.
  ⚠ under a field or range: a warning of the case review, e.g. a nominal
  value outside its uncertainty range ([fix range] widens or moves it).

The loop as installed
  Feedback controller: its structure (ideal, series, parallel), the gain
  as Kc or as a proportional band PB (needs the spans, [signals] range),
  the integral as Ti or repeats (typing one clears the other), Ki/Kd in
  the parallel form, setpoint weights b and c. Changing the structure of
  a manual controller rewrites its settings: the controller stays.
  Valve: characteristic (none: ideal actuator), installed table as
  position % : flow fraction pairs ('0:0, 50:0.3, 100:1'), stiction S
  and J, deadband, rate limit, actuator lag.
  Secondary loop: its path model, SIMC or manual PI (manual starts from
  SIMC's settings), tau_c, scans per primary scan. A case without one
  gets it in the case file ([secondary]).

Files
  Ctrl+S  save the case (atomic; file mode and comments kept where
          possible, else you are told; asks first if it does not
          validate)
  F2      save as (a copy of the same document, comments kept)
  Ctrl+E  export results (the files of 'robustff run --out'; complete
          runs only, never the quick pass)
  Ctrl+R  reload from disk   Ctrl+Q  quit (asks first if unsaved)
  Edits are autosaved to a recovery file; the next start offers to
  restore them.

Runs
  Each edit cancels the running study and starts again: a quick pass of
  500 plants first, then the case's sample count with a progress bar.
  F5  rerun now. The first start on a machine compiles the simulator
  (about 10-30 s); later starts take 1-3 s.

Robust feedforward
  F6  search the feedforward gain factor, lead, lag and delay that stay
      good across the uncertainty (the search of 'robustff tune', on at
      most 1000 plants here); choose the objective (P90 of IAE, CVaR or
      P(harm)); Escape stops the search. The result compares nominal
      and robust settings; [a] writes them into the case and reruns.

Models from plant data
  F7  fit an FOPDT, SOPDT or IPDT model to a bump test (CSV: input,
      output, time column or sample time), with 95 % intervals, RMSE
      and a text plot of data (dots) against the fit; [a] sets the
      process or disturbance model (to 4 significant digits; times
      converted to the case's unit when the data's unit is given, else
      assumed equal) and reruns; [p] saves a PNG/SVG picture.

Disturbances
  F8  add a disturbance (a default FOPDT with a new name; a case with
      one [disturbance] table then names it, e.g. cold_water_flow)
  A case that names its disturbances shows each: name (renaming moves
  its events, ranges and [feedforward.NAME]), unit, measured yes/no
  (no: feedback alone; its transmitter, transmitter ranges and
  [feedforward.NAME] go), path model, meter lag and noise, and
  [remove NAME...] (asks first; its events, ranges and override go
  too; the last disturbance or the only events cannot be removed).

Reading the results
  fb = feedback only, fbff = feedback with feedforward (as in the
  result files). verdict: ▼ better / ▲ WORSE / = same compare the
  medians of fbff against fb.
  P(harm): the fraction of plants whose IAE is worse with feedforward.
  Unstable loops: plants whose closed loop is unstable, per arm.
  Histogram: IAE of fbff divided by fb per plant; ┃ marks 1.0 (right
  of it feedforward hurts).
  Band plot: ░ fb, ▒ fbff, ▓ both; medians: o fb, x fbff; ╌ the
  allowed band setpoint +- [signals.controlled] band, when given.
  Record: a recorded disturbance trace as replayed (each column spans
  its lowest to highest value there), in the disturbance's unit.
  Where feedforward helps (one chart per measured disturbance): the
  error ratio fbff/fb over frequency (log axis, rad per time unit),
  ░ P5-P95 of the plants, o P50; below the ┄ line at 1 feedforward
  reduces the error. ┃ the crossover: up to it, it helps in 90 % of
  the plants; with a record, the share of its variance below it.
  The caution folds to one sentence after the first results; F9 shows
  it in full.

Terms
  tau_c   closed-loop time constant the tuning rule aims at
  Kc, Ti, Td  controller gain, integral time, derivative time
  Tt      anti-windup tracking time (back-calculation)
  Ms      maximum sensitivity, the peak of |1/(1+L)|; above 2 the loop
          is poorly damped
  GM, PM  gain margin (ratio) and phase margin (degrees)
  CVaR90  mean IAE of the worst 10 % of plants
  P5/P50/P95  percentiles over the simulated plants

F1 or ? opens this help; Escape closes it. Ctrl+P opens the command
palette (every action of the studio).
"""


class HelpScreen(ModalScreen[None]):
    """Keys and how to read the panes."""

    BINDINGS = [Binding("escape,q,f1,question_mark", "close", "Close")]

    def compose(self) -> ComposeResult:
        with VerticalScroll(id="help-box"):
            yield Static(escape(HELP_TEXT), id="help-text")

    def action_close(self) -> None:
        self.dismiss(None)


class ChoiceScreen(ModalScreen[str]):
    """A question with a few answers, each on a button and a key (e.g. s = save, d = discard)."""

    BINDINGS = [Binding("escape", "choose('cancel')", "Cancel")]

    def __init__(self, question: str, choices: list[tuple[str, str]]) -> None:
        super().__init__()
        self.question = question
        self.choices = choices  # (key, label)

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog"):
            yield Static(self.question, classes="question")
            with Horizontal(classes="buttons"):
                for key, label in self.choices:
                    yield Button(escape(f"[{key}] {label}"), id=f"choice-{key}", compact=True)

    def on_key(self, event: events.Key) -> None:
        if event.key in {key for key, _ in self.choices}:
            event.stop()
            self.dismiss(event.key)

    def on_button_pressed(self, event: Button.Pressed) -> None:
        self.dismiss((event.button.id or "choice-cancel").removeprefix("choice-"))

    def action_choose(self, key: str) -> None:
        self.dismiss(key)


class PathScreen(ModalScreen[str | None]):
    """Ask for a file or folder path (Enter accepts, Escape cancels)."""

    BINDINGS = [Binding("escape", "cancel", "Cancel")]

    def __init__(self, title: str, default: str) -> None:
        super().__init__()
        self.title_text = title
        self.default = default

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog"):
            yield Static(self.title_text, classes="question")
            yield Input(self.default, id="path-input")
            yield Static("Enter: accept   Escape: cancel", classes="hint")

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        self.dismiss(event.value.strip() or None)

    def action_cancel(self) -> None:
        self.dismiss(None)


class ListScreen(ModalScreen[str | None]):
    """Choose one of a list (Up/Down and Enter, or a click); Escape cancels.

    A dialog of its own rather than a drop-down, so the whole list is shown in the middle of
    the screen wherever the control that opened it sits (a drop-down at the bottom of a pane
    would open as one line over the footer).
    """

    BINDINGS = [Binding("escape", "cancel", "Cancel")]

    def __init__(self, title: str, choices: list[str]) -> None:
        super().__init__()
        self.title_text = title
        self.choices = choices

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog", id="list-dialog"):
            yield Static(self.title_text, classes="question")
            yield OptionList(*[escape(choice) for choice in self.choices], id="list-options")
            yield Static("Up/Down, Enter: choose   Escape: cancel", classes="hint")

    def on_option_list_option_selected(self, event: OptionList.OptionSelected) -> None:
        event.stop()
        self.dismiss(self.choices[event.option_index])

    def action_cancel(self) -> None:
        self.dismiss(None)
