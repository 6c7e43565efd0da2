"""The simulated window of a case whose plant is built from balances: one input profile per
disturbance input of the plant, events naming the input they move."""

from __future__ import annotations

import numpy as np

from robustff.case import Case
from robustff.design.tuning import LoopDesign
from robustff.engine.scenario import Scenario, settling_segments

__all__ = ["balance_scenario", "balance_input_profiles", "balance_noise_events"]


def balance_input_profiles(case: Case) -> tuple[np.ndarray, np.ndarray]:
    """Each disturbance input's deviation and the setpoint's at every internal step.

    Returns
    -------
    inputs : ndarray, shape (D, T S)
        In each input's unit, rows in the order of the plant's ``DISTURBANCES``.
    setpoint : ndarray, shape (T S,)
        CV units.
    """
    assert case.balance is not None
    names = case.balance.plant.DISTURBANCES
    h = case.simulation.internal_step
    n = case.simulation.n_steps * case.simulation.substeps
    t = np.arange(n) * h
    inputs = np.zeros((len(names), n))
    setpoint = np.zeros(n)
    for event in case.events:
        start = round(event.at / h) * h
        if event.kind == "setpoint-step":
            setpoint += np.where(t >= start - 1e-9 * h, event.size, 0.0)
            continue
        if event.kind == "disturbance-noise":
            continue  # drawn by the kernel (see balance_noise_events)
        row = names.index(event.disturbance)
        if event.kind == "disturbance-step":
            inputs[row] += np.where(t >= start - 1e-9 * h, event.size, 0.0)
        elif event.kind == "disturbance-ramp":
            inputs[row] += event.size * np.clip((t - start) / max(event.duration, h), 0.0, 1.0)
    return inputs, setpoint


def balance_noise_events(case: Case) -> np.ndarray:
    """The filtered-noise events on the plant's inputs, shape (E, 4): start scan, stationary
    standard deviation (the input's unit), filter time constant, input row."""
    assert case.balance is not None
    names = case.balance.plant.DISTURBANCES
    rows = [(round(event.at / case.simulation.step), abs(event.size), event.time_constant,
             names.index(event.disturbance))
            for event in case.events if event.kind == "disturbance-noise"]
    return np.array(rows, dtype=np.float64).reshape(-1, 4)


def _direction(case: Case) -> np.ndarray:
    """The sign of the error that counts as an opposite excursion, set by each event from its
    start: ``-sign(step)`` for a setpoint step, the sign of the nominal path gain times the
    size for an input's step or ramp (as :func:`robustff.engine.scenario.disturbance_direction`
    does for the one disturbance)."""
    assert case.balance is not None
    paths = case.balance.paths()
    h = case.simulation.internal_step
    n = case.simulation.n_steps * case.simulation.substeps
    ordered = sorted(case.events, key=lambda event: event.at)

    def sign(event, previous: float) -> float:
        if event.kind == "setpoint-step":
            return -float(np.sign(event.size) or 1.0)
        if event.kind == "disturbance-noise":  # no direction of its own
            return previous
        return float(np.sign(paths[event.disturbance].gain * event.size) or 1.0)

    current = sign(ordered[0], 1.0)
    direction = np.full(n, current)
    for event in ordered[1:]:
        current = sign(event, current)
        direction[min(max(round(event.at / h), 0), n):] = current
    return direction


def _divergence_limit(case: Case, design: LoopDesign, inputs: np.ndarray,
                      setpoint: np.ndarray) -> float:
    """A CV deviation far beyond anything a working loop produces, CV units."""
    assert case.balance is not None
    paths = case.balance.paths()
    names = case.balance.plant.DISTURBANCES
    scale = sum(abs(paths[name].gain) * float(np.max(np.abs(inputs[row]), initial=0.0))
                for row, name in enumerate(names))
    scale += float(np.max(np.abs(setpoint), initial=0.0))
    span = design.feedback.output_high - design.feedback.output_low
    scale += abs(paths["process"].gain) * span
    return 1e4 * max(scale, 1e-12)


def balance_scenario(case: Case, design: LoopDesign, settling_band: float) -> Scenario:
    """The scenario of a balance-plant case: ``disturbance_profile`` holds one row per
    disturbance input of the plant (its deviation from the operating value, its unit)."""
    inputs, setpoint = balance_input_profiles(case)
    first = min(case.events, key=lambda event: event.at)
    setpoint_step = first.size if first.kind == "setpoint-step" else None
    return Scenario(
        case.simulation.step, inputs, setpoint, balance_noise_events(case), first.at,
        _direction(case), setpoint_step, settling_band,
        _divergence_limit(case, design, inputs, setpoint), settling_segments(case),
        case.simulation.substeps, 1, case.signals.controlled.band,
    )
