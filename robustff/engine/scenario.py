"""Turn a case's events and design into the arrays the simulation kernel needs."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from robustff.case import Case, Event
from robustff.case.record import record_profile
from robustff.design.tuning import LoopDesign

__all__ = ["Scenario", "event_profiles", "disturbance_direction", "divergence_limit",
           "settling_segments"]


@dataclass(frozen=True)
class Scenario:
    """Everything about a simulated window that is the same for all samples.

    Parameters
    ----------
    step : float
        The controller's scan period, time units.
    disturbance_profile : ndarray, shape (J, T S)
        Each disturbance's deterministic part (steps, ramps, records) at each internal step
        (``S`` per scan, ``T`` scans), in case order, its units.
    setpoint_profile : ndarray, shape (T S,)
        Setpoint deviation at each internal step, CV units.
    noise_events : ndarray, shape (E, 4)
        Filtered-noise events: start scan, stationary standard deviation, filter time constant,
        index of the disturbance it moves.
    event_start : float
        Start of the first event, time units (``t0`` of the metrics).
    direction : ndarray, shape (T S,)
        At each internal step, the sign of the error that counts as an opposite-side excursion,
        set by the latest event (see :mod:`robustff.engine.metrics`).
    setpoint_step : float or None
        Size of the first event when it is a setpoint step, CV units.
    settling_band : float
        CV units; see :mod:`robustff.engine.metrics`.
    divergence_limit : float
        |CV| beyond which a sample is declared unstable, CV units.
    segment_start : ndarray, shape (T S,)
        At each internal step, the start time of the latest step, ramp or setpoint event, time
        units: settling is measured after each of them (see :func:`settling_segments`).
    substeps : int
        Internal steps per scan, ``S``.
    secondary_scans : int
        Scans of the secondary (flow) controller per primary scan (1 without one).
    cv_band : float or None
        Allowed deviation from the setpoint, ``[signals.controlled] band``, CV units (None: no
        ``outside_band`` metric).
    """

    step: float
    disturbance_profile: np.ndarray
    setpoint_profile: np.ndarray
    noise_events: np.ndarray
    event_start: float
    direction: np.ndarray
    setpoint_step: float | None
    settling_band: float
    divergence_limit: float
    segment_start: np.ndarray
    substeps: int = 1
    secondary_scans: int = 1
    cv_band: float | None = None

    @property
    def n_steps(self) -> int:
        """Number of controller scans, ``T``."""
        return int(self.setpoint_profile.shape[0]) // self.substeps

    @property
    def times(self) -> np.ndarray:
        """Scan instants, shape (T,), time units."""
        return np.arange(self.n_steps) * self.step

    @property
    def internal_step(self) -> float:
        """The plant's internal step, time units."""
        return self.step / self.substeps

    def noise_record_width(self, n_paths: int) -> int:
        """Numbers one sample's recorded disturbance holds (``SimulationResult.noise``): its
        effect on the CV at every internal step and each of ``n_paths`` measurements at every
        scan, ``T (S + J)``."""
        return self.n_steps * (self.substeps + n_paths)

    def at_scans(self, profile: np.ndarray) -> np.ndarray:
        """A per-internal-step profile (shape (T S,)) at the scan instants, shape (T,)."""
        return np.asarray(profile)[:: self.substeps]


