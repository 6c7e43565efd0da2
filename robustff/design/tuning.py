"""Feedback tuning and feedforward design from the NOMINAL models.

Feedback rules (ideal/parallel PID form ``u = Kc (e + 1/Ti int e dt - Td dy_f/dt)``):

* SIMC (Skogestad, "Simple analytic rules for model reduction and PID controller tuning",
  J. Process Control 13 (2003) 291-309):

  - FOPDT, PI: ``Kc = tau / (K (tau_c + theta))``, ``Ti = min(tau, 4 (tau_c + theta))``;
  - SOPDT, PID (series form ``Kc' (1 + 1/(Ti' s)) (1 + Td' s)``): ``Kc'``, ``Ti'`` as for FOPDT
    with ``tau = tau1`` and ``Td' = tau2``, converted to the ideal form
    (``Kc = Kc' (1 + Td'/Ti')``, ``Ti = Ti' + Td'``, ``Td = Ti' Td' / (Ti' + Td')``);
    SOPDT with a PI is first reduced by the half rule (``tau1 + tau2/2``, ``theta + tau2/2``);
  - IPDT, PI: ``Kc = 1 / (K (tau_c + theta))``, ``Ti = 4 (tau_c + theta)``.

* IMC:

  - FOPDT, PI: ``Kc = tau / (K (tau_c + theta))``, ``Ti = tau`` (IMC with a first-order Taylor
    delay approximation, often called lambda tuning);
  - FOPDT, PID: first-order Pade delay, ``Kc = (tau + theta/2) / (K (tau_c + theta/2))``,
    ``Ti = tau + theta/2``, ``Td = tau theta / (2 tau + theta)`` (Rivera, Morari and Skogestad,
    Ind. Eng. Chem. Process Des. Dev. 25 (1986); derived in tests);
  - SOPDT, PID: series ``Kc' = tau1 / (K (tau_c + theta))``, ``Ti' = tau1``, ``Td' = tau2``;
    PI via the half rule then the FOPDT PI rule;
  - IPDT, PI: ``Kc = (2 tau_c + theta) / (K (tau_c + theta)^2)``, ``Ti = 2 tau_c + theta``.

Where a rule yields no derivative action (FOPDT or IPDT under SIMC, IPDT under IMC) and a PID was
asked for, the derivative time is zero and the design says so.

The derivative acts on the measurement (or on ``c r - y`` with a derivative setpoint weight c)
through a first-order filter of time constant ``0.1 Td`` unless the case gives another fraction
(common practice, no source). Manual settings in the series or parallel form, as a proportional
band or in repeats, are converted to the ideal form by :mod:`robustff.design.controller_forms`.
Anti-windup is by back-calculation with tracking time
``Tt = Ti`` (PI) or ``sqrt(Ti Td)`` (PID) (Astrom and Hagglund, Advanced PID Control, 2006).

Feedforward: the ideal compensator ``Gff = -Gd / Gp`` reduced to ``Kff (lead s + 1) / (lag s + 1)
exp(-delay s)``. See :func:`design_feedforward`.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field, replace

from robustff.case import BalanceSpec, Case, FeedbackSpec, FeedforwardSpec, Signals
from robustff.design.controller_forms import (
    form_lines,
    ideal_notes,
    manual_ideal,
    series_to_ideal,
)
from robustff.design.linearised_actuation import LinearisedActuation, linearised_actuation
from robustff.errors import DesignError
from robustff.plant.kinds import FOPDT, IPDT, SOPDT
from robustff.plant.models import TransferModel
from robustff.units import per_unit

__all__ = [
    "FeedbackSettings",
    "FeedforwardSettings",
    "LoopDesign",
    "NamedFeedforward",
    "TUNING_RULES",
    "tune_feedback",
    "design_feedforward",
    "design_loop",
    "tune_secondary",
    "case_actuation",
    "series_to_ideal",
    "half_rule",
    "DERIVATIVE_FILTER_FRACTION",
]

DERIVATIVE_FILTER_FRACTION = 0.1


@dataclass(frozen=True)
class FeedbackSettings:
    """A designed PI/PID controller (ideal form, derivative on measurement).

    Parameters
    ----------
    form : {"pi", "pid"}
    kc : float
        Controller gain, output units per CV unit (negative for a negative process gain).
    ti : float
        Integral time, time units.
    td : float
        Derivative time, time units (0 for PI).
    filter_time : float
        Time constant of the derivative filter, time units.
    tracking_time : float
        Back-calculation anti-windup tracking time, time units.
    output_low, output_high, output_bias : float
        Output limits and initial steady-state output, output units.
    closed_loop_time : float
        tau_c used by the rule, time units (NaN for manual tuning).
    rule : str
        Which rule produced the settings.
    setpoint_weight : float
        Weight b of the setpoint in the proportional action, dimensionless.
    derivative_setpoint_weight : float
        Weight c of the setpoint in the derivative action, dimensionless (0: derivative on the
        measurement).
    """

    form: str
    kc: float
    ti: float
    td: float
    filter_time: float
    tracking_time: float
    output_low: float
    output_high: float
    output_bias: float
    closed_loop_time: float
    rule: str
    setpoint_weight: float = 1.0
    derivative_setpoint_weight: float = 0.0

    def to_dict(self) -> dict[str, float | str]:
        """The fields of ``summary.json``'s ``design.feedback`` (setpoint weights not yet in
        its schema)."""
        return {key: value for key, value in self.__dict__.items()
                if key not in ("setpoint_weight", "derivative_setpoint_weight")}


@dataclass(frozen=True)
class FeedforwardSettings:
    """A designed feedforward compensator ``gain (lead s + 1)/(lag s + 1) exp(-delay s)``.

    Parameters
    ----------
    structure : str
        "none", "static", "lead-lag" or "lead-lag-delay".
    gain : float
        Compensator gain including ``gain_factor``, output units per disturbance unit.
    lead, lag, delay : float
        Time units. ``lag`` is > 0 whenever ``lead`` > 0.
    gain_factor : float
        The detuning factor that was applied.
    input_filter : float
        Time constant of the first-order filter on the measured disturbance before the
        compensator, time units (0: none).
    law : {"linear", "balance"}
        The compensator above (``"linear"``), or a balance plant's steady-state balance solved
        for the manipulated flow with this lead-lag on it (``"balance"``).
    trim : {"add", "multiply"}
        How the feedback output trims the balance law's flow.
    path_lag : float
        The nominal disturbance path's largest lag, time units (0: none): what a compensator
        without a lag of its own has its delay's fraction ride on (see :attr:`delay_lag`).
    """

    structure: str
    gain: float
    lead: float
    lag: float
    delay: float
    gain_factor: float
    input_filter: float = 0.0
    law: str = "linear"
    trim: str = "add"
    path_lag: float = 0.0

    @property
    def active(self) -> bool:
        if self.law == "balance":
            return self.structure != "none"
        return self.structure != "none" and self.gain != 0.0

    @property
    def delay_lag(self) -> float:
        """The lag the sampled delay's fraction is made exact for, time units: the
        compensator's own lag (it stands for the disturbance path's), else :attr:`path_lag`."""
        return self.lag if self.lag > 0.0 else self.path_lag

    def to_dict(self) -> dict[str, object]:
        """The fields of ``summary.json`` (``path_lag``, a discretisation detail, not among
        them)."""
        return {key: value for key, value in self.__dict__.items() if key != "path_lag"}


@dataclass(frozen=True)
class NamedFeedforward:
    """One alternative feedforward design of a case (a ``[[design]]`` table), as designed.

    Parameters
    ----------
    name : str
        The design's name.
    settings : FeedforwardSettings
        The designed compensator (gain in output units per disturbance unit, times in the
        case's time unit).
    notes : tuple of str
        The design rule's notes for this design.
    """

    name: str
    settings: FeedforwardSettings
    notes: tuple[str, ...] = ()
    #: One compensator per disturbance, in case order (see :attr:`LoopDesign.compensators`).
    compensators: tuple[FeedforwardSettings, ...] = ()


@dataclass(frozen=True)
class LoopDesign:
    """Feedback and feedforward designs plus notes for the engineer (realizability etc.).

    ``feedforward`` is the case's own ``[feedforward]`` for its first measured disturbance;
    ``compensators`` holds one per disturbance, in case order (structure ``"none"`` for an
    unmeasured one; empty: ``(feedforward,)``, the single disturbance); their outputs add at
    the controller output. ``alternatives`` are the case's other designs, simulated on the
    same plants.
    """

    feedback: FeedbackSettings
    feedforward: FeedforwardSettings
    notes: tuple[str, ...] = field(default=())
    alternatives: tuple[NamedFeedforward, ...] = ()
    #: The secondary (flow) controller, PI in ideal form, output in % (None without one).
    secondary: FeedbackSettings | None = None
    compensators: tuple[FeedforwardSettings, ...] = ()
    #: The nominal plant built from balances the balance law and the linear designs were
    #: designed from, with its measured inputs (None for transfer-function models).
    balance: BalanceSpec | None = None

    @property
    def all_compensators(self) -> tuple[FeedforwardSettings, ...]:
        """Every disturbance's compensator, in case order."""
        return self.compensators or (self.feedforward,)

    def with_headline(self, feedforward: FeedforwardSettings, case: Case) -> LoopDesign:
        """The same design with the headline disturbance's compensator (``feedforward``,
        :attr:`Case.headline_input`) replaced; the other disturbances' are kept."""
        compensators = self.compensators
        if compensators:
            index = case.disturbance_inputs.index(case.headline_input)
            compensators = (*compensators[:index], feedforward, *compensators[index + 1:])
        return replace(self, feedforward=feedforward, compensators=compensators)

    def with_feedforward(self, feedforward: FeedforwardSettings,
                         compensators: tuple[FeedforwardSettings, ...] = ()) -> LoopDesign:
        """The same feedback loop with another feedforward design (no alternatives):
        ``feedforward`` and, with several disturbances, every one's ``compensators``."""
        return LoopDesign(self.feedback, feedforward, self.notes, secondary=self.secondary,
                          compensators=compensators, balance=self.balance)

    def to_dict(self, case: Case | None = None) -> dict[str, object]:
        """``summary.json``'s ``design``; with several disturbances (``case`` given) also
        every one's compensator."""
        out: dict[str, object] = {
            "feedback": self.feedback.to_dict(),
            "feedforward": self.feedforward.to_dict(),
            "notes": list(self.notes),
        }
        if self.compensators and case is not None:
            out["compensators"] = compensator_dicts(case, self.compensators)
        return out

    def feedback_lines(self, case: Case) -> list[str]:
        """The feedback controller in ideal form, then in the case's form with the units the
        engineer types into the control system, its action, weights and limits."""
        unit = case.time_unit
        out_unit = case.signals.output.unit or "output units"
        fb = self.feedback
        gain_note, integral_note = ideal_notes(fb.kc, fb.ti, case.feedback, case.signals, unit)
        return [
            f"Feedback ({fb.rule}): {fb.form.upper()}, ideal form: Kc = {fb.kc:.4g} "
            f"{case.signals.output.unit or 'output'}/{case.signals.controlled.unit or 'CV'}"
            f"{gain_note}, Ti = {fb.ti:.4g} {unit}{integral_note}, Td = {fb.td:.4g} {unit}"
            + (
                ""
                if math.isnan(fb.closed_loop_time)
                else f", tau_c = {fb.closed_loop_time:.4g} {unit}"
            ),
            *("  " + line for line in form_lines(
                fb.kc, fb.ti, fb.td, fb.filter_time, case.feedback, case.signals, unit)),
            f"  output limits {fb.output_low:g} .. {fb.output_high:g} {out_unit}, bias "
            f"{fb.output_bias:g} {out_unit}; "
            f"anti-windup: back-calculation, Tt = {fb.tracking_time:.4g} {unit}",
        ]

    def summary_lines(self, case: Case) -> list[str]:
        """Human-readable lines describing the design, with units from the case."""
        unit = case.time_unit
        out_unit = case.signals.output.unit or "output units"
        lines = self.feedback_lines(case)
        several = len(self.all_compensators) > 1
        if case.balance is not None and self.feedforward.law == "balance":
            lines.extend(_balance_law_lines(self.feedforward, case))
            several = False
        else:
            for item, ff in zip(case.disturbance_inputs, self.all_compensators, strict=True):
                source = f" from {item.name}" if several else ""
                dist_unit = (item.unit if case.disturbances else case.signals.disturbance.unit)
                if not item.measured:
                    lines.append(f"Feedforward{source}: none (not measured)")
                elif ff.structure == "none":
                    lines.append(f"Feedforward{source}: none")
                else:
                    lines.append(
                        f"Feedforward{source} ({ff.structure}): gain = {ff.gain:.4g} "
                        f"{per_unit(out_unit, dist_unit or 'disturbance unit')} "
                        f"(gain factor {ff.gain_factor:g}), lead = {ff.lead:.4g} {unit}, "
                        f"lag = {ff.lag:.4g} {unit}, delay = {ff.delay:.4g} {unit}"
                        + (f", input filter = {ff.input_filter:.4g} {unit}" if ff.input_filter
                           else "")
                    )
        if several:
            lines.append("  the compensators' outputs add at the controller output")
        lines.extend(f"  note: {note}" for note in self.notes)
        return lines


def compensator_dicts(case: Case, compensators: tuple[FeedforwardSettings, ...]
                      ) -> list[dict[str, object]]:
    """Each disturbance's compensator as ``summary.json`` writes it (name, measured, settings)."""
    return [{"disturbance": item.label, "measured": item.measured} | ff.to_dict()
            for item, ff in zip(case.disturbance_inputs, compensators, strict=True)]


def _balance_law_lines(ff: FeedforwardSettings, case: Case) -> list[str]:
    """A balance plant's balance-law feedforward in words."""
    assert case.balance is not None
    plant, unit = case.balance.plant, case.time_unit
    dynamics = (f", lead = {ff.lead:.4g} {unit}, lag = {ff.lag:.4g} {unit}"
                if ff.structure == "lead-lag" else "")
    measured = ", ".join(case.balance.measured) or "none"
    return [f"Feedforward (balance law, {ff.structure}): {plant.LAW_TEXT} at every scan "
            f"(measured: {measured}; the others at their nominal values; gain factor "
            f"{ff.gain_factor:g}){dynamics}; the feedback output "
            f"{'multiplies' if ff.trim == 'multiply' else 'adds to'} the computed flow"]


def half_rule(model: TransferModel) -> TransferModel:
    """SOPDT -> FOPDT by Skogestad's half rule (half of tau2 to the lag, half to the delay).

    Parameters
    ----------
    model : TransferModel
        A SOPDT model (gain, tau1 and tau2 and dead time in the case's time unit).

    Returns
    -------
    TransferModel
        FOPDT with the same gain, lag ``tau1 + tau2/2`` and dead time ``theta + tau2/2``.
    """
    half = 0.5 * model.time_constant_2
    return TransferModel(
        FOPDT.name, model.gain, model.time_constant + half, 0.0, model.dead_time + half
    )


# One rule per registered model kind and method (tests/design/test_tuning.py fails for a kind
# with no rule). Each returns the ideal-form (Kc, Ti, Td).
Rule = Callable[[TransferModel, str, float], tuple[float, float, float]]


def _simc_fopdt(model: TransferModel, form: str, tau_c: float) -> tuple[float, float, float]:
    k, theta, tau = model.gain, model.dead_time, model.time_constant
    return tau / (k * (tau_c + theta)), min(tau, 4.0 * (tau_c + theta)), 0.0


def _simc_sopdt(model: TransferModel, form: str, tau_c: float) -> tuple[float, float, float]:
    if form != "pid":
        return _simc_fopdt(half_rule(model), form, tau_c)
    k, theta, tau1 = model.gain, model.dead_time, model.time_constant
    kc, ti = tau1 / (k * (tau_c + theta)), min(tau1, 4.0 * (tau_c + theta))
    return series_to_ideal(kc, ti, model.time_constant_2)


def _simc_ipdt(model: TransferModel, form: str, tau_c: float) -> tuple[float, float, float]:
    k, theta = model.gain, model.dead_time
    return 1.0 / (k * (tau_c + theta)), 4.0 * (tau_c + theta), 0.0


def _imc_fopdt(model: TransferModel, form: str, tau_c: float) -> tuple[float, float, float]:
    k, theta, tau = model.gain, model.dead_time, model.time_constant
    if form == "pid":
        kc = (tau + theta / 2.0) / (k * (tau_c + theta / 2.0))
        return kc, tau + theta / 2.0, tau * theta / (2.0 * tau + theta)
    return tau / (k * (tau_c + theta)), tau, 0.0


def _imc_sopdt(model: TransferModel, form: str, tau_c: float) -> tuple[float, float, float]:
    if form != "pid":
        return _imc_fopdt(half_rule(model), form, tau_c)
    k, theta, tau1 = model.gain, model.dead_time, model.time_constant
    return series_to_ideal(tau1 / (k * (tau_c + theta)), tau1, model.time_constant_2)


def _imc_ipdt(model: TransferModel, form: str, tau_c: float) -> tuple[float, float, float]:
    k, theta = model.gain, model.dead_time
    return (2.0 * tau_c + theta) / (k * (tau_c + theta) ** 2), 2.0 * tau_c + theta, 0.0


#: Tuning rules by method, then by model kind name (:data:`robustff.plant.kinds`).
TUNING_RULES: dict[str, dict[str, Rule]] = {
    "simc": {FOPDT.name: _simc_fopdt, SOPDT.name: _simc_sopdt, IPDT.name: _simc_ipdt},
    "imc": {FOPDT.name: _imc_fopdt, SOPDT.name: _imc_sopdt, IPDT.name: _imc_ipdt},
}


def tune_feedback(
    process: TransferModel, spec: FeedbackSpec, step: float, signals: Signals | None = None
) -> tuple[FeedbackSettings, list[str]]:
    """Design the feedback controller from the nominal process model.

    Parameters
    ----------
    process : TransferModel
        Nominal process model (controller output -> CV).
    spec : FeedbackSpec
        Form, rule, tau_c and limits from the case.
    step : float
        Controller sample time, time units (used as tau_c floor when the model has no dead time).
    signals : Signals, optional
        Units and spans of the case (default: :class:`Signals`), for manual settings given as a
        proportional band.

    Returns
    -------
    settings : FeedbackSettings
    notes : list of str
    """
    notes: list[str] = []
    tau_c = spec.closed_loop_time
    if tau_c is None:
        tau_c = process.dead_time
        if tau_c <= 0.0:
            tau_c = step
            notes.append(f"process has no dead time: tau_c set to the sample time {step:g}")
    if spec.tuning == "manual":
        kc, ti, td = manual_ideal(spec, signals or Signals(), process.gain)
        rule = "manual"
        tau_c = math.nan
        if kc * process.gain <= 0.0:
            # With e = setpoint - CV and u = Kc e, Kc must share the process gain's sign.
            raise DesignError(
                f"feedback.kc: {spec.kc if spec.kc is not None else kc:g} acts in the wrong "
                f"direction for a process gain of {process.gain:g} (Kc must have the same sign: "
                "the loop would run away)"
            )
    else:
        if not process.integrating and process.time_constant <= 0.0:
            raise DesignError("feedback: tuning rules need a process time constant > 0")
        kc, ti, td = TUNING_RULES[spec.tuning][process.kind](process, spec.form, tau_c)
        rule = f"{spec.tuning.upper()}"
        if spec.form == "pid" and td == 0.0:
            notes.append(
                f"{rule} gives no derivative action for a {process.kind.upper()} model: Td = 0"
            )
    if spec.form == "pi":
        td = 0.0
    tracking = ti if td == 0.0 else math.sqrt(ti * td)
    fraction = (DERIVATIVE_FILTER_FRACTION if spec.derivative_filter is None
                else spec.derivative_filter)
    settings = FeedbackSettings(
        spec.form,
        kc,
        ti,
        td,
        fraction * td,
        tracking,
        spec.output_low,
        spec.output_high,
        spec.output_bias,
        tau_c,
        rule,
        spec.setpoint_weight,
        spec.derivative_setpoint_weight if spec.form == "pid" else 0.0,
    )
    return settings, notes


def design_feedforward(
    process: TransferModel, disturbance: TransferModel, spec: FeedforwardSpec, step: float,
    time_unit: str = "", actuation: LinearisedActuation | None = None,
) -> tuple[FeedforwardSettings, list[str]]:
    """Reduce the ideal compensator ``-Gd/(Gp A)`` to the chosen structure.

    ``A`` is the actuation path linearised at the nominal point (``actuation``, see
    :mod:`robustff.design.linearised_actuation`: gain 1, the actuator lag or the reduced closed
    secondary loop); None: an ideal actuator, ``A = 1``. Its lags count as process lags and its
    dead time as process dead time below.

    Rules
    -----
    * Both paths self-regulating: gain ``-Kd/Kp``; lead = sum of process lags, lag = sum of
      disturbance lags (matching the first moment of the ideal compensator); delay =
      ``theta_d - theta_p`` when positive. A disturbance path without lag gets
      ``lag = max(0.1 lead, step)`` so that the compensator stays proper.
    * Both integrating: the ideal compensator is static, ``-Kd/Kp`` with the same delay rule.
    * Mixed kinds are not realizable in this structure (the ideal compensator would be a pure
      differentiator or an integrator): a :class:`DesignError` unless the structure is "none".

    Explicit ``lead``, ``lag`` and ``delay`` in the spec replace the designed values.
    ``time_unit`` is only written into the notes.
    """
    added_lags = actuation.lags if actuation is not None else ()
    added_delay = actuation.dead_time if actuation is not None else 0.0
    notes: list[str] = []
    structure = spec.structure
    unit = f" {time_unit}" if time_unit else ""
    if structure == "none":
        return FeedforwardSettings("none", 0.0, 0.0, 0.0, 0.0, spec.gain_factor,
                                   law=spec.law, trim=spec.trim), notes
    if process.integrating != disturbance.integrating:
        raise DesignError(
            "feedforward: an integrating and a self-regulating path cannot be compensated by a "
            "static/lead-lag feedforward (the ideal compensator is a differentiator or an "
            "integrator); "
            'model both paths as integrating, or use structure = "none"'
        )
    gain = -disturbance.gain / process.gain * spec.gain_factor
    lead = lag = delay = 0.0
    if structure in ("lead-lag", "lead-lag-delay") and not process.integrating:
        lead, lag = _reduced_lead_lag(process, disturbance, added_lags)
        if lag <= 0.0 and lead > 0.0:
            lag = max(0.1 * lead, step)
            notes.append(
                f"disturbance path has no lag: compensator lag set to {lag:g}{unit} to keep it "
                "proper"
            )
    shortfall = process.dead_time + added_delay - disturbance.dead_time
    if structure == "lead-lag-delay":
        if shortfall > 0.0 and spec.delay is None:
            whose = (" (with the closed secondary loop's)" if added_delay > 0.0 else "")
            notes.append(
                f"the disturbance dead time is shorter than the process dead time{whose} by "
                f"{shortfall:.4g}{unit}: "
                "the ideal delay is negative, not realizable; delay dropped"
            )
        elif shortfall <= 0.0:
            delay = -shortfall
    lead = spec.lead if spec.lead is not None else lead
    lag = spec.lag if spec.lag is not None else lag
    delay = spec.delay if spec.delay is not None else delay
    if lead > 0.0 and lag <= 0.0:
        raise DesignError("feedforward: a lead needs a lag > 0 (the compensator must be proper)")
    return FeedforwardSettings(structure, gain, lead, lag, delay, spec.gain_factor,
                               spec.input_filter or 0.0, spec.law, spec.trim,
                               path_lag=max(_lags(disturbance), default=0.0)), notes


def _lags(model: TransferModel) -> list[float]:
    return [tau for tau in model.lags if tau > 0.0]


def _reduced_lead_lag(process: TransferModel, disturbance: TransferModel,
                      added_lags: tuple[float, ...] = ()) -> tuple[float, float]:
    """Lead and lag of ``-Gd/Gp`` reduced to one lead-lag (``added_lags``: the actuation's,
    counted as process lags).

    Lags common to both paths cancel exactly first (e.g. a process lag equal to one of two
    disturbance lags); the remaining process lags are summed into the lead and the remaining
    disturbance lags into the lag, which keeps the first moment (mean delay) of the ideal
    compensator.
    """
    leads = _lags(process) + [tau for tau in added_lags if tau > 0.0]
    lags = _lags(disturbance)
    for tau in list(leads):
        match = next((other for other in lags if abs(other - tau) <= 1e-9 * max(tau, other)), None)
        if match is not None:
            leads.remove(tau)
            lags.remove(match)
    return float(sum(leads)), float(sum(lags))


def tune_secondary(case: Case) -> FeedbackSettings | None:
    """The secondary (flow) PI of a case, ideal form, output in % (None without one).

    Raises
    ------
    DesignError
        Settings that cannot be designed, the message prefixed ``secondary:``.
    """
    if case.secondary is None:
        return None
    spec = case.secondary
    inner = FeedbackSpec(form="pi", tuning=spec.tuning, closed_loop_time=spec.closed_loop_time,
                         kc=spec.kc, ti=spec.ti, output_low=spec.output_low,
                         output_high=spec.output_high, output_bias=spec.output_bias)
    try:
        secondary, _ = tune_feedback(spec.model, inner,
                                     case.simulation.step / spec.scans_per_primary)
    except DesignError as exc:
        raise DesignError(f"secondary: {exc}") from None
    return secondary


def case_actuation(case: Case, secondary: FeedbackSettings | None) -> LinearisedActuation | None:
    """The case's actuation path linearised at the nominal point (the valve's actuator lag, the
    closed secondary loop with the PI ``secondary``), None for an ideal actuator."""
    return linearised_actuation(case, *((secondary.kc, secondary.ti) if secondary else ()))


def design_loop(case: Case) -> LoopDesign:
    """Feedback and feedforward designs for a case, from its nominal models (the feedforward on
    the loop linearised at the nominal point: :mod:`robustff.design.linearised_actuation`)."""
    feedback, notes = tune_feedback(case.process, case.feedback, case.simulation.step,
                                    case.signals)
    secondary = tune_secondary(case)
    actuation = case_actuation(case, secondary)
    compensators, ff_notes = _compensators(case, None, actuation)
    for item, settings in zip(case.disturbance_inputs, compensators, strict=True):
        if item.sensor.time_constant > 0.0 and settings.active:
            where = (f"disturbance.{item.name}.sensor" if item.name else "[sensor]")
            ff_notes.append(f"the transmitter lag ({where} time_constant) is not compensated "
                            "by the design (it is simulated)")
    alternatives = []
    for design in case.designs:
        try:
            settings_all, design_notes = _compensators(case, design.feedforward, actuation)
        except DesignError as exc:
            raise DesignError(f"design.{design.name}: {exc}") from None
        alternatives.append(NamedFeedforward(design.name, _headline(case, settings_all),
                                             tuple(design_notes), _several(settings_all)))
    feedforward = _headline(case, compensators)
    if actuation is not None and (any(c.active for c in compensators) or alternatives):
        ff_notes.append(actuation.note)
    return LoopDesign(feedback, feedforward, tuple(notes + ff_notes), tuple(alternatives),
                      secondary, _several(compensators), case.balance)


def _compensators(case: Case, spec: FeedforwardSpec | None,
                  actuation: LinearisedActuation | None = None,
                  ) -> tuple[tuple[FeedforwardSettings, ...], list[str]]:
    """One compensator per disturbance, each designed from its own path (and the actuation
    linearised at the nominal point, shared by all).

    ``spec`` None: the case's own rules (``[feedforward]``, overridden per disturbance by
    ``[feedforward.NAME]``); else one design's rule, applied to every measured disturbance.
    An unmeasured disturbance gets none.
    """
    settings, notes = [], []
    several = len(case.disturbance_inputs) > 1
    for item in case.disturbance_inputs:
        rule = spec if spec is not None else case.feedforward_of(item)
        if not item.measured:
            rule = FeedforwardSpec("none", rule.gain_factor)
        try:
            designed, item_notes = design_feedforward(case.process, item.model, rule,
                                                      case.simulation.step, case.time_unit,
                                                      actuation)
        except DesignError as exc:
            if several:
                raise DesignError(f"feedforward from {item.label}: {exc}") from None
            raise
        settings.append(designed)
        notes += [f"feedforward from {item.label}: {note}" if several else note
                  for note in item_notes]
    return tuple(settings), notes


def _headline(case: Case, compensators: tuple[FeedforwardSettings, ...]) -> FeedforwardSettings:
    """The compensator reported as ``feedforward``: the headline disturbance's."""
    return compensators[case.disturbance_inputs.index(case.headline_input)]


def _several(compensators: tuple[FeedforwardSettings, ...]) -> tuple[FeedforwardSettings, ...]:
    # A single disturbance keeps the legacy form (``feedforward`` alone).
    return compensators if len(compensators) > 1 else ()
