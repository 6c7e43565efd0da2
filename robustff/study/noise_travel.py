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

import dataclasses
from dataclasses import dataclass

import numpy as np

from robustff.case import DesignSpec, DisturbanceInput
from robustff.design.tuning import FeedforwardSettings
from robustff.study.runner import StudyResult, run_study
from robustff.units import per_unit

__all__ = ["TRAVEL_RATIO", "TRIAL_SAMPLES", "FilterTrial", "high_frequency_gain",
           "suggested_input_filter", "noise_travel_warning", "filter_trial"]

#: Plants on which the suggested input filter is tried (drawn as in the study, same seed; all
#: of the study's plants when it has no more).
TRIAL_SAMPLES = 500
_TRIAL_NAME = "input-filter-trial"

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


def _noisy_transmitters(result: StudyResult) -> list[DisturbanceInput]:
    """The measured disturbances whose transmitter adds noise (nominal or uncertain)."""
    case = result.case
    uncertain = {p.key for p in case.uncertainty}
    return [item for item in case.disturbance_inputs if item.measured and (
        item.sensor.noise_std > 0.0 or f"{item.sensor_prefix}.noise_std" in uncertain)]


def _has_transmitter_noise(result: StudyResult) -> bool:
    return bool(_noisy_transmitters(result))


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
    noisy = _noisy_transmitters(result)[0]
    dist_unit = (noisy.unit if case.disturbances else signals.disturbance.unit
                 ) or "disturbance units"
    dist_name = noisy.name if case.disturbances else signals.disturbance.name
    times = "many" if fb == 0.0 else f"{fbff / fb:.3g} times"
    noise = (f"std {noisy.sensor.noise_std:g} {dist_unit}".rstrip()
             if noisy.sensor.noise_std > 0 else "uncertain std")
    structure = "lead-lag" if ff.lead > ff.lag else ff.structure
    already = (f" (the case filters it with input_filter = {ff.input_filter:g} {unit}; a longer "
               "filter trades more IAE for less travel)" if ff.input_filter > 0.0 else "")
    return (
        f"valve travel with feedforward is {times} that of feedback alone (median "
        f"{fbff:.4g} against {fb:.4g} {out_unit}): transmitter noise on {dist_name}"
        f" ({noise}) passed through the {structure} compensator (high-frequency gain "
        f"{high_frequency_gain(ff):.3g} {per_unit(out_unit, dist_unit)}) to the valve"
        f"{already}. Remedy: a filter on the feedforward input, e.g. [feedforward] input_filter ="
        f" {suggested_input_filter(ff, case.simulation.step):.3g} {unit} as a starting value; "
        "rerun (or add it as a [[design]] on the same plants) to see what it costs in IAE"
    )


@dataclass(frozen=True)
class FilterTrial:
    """The suggested input filter tried on plants of the study's uncertainty, same seed.

    Attributes
    ----------
    input_filter : float
        Filter time constant tried, time units.
    samples : int
        Plants compared (paired).
    iae : tuple of float
        Median IAE with the case's feedforward and with the filter added, CV unit * time unit.
    valve_travel : tuple of float
        Median valve travel, the same two designs, output units.
    """

    input_filter: float
    samples: int
    iae: tuple[float, float]
    valve_travel: tuple[float, float]

    def sentence(self, result: StudyResult) -> str:
        """One line with units, e.g. "with input_filter = 9 s ...: IAE 71.7 instead of ..."."""
        case = result.case
        signals, unit = case.signals, case.time_unit
        iae_unit = f"{signals.controlled.unit or 'CV'}*{unit}"
        out_unit = signals.output.unit or "output units"
        change = (100.0 * (self.iae[1] - self.iae[0]) / self.iae[0]) if self.iae[0] else 0.0
        return (
            f"tried on {self.samples} plants drawn from the same uncertainty (same seed; the "
            f"two designs see the same plants and noise): with input_filter = "
            f"{self.input_filter:.3g} {unit} the median valve travel is "
            f"{self.valve_travel[1]:.4g} instead of {self.valve_travel[0]:.4g} {out_unit} and "
            f"the median IAE {self.iae[1]:.4g} instead of {self.iae[0]:.4g} {iae_unit} "
            f"({change:+.0f} %): the cost of the filter"
        )


def filter_trial(result: StudyResult, samples: int = TRIAL_SAMPLES,
                 jobs: int | None = None) -> FilterTrial | None:
    """Simulate the suggested input filter on ``samples`` plants drawn as in the study.

    The case gets one more ``[[design]]`` (its own feedforward plus the filter), so both
    designs see the same plants and noise and the difference is the filter's alone. None when
    :func:`noise_travel_warning` has nothing to say.
    """
    if noise_travel_warning(result) is None:
        return None
    case = result.case
    ff = result.design.feedforward
    tau = suggested_input_filter(ff, case.simulation.step)
    filtered = DesignSpec(_TRIAL_NAME, dataclasses.replace(case.feedforward, input_filter=tau))
    trial_case = dataclasses.replace(case, designs=(filtered,))
    n = max(1, min(samples, result.samples))
    trial = run_study(trial_case, samples=n, seed=result.seed, jobs=jobs, margins=False)
    arms = {arm.name: arm for arm in trial.design_arms()}
    own, other = arms["case"], arms[_TRIAL_NAME]
    both = (np.isfinite(own.metrics["iae"]) & np.isfinite(other.metrics["iae"])
            & np.isfinite(own.metrics["valve_travel"]) & np.isfinite(other.metrics["valve_travel"]))
    if not np.any(both):
        return None

    def medians(name: str) -> tuple[float, float]:
        return (float(np.median(own.metrics[name][both])),
                float(np.median(other.metrics[name][both])))

    return FilterTrial(tau, int(np.sum(both)), medians("iae"), medians("valve_travel"))