def event_profiles(case: Case) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Disturbance and setpoint profiles and the noise-event table of a case.

    Event times are placed on the internal step nearest to them (filtered noise: on the
    nearest scan). A recorded trace is interpolated linearly onto the internal steps from its
    start (its gaps were bridged when it was read) and its last value held after its end.

    Returns
    -------
    disturbance : ndarray, shape (J, T S)
        One row per disturbance, in case order.
    setpoint : ndarray, shape (T S,)
    noise_events : ndarray, shape (E, 4), start as a scan index, then the disturbance's row
    """
    h = case.simulation.internal_step
    n = case.simulation.n_steps * case.simulation.substeps
    scan = case.simulation.step
    t = np.arange(n) * h
    names = [item.name for item in case.disturbance_inputs]
    disturbance = np.zeros((len(names), n))
    setpoint = np.zeros(n)
    noise = []
    for event in case.events:
        start = round(event.at / h) * h
        row = names.index(event.disturbance) if event.disturbance else 0
        if event.kind == "disturbance-step":
            disturbance[row] += np.where(t >= start - 1e-9 * h, event.size, 0.0)
        elif event.kind == "setpoint-step":
            setpoint += np.where(t >= start - 1e-9 * h, event.size, 0.0)
        elif event.kind == "disturbance-ramp":
            fraction = np.clip((t - start) / max(event.duration, h), 0.0, 1.0)
            disturbance[row] += event.size * fraction
        elif event.kind == "disturbance-record" and event.record is not None:
            disturbance[row] += record_profile(event.record, t, start)
        elif event.kind == "disturbance-noise":
            noise.append((round(event.at / scan), abs(event.size), event.time_constant, row))
    return disturbance, setpoint, np.array(noise, dtype=np.float64).reshape(-1, 4)


#: Events that never end, so that nothing settles after them (no settling segment starts).
_ENDLESS = ("disturbance-noise", "disturbance-record")


def settling_segments(case: Case) -> np.ndarray:
    """Start time of the settling segment each sample belongs to, shape (T,), time units.

    Every step, ramp and setpoint event starts a segment at its start sample (the value is
    the event's time as written, as for ``t0`` of the metrics); filtered noise and recorded
    traces do not (they never end, so nothing settles after them). Before the first such
    event, and in a case with noise events only, the start of the first event applies.
    """
    h = case.simulation.internal_step
    n = case.simulation.n_steps * case.simulation.substeps
    # Times stay as written (like t0 of the metrics); the segment begins at the event's sample.
    starts = sorted((event.at, min(max(round(event.at / h), 0), n)) for event in case.events
                    if event.kind not in _ENDLESS)
    first = min(event.at for event in case.events)
    segment = np.full(n, starts[0][0] if starts else first)
    for at, begin in starts:
        segment[begin:] = at
    return segment


def _event_direction(case: Case, event: Event, previous: float) -> float:
    """For a setpoint step ``-sign(step)`` (the CV passing the new setpoint makes ``e`` take that
    sign); for a step or ramp of the disturbance the sign of nominal ``Kd x size`` (the
    uncompensated disturbance pushes the CV that way, so an opposite excursion gives an error of
    that sign); filtered noise has no direction and keeps the previous one."""
    if event.kind == "setpoint-step":
        return -float(np.sign(event.size) or 1.0)
    if event.kind == "disturbance-noise":
        return previous
    gain = case.disturbance_named(event.disturbance).model.gain
    return float(np.sign(gain * event.size) or 1.0)


def disturbance_direction(case: Case) -> tuple[np.ndarray, float | None, float]:
    """Direction profile, setpoint step and start time of the first event.

    Returns
    -------
    direction : ndarray, shape (T,)
        Each event sets the direction from its (rounded) start sample until the next event, so
        that the return of a disturbance to zero is not counted as over-compensation of the
        first one. Before the first event the first event's direction applies.
    setpoint_step : float or None
        The first event's size when it is a setpoint step.
    event_start : float
    """
    h = case.simulation.internal_step
    n = case.simulation.n_steps * case.simulation.substeps
    ordered = sorted(case.events, key=lambda event: event.at)
    first = ordered[0]
    current = float(np.sign(case.disturbance.gain) or 1.0)
    direction = np.empty(n)
    start = 0
    for event in ordered:
        current_next = _event_direction(case, event, current)
        begin = min(max(round(event.at / h), 0), n)
        if event is first:
            current = current_next
            continue
        direction[start:begin] = current
        start, current = begin, current_next
    direction[start:] = current
    setpoint_step = first.size if first.kind == "setpoint-step" else None
    return direction, setpoint_step, first.at


def divergence_limit(case: Case, design: LoopDesign) -> float:
    """A CV deviation far beyond anything a working loop produces, CV units."""
    _, setpoint, _ = event_profiles(case)
    span = design.feedback.output_high - design.feedback.output_low
    scale = sum(abs(case.disturbance_named(e.disturbance).model.gain) * abs(e.size)
                for e in case.events if e.kind != "setpoint-step")
    scale += float(np.max(np.abs(setpoint), initial=0.0))
    scale += abs(case.process.gain) * span
    if case.process.integrating or any(item.model.integrating
                                       for item in case.disturbance_inputs):
        scale *= case.simulation.duration
    return 1e4 * max(scale, 1e-12)
