"""Is a valid case also a sensible one? What cannot run, and what is suspicious.

The case loader checks each key on its own (types, ranges, required keys). This review looks at
the case as a whole, after the controller and feedforward have been designed from the nominal
models, and sorts what it finds into

* **errors**: designs that cannot run (a controller gain that is infinite or zero, non-finite
  settings, numbers that overflow floating point in the simulation), each naming the key to fix;
* **warnings**: designs that run but are probably not what the engineer meant (a nominal loop
  that is unstable or beyond the usual margin limits, dead times or uncertainty ranges beyond the
  simulated window, a nominal value outside its own uncertainty range, a ramp running past the
  end of the window, a controller step that does not divide the window, control characters in
  the title).

``robustff check`` and ``robustff run`` (and the studio) call :func:`review_case`; the shells only
print what it returns.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from robustff.case import Case, UncertainParameter
from robustff.case.record import record_window_note
from robustff.case.sampling import distribution_bounds
from robustff.case.text import control_characters
from robustff.design.margins import model_margins
from robustff.design.margins_result import (
    GAIN_MARGIN_LIMIT,
    MS_LIMIT,
    PHASE_MARGIN_LIMIT,
    MarginResult,
)
from robustff.design.tuning import LoopDesign, design_loop
from robustff.errors import RobustffError

__all__ = ["Finding", "CaseReview", "review_case", "margin_warnings", "margin_line",
           "nominal_outside_range"]

#: Relative tolerance when checking that the controller step divides the window.
_STEP_TOLERANCE = 1e-9


@dataclass(frozen=True)
class Finding:
    """One problem: the case key it concerns and a sentence for the engineer."""

    key: str
    message: str

    def text(self) -> str:
        """``"key: message"``."""
        return f"{self.key}: {self.message}"


@dataclass(frozen=True)
class CaseReview:
    """What :func:`review_case` found.

    Attributes
    ----------
    errors : tuple of Finding
        The case cannot run; the study must be refused.
    warnings : tuple of Finding
        The case runs but something is probably not meant.
    design : LoopDesign
        The design from the nominal models.
    nominal_margins : MarginResult or None
        Margins of the nominal feedback loop as simulated: the controller sampled at the scan
        period (``[simulation] step``), output held (None when the design cannot run). The
        margin warnings are judged on these, as ``robustff run`` does.
    nominal_continuous_margins : MarginResult or None
        The same loop with a continuous-time controller (what continuous tuning rules quote).
    """

    errors: tuple[Finding, ...]
    warnings: tuple[Finding, ...]
    design: LoopDesign
    nominal_margins: MarginResult | None
    nominal_continuous_margins: MarginResult | None = None

    @property
    def ok(self) -> bool:
        return not self.errors


def margin_warnings(margins: MarginResult) -> list[str]:
    """Nominal-loop margin warnings against the design limits (Ms > 2, GM < 2, PM < 30 deg:
    common practice, no source); an unstable loop gives that one warning only."""
    if not bool(margins.stable[0]):
        return ["the nominal feedback loop is unstable (the controller destabilises the nominal "
                "plant): retune the controller"]
    warnings = []
    gm, pm, ms = (float(margins.gain_margin[0]), float(margins.phase_margin[0]),
                  float(margins.ms[0]))
    if ms > MS_LIMIT:
        warnings.append(f"nominal Ms = {ms:.2f} > {MS_LIMIT:g}: the loop is poorly damped")
    if gm < GAIN_MARGIN_LIMIT:
        warnings.append(f"nominal gain margin {gm:.2f} < {GAIN_MARGIN_LIMIT:g}: a plant gain "
                        f"{gm:.2f} times the nominal one makes the loop unstable")
    if pm < PHASE_MARGIN_LIMIT:
        warnings.append(f"nominal phase margin {pm:.1f} deg < {PHASE_MARGIN_LIMIT:g} deg")
    return warnings


def margin_line(margins: MarginResult, time_unit: str, which: str = "") -> str:
    """The nominal margins in one line with units, e.g. ``"gain margin 3.1 (ratio), ..."``;
    ``which`` names the loop, e.g. ``"as simulated, 0.5 s scan period"``."""
    head = f"Nominal feedback margins ({which})" if which else "Nominal feedback margins"
    if not bool(margins.stable[0]):
        return f"{head}: the nominal loop is unstable (no margins)"

    def value(x: float, unit: str, digits: str = ".3g") -> str:
        return "none (no crossover)" if math.isinf(x) else f"{x:{digits}} {unit}"

    return (
        f"{head}: gain margin "
        f"{value(float(margins.gain_margin[0]), '(ratio)')}, phase margin "
        f"{value(float(margins.phase_margin[0]), 'deg', '.1f')}, delay margin "
        f"{value(float(margins.delay_margin[0]), time_unit)}, Ms "
        f"{value(float(margins.ms[0]), '(ratio)')}"
    )


def review_case(case: Case) -> CaseReview:
    """Design the loop from the nominal models and review the case as a whole.

    Parameters
    ----------
    case : Case
        A case the loader accepted.

    Returns
    -------
    CaseReview

    Raises
    ------
    DesignError
        When no design can be built at all (as :func:`~robustff.design.tuning.design_loop`).
    """
    design = design_loop(case)
    errors = _design_errors(case, design)
    warnings: list[Finding] = []
    margins = continuous = None
    if not errors:
        try:
            path = case.secondary.model if case.secondary else None
            margins = model_margins(case.process, design.feedback, case.simulation.step,
                                    valve=case.valve, secondary=path,
                                    secondary_feedback=design.secondary)
            continuous = model_margins(case.process, design.feedback, valve=case.valve,
                                       secondary=path, secondary_feedback=design.secondary)
        except RobustffError as exc:
            errors.append(Finding("feedback", f"the nominal loop cannot be analysed ({exc})"))
        else:
            warnings += [Finding("feedback", text) for text in margin_warnings(margins)]
    warnings += _window_warnings(case) + _uncertainty_warnings(case) + _event_warnings(case)
    warnings += _text_warnings(case)
    return CaseReview(tuple(errors), tuple(warnings), design, margins, continuous)


def _finite_nonzero(x: float) -> bool:
    return math.isfinite(x) and x != 0.0


def _design_errors(case: Case, design: LoopDesign) -> list[Finding]:
    fb = design.feedback
    errors: list[Finding] = []
    manual = case.feedback.tuning == "manual"
    gain_key = "feedback.kc" if manual else "process.gain"
    if not _finite_nonzero(fb.kc):
        if manual:
            text = f"Kc = {fb.kc:g}: the loop cannot be simulated with an infinite or zero gain"
        else:
            text = (f"{case.process.gain:g} gives the controller gain Kc = {fb.kc:g} ({fb.rule} "
                    "rule): the loop cannot be simulated with an infinite or zero gain; check "
                    "the process gain and its unit")
        errors.append(Finding(gain_key, text))
    settings = {"Ti": fb.ti, "Td": fb.td, "tracking time": fb.tracking_time}
    bad = [f"{name} = {value:g}" for name, value in settings.items() if not math.isfinite(value)]
    if bad:
        errors.append(Finding(
            "feedback.ti" if manual else "process.time_constant",
            f"the design gives non-finite settings ({', '.join(bad)})"))
    span = max(abs(case.feedback.output_low), abs(case.feedback.output_high),
               abs(case.feedback.output_bias), 1.0)
    if _finite_nonzero(fb.kc) and not math.isfinite(case.process.gain * span):
        errors.append(Finding(
            "process.gain",
            f"{case.process.gain:g} times the output range ({span:g}) overflows floating point: "
            "the simulated controlled variable would be infinite"))
    sizes = [abs(event.size) for event in case.events] or [1.0]
    for item, ff in zip(case.disturbance_inputs, design.all_compensators, strict=True):
        key = f"{item.key_prefix}.gain"
        gain = item.model.gain
        if not math.isfinite(gain * max(sizes)):
            errors.append(Finding(
                key, f"{gain:g} times the largest event size ({max(sizes):g}) overflows "
                "floating point"))
        if ff.structure == "none":
            continue
        values = {"gain": ff.gain, "lead": ff.lead, "lag": ff.lag, "delay": ff.delay}
        bad = [f"{name} = {value:g}" for name, value in values.items() if not math.isfinite(value)]
        if not bad and not math.isfinite(ff.gain * max(sizes)):
            bad = [f"gain {ff.gain:g} times the event size {max(sizes):g}"]
        if bad:
            errors.append(Finding(
                key, f"the feedforward designed from {key} {gain:g} and "
                f"process.gain {case.process.gain:g} is not finite ({', '.join(bad)})"))
    return errors


def _window_warnings(case: Case) -> list[Finding]:
    sim, unit = case.simulation, case.time_unit
    warnings = []
    steps = sim.duration / sim.step
    if abs(steps - round(steps)) > _STEP_TOLERANCE * max(1.0, steps):
        warnings.append(Finding(
            "simulation.step",
            f"{sim.step:g} {unit} does not divide the duration {sim.duration:g} {unit}: the "
            f"window is {sim.n_steps} steps = {sim.n_steps * sim.step:g} {unit}"))
    for block, model in (("process", case.process),
                         *((item.key_prefix, item.model) for item in case.disturbance_inputs)):
        if model.dead_time >= sim.duration:
            warnings.append(Finding(
                f"{block}.dead_time",
                f"{model.dead_time:g} {unit} is not shorter than the {sim.duration:g} {unit} "
                "window: the response never appears in the simulation"))
    return warnings


def _is_time_parameter(case: Case, key: str) -> bool:
    block, name = key.split(".", 1)
    if block == "process" and case.balance is not None and (
            name in case.balance.plant.parameter_names()):
        return case.balance.plant.parameter(name).unit == "{time}"  # a physical parameter
    name = key.rsplit(".", 1)[1]
    return name not in ("gain", "noise_std")


def nominal_outside_range(case: Case, parameter: UncertainParameter) -> bool:
    """True when the nominal value of ``parameter`` lies outside its uncertainty range.

    The range is the support of a uniform or triangular distribution, the P0.5 .. P99.5 range
    (clipped) of a normal or lognormal one; a relative range is centred on the nominal.
    """
    if parameter.distribution.kind == "relative":
        return False
    nominal = case.nominal_value(parameter.key)
    low, high = distribution_bounds(parameter, nominal)
    return not low <= nominal <= high


def _uncertainty_warnings(case: Case) -> list[Finding]:
    sim, unit = case.simulation, case.time_unit
    warnings = []
    for parameter in case.uncertainty:
        key = parameter.key
        nominal = case.nominal_value(key)
        low, high = distribution_bounds(parameter, nominal)
        if nominal_outside_range(case, parameter):
            own = case.parameter_unit(key)
            warnings.append(Finding(
                f"uncertainty.{key}",
                f"the nominal value {nominal:g} {own} lies outside its "
                f"uncertainty range {low:.4g} .. {high:.4g} {own}: the controller and "
                "feedforward are designed for a plant that no sample contains"))
        if _is_time_parameter(case, key) and high > sim.duration:
            warnings.append(Finding(
                f"uncertainty.{key}",
                f"the range reaches {high:.4g} {unit}, beyond the {sim.duration:g} {unit} "
                "window: those samples' responses are cut off by the end of the simulation"))
    return warnings


def _event_warnings(case: Case) -> list[Finding]:
    sim, unit = case.simulation, case.time_unit
    warnings = []
    for index, event in enumerate(case.events, start=1):
        key = f"event[{index}]"
        if event.at >= sim.duration:
            warnings.append(Finding(
                f"{key}.at", f"{event.at:g} {unit} is not inside the {sim.duration:g} {unit} "
                "window: the event never happens"))
        elif event.kind == "disturbance-ramp" and event.at + event.duration > sim.duration:
            warnings.append(Finding(
                f"{key}.duration",
                f"the ramp from {event.at:g} {unit} over {event.duration:g} {unit} runs past the "
                f"end of the {sim.duration:g} {unit} window: only part of its size is applied"))
        if event.record is not None:  # what reading and placing the record assumed
            note = record_window_note(event.record, event.at, sim.duration, sim.step, unit)
            warnings += [Finding(f"{key}.file", text)
                         for text in (*event.record.notes, *([note] if note else []))]
    return warnings


def _text_warnings(case: Case) -> list[Finding]:
    found = control_characters(case.title)
    if not found:
        return []
    return [Finding("title", f"contains control characters ({', '.join(found)}); reports show "
                    "them as spaces")]
