"""Valve travel that feedforward adds by passing transmitter noise to the valve.

A lead-lag compensator amplifies the noise on the measured disturbance by its high-frequency gain
``|gain| lead / lag`` and hands it straight to the valve. When the median valve travel with
feedforward is more than :data:`TRAVEL_RATIO` times that without, and the case has transmitter
noise, the study says so and suggests the remedy a control engineer would use: a first-order
filter on the feedforward input (``[feedforward] input_filter``), whose cost in IAE shows in a
rerun (or as a ``[[design]]`` on the same plants). The ratio 2 and the starting value of the
filter are common practice, no source.
"""

from __future__ import annotations

import numpy as np

from robustff.design.tuning import FeedforwardSettings, per_unit
from robustff.study.runner import StudyResult

__all__ = ["TRAVEL_RATIO", "high_frequency_gain", "suggested_input_filter",
           "noise_travel_warning"]

TRAVEL_RATIO = 2.0


def high_frequency_gain(ff: FeedforwardSettings) -> float:
    """``|gain| lead / lag`` for a lead-lag with more lead than lag, else ``|gain|``."""
    if ff.lag > 0.0 and ff.lead > ff.lag:
        return abs(ff.gain) * ff.lead / ff.lag
    return abs(ff.gain)


def suggested_input_filter(ff: FeedforwardSettings, step: float) -> float:
    """A starting value for ``input_filter``: a fifth of the lead, at least five controller
    steps, and longer than a filter the case already has (time units)."""
    value = max(5.0 * step, 0.2 * ff.lead)
    if ff.input_filter > 0.0:
        value = max(value, 2.0 * ff.input_filter)
    return value


def _has_transmitter_noise(result: StudyResult) -> bool:
    case = result.case
    if case.sensor.noise_std > 0.0:
        return True
    return any(p.key == "sensor.noise_std" for p in case.uncertainty)


def noise_travel_warning(result: StudyResult) -> str | None:
    """The sentence for the engineer, or None when the travel is not suspicious.

    Parameters
    ----------
    result : StudyResult
        Its ``valve_travel`` metric (output units) is compared between the arms, over the
        samples finite in both.
    """
    ff = result.design.feedforward
    if not ff.active or not _has_transmitter_noise(result):
        return None
    travel = result.metrics["valve_travel"]
    finite = np.all(np.isfinite(travel), axis=1)
    if not np.any(finite):
        return None
    fb, fbff = (float(np.median(travel[finite, arm])) for arm in (0, 1))
    if not fbff > TRAVEL_RATIO * fb:
        return None
    case, unit = result.case, result.case.time_unit
    signals = case.signals
    out_unit = signals.output.unit or "output units"
    dist_unit = signals.disturbance.unit or "disturbance units"
    times = "many" if fb == 0.0 else f"{fbff / fb:.3g} times"
    noise = (f"std {case.sensor.noise_std:g} {dist_unit}".rstrip() if case.sensor.noise_std > 0
             else "uncertain std")
    structure = "lead-lag" if ff.lead > ff.lag else ff.structure
    already = (f" (the case filters it with input_filter = {ff.input_filter:g} {unit}; a longer "
               "filter trades more IAE for less travel)" if ff.input_filter > 0.0 else "")
    return (
        f"valve travel with feedforward is {times} that of feedback alone (median "
        f"{fbff:.4g} against {fb:.4g} {out_unit}): transmitter noise on {signals.disturbance.name}"
        f" ({noise}) passed through the {structure} compensator (high-frequency gain "
        f"{high_frequency_gain(ff):.3g} {per_unit(out_unit, dist_unit)}) to the valve"
        f"{already}. Remedy: a filter on the feedforward input, e.g. [feedforward] input_filter ="
        f" {suggested_input_filter(ff, case.simulation.step):.3g} {unit} as a starting value; "
        "rerun (or add it as a [[design]] on the same plants) to see what it costs in IAE"
    )
