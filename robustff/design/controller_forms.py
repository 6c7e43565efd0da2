"""The PID controller as the control system writes it, and its ideal form for the simulator.

The simulator runs the ideal (standard, ISA) form with setpoint weights b and c and a filtered
derivative (Astrom and Hagglund, Advanced PID Control, ISA 2006, chapter 3: set-point weighting
and section 3.4 on the series, parallel and ideal forms; from memory)::

    u = Kc (b r - y) + Kc / Ti  int (r - y) dt + Kc Td d(c r - y)_f / dt

The other forms and their conversions (same source):

* series (interacting): ``Kc' (1 + 1 / (Ti' s)) (1 + Td' s)``; to ideal
  ``Kc = Kc' (1 + Td'/Ti')``, ``Ti = Ti' + Td'``, ``Td = Ti' Td' / (Ti' + Td')``; back, only when
  ``Ti >= 4 Td`` (otherwise the ideal zeros are complex and no series form exists), with
  ``r = sqrt(1 - 4 Td / Ti)``: ``Kc' = Kc (1 + r) / 2``, ``Ti' = Ti (1 + r) / 2``,
  ``Td' = Ti (1 - r) / 2``;
* parallel (independent gains): ``kp + ki / s + kd s``; ``kp = Kc``, ``ki = Kc / Ti``,
  ``kd = Kc Td``.

The setpoint weights and the derivative filter act on the ideal form's proportional and
derivative terms whatever form the case uses; the filter's time constant is a fraction of the
ideal Td.

Gains in %/% (Seborg, Edgar, Mellichamp and Doyle, Process Dynamics and Control, 4th ed.,
Wiley 2016, chapter 8, from memory): with both signals in % of their spans, the dimensionless
gain is ``Kc% = Kc span_cv / span_out`` and the proportional band ``PB = 100 / |Kc%|`` (%); the
sign of Kc is the controller's action (reverse acting when Kc > 0, because ``e = r - y``).
Integral action in repeats per time unit is ``1 / Ti`` (Ti is the time per repeat).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from robustff.case import FeedbackSpec, Signals
from robustff.errors import DesignError
from robustff.units import per_unit

__all__ = [
    "series_to_ideal",
    "ideal_to_series",
    "parallel_to_ideal",
    "ideal_to_parallel",
    "percent_gain_factor",
    "span_text",
    "gain_from_band",
    "band_from_gain",
    "manual_ideal",
    "WrittenTuning",
    "written_tuning",
    "form_lines",
    "ideal_notes",
    "PERCENT_OUTPUT_SPAN",
]

#: Span of an output whose unit is "%" and that has no ``[signals.output] range``, %.
PERCENT_OUTPUT_SPAN = 100.0
#: ``1 - 4 Td / Ti`` this far below zero is rounding of ``Ti = 4 Td`` (series ``Ti' = Td'``).
_DOUBLE_ROOT = 1e-12


def series_to_ideal(kc: float, ti: float, td: float) -> tuple[float, float, float]:
    """Series (interacting) settings in the ideal form.

    Parameters
    ----------
    kc, ti, td : float
        Series gain (output units per CV unit), integral time and derivative time (time units).

    Returns
    -------
    tuple of float
        ``(Kc (1 + Td/Ti), Ti + Td, Ti Td / (Ti + Td))``: ideal gain, integral and derivative
        times, same units.
    """
    factor = 1.0 + td / ti
    return kc * factor, ti + td, ti * td / (ti + td)


def ideal_to_series(kc: float, ti: float, td: float) -> tuple[float, float, float] | None:
    """Ideal settings in the series form, or None when ``Ti < 4 Td`` (no series form exists).

    Parameters
    ----------
    kc, ti, td : float
        Ideal gain (output units per CV unit), integral time and derivative time (time units).

    Returns
    -------
    tuple of float or None
        Series ``(Kc', Ti', Td')``, same units.
    """
    if td == 0.0:
        return kc, ti, 0.0
    discriminant = 1.0 - 4.0 * td / ti
    if -_DOUBLE_ROOT < discriminant < 0.0:
        discriminant = 0.0  # Ti' = Td' rounded: a double zero, not a missing series form
    if discriminant < 0.0:
        return None
    root = math.sqrt(discriminant)
    return kc * (1.0 + root) / 2.0, ti * (1.0 + root) / 2.0, ti * (1.0 - root) / 2.0


def parallel_to_ideal(kp: float, ki: float, kd: float) -> tuple[float, float, float]:
    """Parallel gains ``(kp, ki, kd)`` in the ideal form ``(kp, kp / ki, kd / kp)``.

    Parameters
    ----------
    kp : float
        Proportional gain, output units per CV unit (not zero).
    ki : float
        Integral gain, output units per CV unit per time unit (not zero).
    kd : float
        Derivative gain, output units per CV unit times time units.
    """
    return kp, kp / ki, kd / kp


def ideal_to_parallel(kc: float, ti: float, td: float) -> tuple[float, float, float]:
    """Ideal settings as parallel gains ``(Kc, Kc / Ti, Kc Td)`` (units as
    :func:`parallel_to_ideal`)."""
    return kc, kc / ti, kc * td


def percent_gain_factor(signals: Signals) -> float | None:
    """``span_cv / span_out``, which turns a gain in output units per CV unit into %/%.

    The output span is its ``range``, or 100 % for an output in "%" without one; the CV span is
    its ``range``. None when either is unknown.
    """
    cv_span = signals.controlled.span
    out_span = signals.output.span
    if out_span is None and signals.output.unit.strip() == "%":
        out_span = PERCENT_OUTPUT_SPAN
    if cv_span is None or out_span is None:
        return None
    return cv_span / out_span


def span_text(signals: Signals) -> str:
    """``"CV span 0 .. 150 degC, output span 0 .. 100 %"`` (what a %/% gain is relative to)."""
    cv, out = signals.controlled, signals.output
    cv_text = (f"CV span {cv.range[0]:g} .. {cv.range[1]:g} {cv.unit}".rstrip()
               if cv.range else "no CV span")
    if out.range:
        out_text = f"output span {out.range[0]:g} .. {out.range[1]:g} {out.unit}".rstrip()
    elif out.unit.strip() == "%":
        out_text = f"output span {PERCENT_OUTPUT_SPAN:g} %"
    else:
        out_text = "no output span"
    return f"{cv_text}, {out_text}"


def gain_from_band(band: float, signals: Signals, sign: float) -> float:
    """The gain in output units per CV unit of a proportional band.

    Parameters
    ----------
    band : float
        Proportional band, % (> 0).
    signals : Signals
        Their spans (:func:`percent_gain_factor`).
    sign : float
        +1 for a reverse-acting controller (positive process gain), -1 for direct acting.

    Raises
    ------
    DesignError
        Without the spans.
    """
    factor = percent_gain_factor(signals)
    if factor is None:
        raise DesignError(
            "feedback.proportional_band: needs the signals' spans ([signals.controlled] range, "
            f"and [signals.output] range unless the output is in %); {span_text(signals)}"
        )
    return math.copysign(100.0 / band / factor, sign)


def band_from_gain(kc: float, signals: Signals) -> float | None:
    """Proportional band (%) of a gain in output units per CV unit, or None without spans."""
    factor = percent_gain_factor(signals)
    return None if factor is None else 100.0 / abs(kc * factor)


def manual_ideal(
    spec: FeedbackSpec, signals: Signals, process_gain: float
) -> tuple[float, float, float]:
    """The ideal-form ``(Kc, Ti, Td)`` of manual settings written in ``spec.structure``.

    Parameters
    ----------
    spec : FeedbackSpec
        Manual settings: ``kc`` or ``proportional_band``; ``ti`` or ``repeats`` (ideal, series)
        or ``ki`` (parallel); ``td`` (ideal, series) or ``kd`` (parallel).
    signals : Signals
        Spans for a proportional band.
    process_gain : float
        Nominal process gain, which sets the action of a proportional band.

    Returns
    -------
    tuple of float
        Gain (output units per CV unit), integral and derivative times (time units).

    Raises
    ------
    DesignError
        For a missing setting, a band without spans, or parallel gains of opposite signs.
    """
    if spec.proportional_band is not None:
        kc = gain_from_band(spec.proportional_band, signals, math.copysign(1.0, process_gain))
    elif spec.kc is not None:
        kc = spec.kc
    else:
        raise DesignError("feedback: manual tuning needs kc or proportional_band")
    derivative = 0.0 if spec.form == "pi" else None
    if spec.structure == "parallel":
        if spec.ki is None:
            raise DesignError("feedback: manual tuning in the parallel form needs ki")
        if spec.ki * kc <= 0.0:
            raise DesignError(f"feedback.ki: {spec.ki:g} must have the sign of the proportional "
                              f"gain ({kc:g}): the integral time kp / ki would be negative")
        kd = spec.kd if derivative is None else derivative
        if kd is None:
            raise DesignError("feedback: a manual PID in the parallel form needs kd")
        if kd * kc < 0.0:
            raise DesignError(f"feedback.kd: {kd:g} must have the sign of the proportional gain "
                              f"({kc:g}): the derivative time kd / kp would be negative")
        return parallel_to_ideal(kc, spec.ki, kd)
    ti = 1.0 / spec.repeats if spec.repeats is not None else spec.ti
    if ti is None:
        raise DesignError("feedback: manual tuning needs ti or repeats")
    td = spec.td if derivative is None else derivative
    if td is None:
        raise DesignError("feedback: a manual PID needs td")
    if spec.structure == "series":
        return series_to_ideal(kc, ti, td)
    return kc, ti, td


@dataclass(frozen=True)
class WrittenTuning:
    """Designed settings in the case's form, as the engineer types them in.

    Parameters
    ----------
    structure : str
        "ideal", "series" or "parallel".
    gain : float
        Kc (ideal), Kc' (series) or kp (parallel), output units per CV unit.
    integral : float
        Ti or Ti' (time units), or ki (output units per CV unit per time unit).
    derivative : float
        Td or Td' (time units), or kd (output units per CV unit times time units).
    band : float or None
        The gain as a proportional band, %, when the spans are known.
    percent_gain : float or None
        The gain in %/% when the spans are known.
    """

    structure: str
    gain: float
    integral: float
    derivative: float
    band: float | None
    percent_gain: float | None


def written_tuning(
    kc: float, ti: float, td: float, structure: str, signals: Signals
) -> WrittenTuning | None:
    """Ideal settings ``(kc, ti, td)`` written in ``structure``; None when the series form does
    not exist (``Ti < 4 Td``). Units as :class:`WrittenTuning`."""
    if structure == "series":
        series = ideal_to_series(kc, ti, td)
        if series is None:
            return None
        gain, integral, derivative = series
    elif structure == "parallel":
        gain, integral, derivative = ideal_to_parallel(kc, ti, td)
    else:
        gain, integral, derivative = kc, ti, td
    factor = percent_gain_factor(signals)
    return WrittenTuning(
        structure, gain, integral, derivative, band_from_gain(gain, signals),
        None if factor is None else gain * factor,
    )


def _gain_text(gain: float, band: float | None, percent: float | None, name: str,
               spec: FeedbackSpec, signals: Signals) -> str:
    out, cv = signals.output.unit or "output", signals.controlled.unit or "CV"
    engineering = f"{name} = {gain:.4g} {per_unit(out, cv)}"
    if band is None or percent is None:
        return engineering
    percent_text = f"{percent:.4g} %/%"
    band_text = f"PB = {band:.4g} %"
    if spec.proportional_band is not None:
        return f"{band_text} ({engineering}, {percent_text})"
    return f"{engineering} ({percent_text}, {band_text})"


def ideal_notes(kc: float, ti: float, spec: FeedbackSpec, signals: Signals,
                time_unit: str) -> tuple[str, str]:
    """What follows the ideal Kc and Ti in the printout: ``" (1.8 %/%, PB = 55 %)"`` when the
    spans are known, ``" (0.023 repeats/min)"`` when the case gives repeats; else empty."""
    factor = percent_gain_factor(signals)
    gain = ("" if factor is None else
            f" ({kc * factor:.4g} %/%, PB = {100.0 / abs(kc * factor):.4g} %)")
    integral = f" ({1.0 / ti:.4g} repeats/{time_unit})" if spec.repeats is not None else ""
    return gain, integral


def form_lines(
    kc: float, ti: float, td: float, filter_time: float, spec: FeedbackSpec, signals: Signals,
    time_unit: str,
) -> list[str]:
    """Lines giving the designed controller in the case's form and units, then its action,
    derivative filter and setpoint weights (the ideal form itself is printed by the caller;
    for an ideal-form case without a band, repeats or spans it is the only form shown).

    Parameters
    ----------
    kc, ti, td : float
        Ideal-form settings: output units per CV unit, time units, time units.
    filter_time : float
        Derivative filter time constant, time units.
    spec : FeedbackSpec
        The case's ``[feedback]`` (structure, and whether it uses a band or repeats).
    signals : Signals
        Units and spans.
    time_unit : str
        The case's time unit.
    """
    pid = spec.form == "pid"
    written = written_tuning(kc, ti, td, spec.structure, signals)
    lines = []
    plain = (spec.structure == "ideal" and spec.proportional_band is None
             and spec.repeats is None and percent_gain_factor(signals) is None)
    if plain:
        pass  # the caller's ideal-form line is the form the control system takes
    elif written is None:
        lines.append(
            f"{spec.structure} form: none exists for these settings (Ti = {ti:.4g} "
            f"{time_unit} < 4 Td = {4.0 * td:.4g} {time_unit}); enter the ideal form or change "
            "the controller's form in the control system")
    else:
        out, cv = signals.output.unit or "output", signals.controlled.unit or "CV"
        prime = "'" if written.structure == "series" else ""
        name = {"series": "Kc'", "parallel": "kp"}.get(written.structure, "Kc")
        parts = [_gain_text(written.gain, written.band, written.percent_gain, name, spec,
                            signals)]
        if written.structure == "parallel":
            parts.append(f"ki = {written.integral:.4g} {per_unit(out, f'{cv} {time_unit}')}")
            if pid:
                parts.append(f"kd = {written.derivative:.4g} {per_unit(f'{out} {time_unit}', cv)}")
        else:
            repeats = f"{1.0 / written.integral:.4g} repeats/{time_unit}"
            time = f"Ti{prime} = {written.integral:.4g} {time_unit}"
            parts.append(f"{repeats} ({time})" if spec.repeats is not None
                         else f"{time} ({repeats})")
            if pid:
                parts.append(f"Td{prime} = {written.derivative:.4g} {time_unit}")
        lines.append(f"{written.structure} form, as the control system takes it: "
                     + ", ".join(parts))
    if percent_gain_factor(signals) is not None:
        lines.append(f"%/% gains relative to the {span_text(signals)}")
    action = ("reverse acting (the output falls as the measurement rises)" if kc > 0.0
              else "direct acting (the output rises with the measurement)")
    weights = f"setpoint weight b = {spec.setpoint_weight:g} (proportional)"
    if pid:
        weights += f", c = {spec.derivative_setpoint_weight:g} (derivative)"
        fraction = filter_time / td if td > 0.0 else 0.0
        weights += (f"; derivative filter {fraction:.3g} x ideal Td = {filter_time:.4g} "
                    f"{time_unit}")
    lines.append(f"action: {action}; {weights}")
    return lines
