"""The vectorised closed-loop simulator: the one engine API every shell calls.

:func:`simulate` runs N perturbed plants, each with the same (nominal) controller and
feedforward design, in two arms: feedback only (``"fb"``, arm 0) and feedback plus feedforward
(``"fbff"``, arm 1). No file I/O, no printing, no global state.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from robustff.case import Case
from robustff.case.sampling import nominal_plants, plant_batch
from robustff.design.margins import loop_margins
from robustff.design.tuning import LoopDesign
from robustff.engine.balance_scenario import balance_scenario
from robustff.engine.balance_simulation import run_balance_kernel
from robustff.engine.kernel import ACCUMULATOR_NAMES, N_ACCUMULATORS, simulate_kernel
from robustff.engine.lane_kernel import simulate_lanes
from robustff.engine.lane_open_loop import SCRATCH_LIMIT, scratch_bytes
from robustff.engine.metrics import metrics_from_accumulators
from robustff.engine.scenario import (
    Scenario,
    disturbance_direction,
    divergence_limit,
    event_profiles,
    settling_segments,
)
from robustff.errors import DesignError
from robustff.plant.kinds import model_kind
from robustff.plant.models import PlantBatch
from robustff.plant.valve import VALVE_PARAMETERS, valve_code

__all__ = [
    "ARMS",
    "Scenario",
    "EnvelopeGrid",
    "SimulationResult",
    "simulate",
    "build_scenario",
    "nominal_batch",
    "plant_matrix",
    "disturbance_tensor",
]

ARMS: tuple[str, str] = ("fb", "fbff")
_PLANT_KEYS = (
    "process.gain",
    "process.time_constant",
    "process.time_constant_2",
    "process.dead_time",
    *(f"valve.{name}" for name in VALVE_PARAMETERS),
    "secondary.gain",
    "secondary.time_constant",
    "secondary.time_constant_2",
    "secondary.dead_time",
)
#: A disturbance path's parameters (after its key prefix) and its transmitter's (after its
#: transmitter prefix), in the column order of the kernel's ``disturbances``.
_PATH_PARAMETERS = ("gain", "time_constant", "time_constant_2", "dead_time")
_SENSOR_PARAMETERS = ("time_constant", "noise_std")


@dataclass(frozen=True)
class EnvelopeGrid:
    """Where the CV envelope is recorded: ``points`` time points, histogram bins ``edges``.

    Parameters
    ----------
    edges : ndarray, shape (B+1,)
        CV bin edges, CV units; values outside fall in the first or last bin.
    index : ndarray, shape (T,)
        For each step, the envelope time point it is recorded as, or -1.
    times : ndarray, shape (P,)
        Time of each envelope point, time units.
    """

    edges: np.ndarray
    index: np.ndarray
    times: np.ndarray

    @classmethod
    def spanning(
        cls, low: float, high: float, scenario: Scenario, points: int = 300, bins: int = 400
    ) -> EnvelopeGrid:
        """A grid of ``points`` evenly spread samples and ``bins`` bins over ``[low, high]``."""
        n = scenario.n_steps
        points = min(points, n)
        steps = (np.arange(points) * n) // points
        index = np.full(n, -1, dtype=np.int64)
        index[steps] = np.arange(points)
        if not high > low:
            low, high = low - 1.0, high + 1.0
        return cls(np.linspace(low, high, bins + 1), index, steps * scenario.step)


@dataclass
class SimulationResult:
    """What :func:`simulate` returns.

    Attributes
    ----------
    metrics : dict of str to ndarray, each (N, 2)
        Per-sample metrics for both arms (NaN where the sample is unstable).
    unstable : ndarray of bool, shape (N, 2)
    envelope_counts : ndarray of int64, shape (2, P, B), or None
        Histogram counts of the CV at each envelope time point (unstable samples excluded).
    trajectories : ndarray, shape (S, 4, T), or None
        CV fb, CV fbff, output fb, output fbff (deviations) for the kept samples.
    loop_unstable : ndarray of bool, shape (N,)
        The linear feedback loop itself is unstable (whatever the feedforward).
    accumulators : ndarray, shape (N, 2, N_ACCUMULATORS)
        The kernel's raw per-arm accumulators (NaN where unstable), from which ``metrics``
        were converted.
    noise : ndarray, shape (N, T S + J T), or None
        With ``record_noise``: each sample's summed disturbance effect on the CV at every
        internal step, then each of its J disturbances as measured at every scan (noise
        included), for a later run with ``reference`` to replay instead of simulating the
        disturbances again.
    """

    metrics: dict[str, np.ndarray]
    unstable: np.ndarray
    envelope_counts: np.ndarray | None
    trajectories: np.ndarray | None
    loop_unstable: np.ndarray
    accumulators: np.ndarray
    noise: np.ndarray | None = None


def plant_matrix(batch: PlantBatch) -> np.ndarray:
    """The (N, 14) process, valve and secondary-path matrix the kernel reads."""
    return np.ascontiguousarray(np.column_stack([batch.values[key] for key in _PLANT_KEYS]))


def disturbance_tensor(batch: PlantBatch) -> np.ndarray:
    """The (N, J, 6) disturbance paths and transmitters the kernel reads (J paths)."""
    columns = [
        np.column_stack([batch.values[f"{prefix}.{name}"] for name in _PATH_PARAMETERS]
                        + [batch.values[f"{meter}.{name}"] for name in _SENSOR_PARAMETERS])
        for _, prefix, meter, _ in batch.paths
    ]
    return np.ascontiguousarray(np.stack(columns, axis=1))


def _controller_vector(design: LoopDesign, scenario: Scenario) -> np.ndarray:
    fb = design.feedback
    return np.array(
        [
            fb.kc,
            fb.ti,
            fb.td,
            fb.filter_time,
            fb.tracking_time,
            fb.output_low - fb.output_bias,
            fb.output_high - fb.output_bias,
            scenario.divergence_limit,
            fb.setpoint_weight,
            fb.derivative_setpoint_weight,
        ]
    )


def _secondary_vector(design: LoopDesign, scans_per_primary: int) -> np.ndarray:
    """present, kc, ti, tracking time, output limits (deviation), secondary scans per scan."""
    sec = design.secondary
    if sec is None:
        return np.array([0.0, 0.0, 1.0, 1.0, 0.0, 0.0, 1.0])
    return np.array([1.0, sec.kc, sec.ti, sec.tracking_time, sec.output_low - sec.output_bias,
                     sec.output_high - sec.output_bias, float(scans_per_primary)])


def _feedforward_matrix(design: LoopDesign, n_paths: int) -> np.ndarray:
    """(J, 7): gain, lead, lag, delay, input filter, has a feedforward, and the lag its delay's
    fraction rides on (:attr:`FeedforwardSettings.delay_lag`); one row per path."""
    compensators = design.all_compensators
    if len(compensators) != n_paths:
        raise DesignError(f"the design has {len(compensators)} feedforward compensators for "
                          f"{n_paths} disturbances")
    rows = np.zeros((n_paths, 7))
    for row, ff in zip(rows, compensators, strict=True):
        if ff.active:
            row[:] = (ff.gain, ff.lead, ff.lag, ff.delay, ff.input_filter, 1.0, ff.delay_lag)
    return rows


def simulate(
    batch: PlantBatch,
    design: LoopDesign,
    scenario: Scenario,
    *,
    seeds: np.ndarray | None = None,
    envelope: EnvelopeGrid | None = None,
    keep: np.ndarray | None = None,
    reference: SimulationResult | None = None,
    record_noise: bool = False,
) -> SimulationResult:
    """Simulate every plant of ``batch`` in both arms.

    Parameters
    ----------
    batch : PlantBatch
        N perturbed plants.
    design : LoopDesign
        Controller and feedforward, designed once from the nominal models.
    scenario : Scenario
        Events, sample time, metric conventions.
    seeds : ndarray of uint64, shape (N,), optional
        Per-sample seeds of the measurement and disturbance noise (default: 0..N-1).
    envelope : EnvelopeGrid, optional
        Record CV histograms for percentile envelopes (memory 2 x P x B, independent of N).
    keep : ndarray of int, optional
        Indices of samples whose full trajectories are returned.
    reference : SimulationResult, optional
        An earlier result for the same plants, feedback design, scenario and seeds: only the
        feedforward arm is then simulated (another feedforward design on the same plants and
        noise, common random numbers) and the feedback-only arm and the loop's stability are
        taken from ``reference``. The result equals a full run of ``design``; the
        envelope and trajectories are not recorded. The disturbance and its measurement are
        replayed from ``reference.noise`` when it was recorded (same numbers, without drawing
        the noise or simulating the disturbance path again).
    record_noise : bool
        Keep every sample's disturbance effect and measurements (``SimulationResult.noise``,
        N x T (S + J) numbers).

    Returns
    -------
    SimulationResult
    """
    if batch.balance is not None:
        return _simulate_balance(batch, design, scenario, envelope, keep, reference, seeds)
    n = batch.size
    n_steps = scenario.n_steps
    if seeds is None:
        seeds = np.arange(n, dtype=np.uint64)
    slots = np.full(n, -1, dtype=np.int64)
    keep = np.asarray([] if keep is None else keep, dtype=np.int64)
    slots[keep] = np.arange(keep.size)
    trajectories = np.zeros((keep.size, 4, n_steps))
    if envelope is None:
        edges, index = np.array([0.0, 1.0]), np.full(n_steps, -1, dtype=np.int64)
        counts = np.zeros((2, 1, 1), dtype=np.int64)
    else:
        edges, index = envelope.edges, envelope.index
        counts = np.zeros((2, envelope.times.size, edges.size - 1), dtype=np.int64)
    feedback_arm = reference is None
    no_noise = np.zeros((0, 0))
    n_paths = len(batch.paths)
    recorded = (np.zeros((n, scenario.noise_record_width(n_paths))) if record_noise
                else no_noise)
    replayed = (reference.noise if reference is not None and reference.noise is not None
                else no_noise)
    if not feedback_arm:
        slots[:] = -1
        trajectories, index = np.zeros((0, 4, n_steps)), np.full(n_steps, -1, dtype=np.int64)
    accumulators = np.empty((n, 2, N_ACCUMULATORS))
    unstable = np.zeros((n, 2), dtype=np.bool_)
    loop_unstable = np.zeros(n, dtype=np.bool_)
    secondary = _secondary_vector(design, scenario.secondary_scans)
    # The lane layout covers loops without a valve element or a secondary loop (same numbers,
    # several times faster) whose window fits its scratch; the general kernel runs the rest.
    lanes_fit = (batch.valve is None and secondary[0] == 0.0
                 and scratch_bytes(n_paths, n_steps * scenario.substeps) <= SCRATCH_LIMIT)
    kernel = simulate_lanes if lanes_fit else simulate_kernel
    kernel(
        np.array([model_kind(batch.process_kind).code,
                  model_kind(batch.secondary_kind or "fopdt").code]),
        plant_matrix(batch),
        np.array([model_kind(kind).code for kind, _, _, _ in batch.paths]),
        disturbance_tensor(batch),
        np.asarray(seeds, dtype=np.uint64),
        scenario.step,
        scenario.disturbance_profile,
        scenario.setpoint_profile,
        scenario.noise_events,
        _controller_vector(design, scenario),
        _feedforward_matrix(design, n_paths),
        np.array([scenario.event_start, scenario.settling_band, 0.0,
                  np.inf if scenario.cv_band is None else scenario.cv_band]),
        np.ascontiguousarray(scenario.direction, dtype=np.float64),
        np.ascontiguousarray(scenario.segment_start, dtype=np.float64),
        edges,
        index,
        slots,
        accumulators,
        unstable,
        counts,
        trajectories,
        loop_unstable,
        feedback_arm,
        scenario.substeps,
        valve_code(batch.valve),
        batch.valve.table() if batch.valve is not None else np.zeros((0, 2)),
        secondary,
        recorded,
        replayed,
    )
    if reference is not None:
        # The kernel skipped the feedback arm and the stability probe: take both from the
        # reference, so the result is what a full run of this design gives.
        loop_unstable = reference.loop_unstable.copy()
        unstable[:, 0] = reference.unstable[:, 0]
        accumulators[:, 0] = reference.accumulators[:, 0]
    else:
        loop_unstable = _confirmed_unstable(batch, design, scenario, loop_unstable)
    unstable |= loop_unstable[:, None]
    accumulators[unstable] = np.nan
    metrics = metrics_from_accumulators(accumulators, ACCUMULATOR_NAMES, scenario.setpoint_step,
                                        window=n_steps * scenario.step,
                                        cv_band=scenario.cv_band)
    return SimulationResult(
        metrics,
        unstable,
        counts if envelope is not None and feedback_arm else None,
        trajectories if keep.size and feedback_arm else None,
        loop_unstable,
        accumulators,
        recorded if record_noise else None,
    )


def _simulate_balance(batch: PlantBatch, design: LoopDesign, scenario: Scenario,
                      envelope: EnvelopeGrid | None, keep: np.ndarray | None,
                      reference: SimulationResult | None,
                      seeds: np.ndarray | None) -> SimulationResult:
    """:func:`simulate` for plants built from balances (the nonlinear kernel).

    The loop's stability is that of each sample's linearisation at its own operating point
    (the loop as simulated, controller sampled at the scan): a nonlinear plant is locally
    stable where its linearisation is.
    """
    feedback_arm = reference is None
    run = run_balance_kernel(
        batch, design, scenario, _controller_vector(design, scenario),
        edges=envelope.edges if envelope is not None and feedback_arm else None,
        index=envelope.index if envelope is not None and feedback_arm else None,
        keep=keep if feedback_arm else None, feedback_arm=feedback_arm, seeds=seeds)
    accumulators, unstable = run.accumulators, run.unstable
    if reference is not None:
        loop_unstable = reference.loop_unstable.copy()
        unstable[:, 0] = reference.unstable[:, 0]
        accumulators[:, 0] = reference.accumulators[:, 0]
    else:
        try:
            stable = loop_margins(batch, design.feedback, sample_time=scenario.step).stable
            loop_unstable = ~np.asarray(stable, dtype=bool)
        except DesignError:  # a loop the margins do not handle: the run's verdict stands
            loop_unstable = np.zeros(batch.size, dtype=bool)
    unstable |= loop_unstable[:, None]
    accumulators[unstable] = np.nan
    metrics = metrics_from_accumulators(accumulators, ACCUMULATOR_NAMES, scenario.setpoint_step,
                                        window=scenario.n_steps * scenario.step,
                                        cv_band=scenario.cv_band)
    kept = keep is not None and np.asarray(keep).size > 0 and feedback_arm
    return SimulationResult(metrics, unstable,
                            run.envelope_counts if envelope is not None and feedback_arm else None,
                            run.trajectories if kept else None, loop_unstable, accumulators)


def _confirmed_unstable(batch: PlantBatch, design: LoopDesign, scenario: Scenario,
                        probe: np.ndarray) -> np.ndarray:
    """The probe's unstable samples that the exact sampled loop confirms.

    The probe judges on the window (its error still growing at the end); a stable loop still
    recovering when the window ends (a very long integral time, a slow integrating loop) can
    look the same. The loop as simulated (controller sampled at the scan, output held; see
    :mod:`robustff.design.sampled_loop`; the valve's actuator lag and the secondary loop
    included, linearised at the nominal position as the probe runs them) decides those samples.
    """
    flagged = np.nonzero(probe)[0]
    if flagged.size == 0:
        return probe
    try:
        stable = loop_margins(batch.subset(flagged), design.feedback, sample_time=scenario.step,
                              secondary=design.secondary).stable
    except DesignError:  # a loop the margins do not handle: the probe's verdict stands
        return probe
    confirmed = probe.copy()
    confirmed[flagged[np.asarray(stable, dtype=bool)]] = False
    return confirmed


def nominal_batch(case: Case, n: int = 1) -> PlantBatch:
    """``n`` copies of the case's nominal plant."""
    if case.balance is not None:
        return plant_batch(case, [], np.zeros((n, 0)))
    return nominal_plants(case, n)


def build_scenario(case: Case, design: LoopDesign, settling_band: float | None = None) -> Scenario:
    """The scenario of a case; the settling band comes from a nominal run unless given.

    The band is 2 % of the setpoint step, or 2 % of the nominal plant's feedback-only peak
    deviation for disturbance events (see :mod:`robustff.engine.metrics`).
    """
    if case.balance is not None:
        scenario = balance_scenario(case, design, np.inf)
    else:
        scenario = _transfer_scenario(case, design)
    if settling_band is None:
        if scenario.setpoint_step:
            settling_band = 0.02 * abs(scenario.setpoint_step)
        else:
            nominal = simulate(nominal_batch(case), design, scenario)
            settling_band = 0.02 * float(nominal.metrics["peak_deviation"][0, 0])
    return Scenario(**{**scenario.__dict__, "settling_band": settling_band})


def _transfer_scenario(case: Case, design: LoopDesign) -> Scenario:
    """The scenario of a case of transfer-function models, without its settling band."""
    disturbance, setpoint, noise = event_profiles(case)
    direction, setpoint_step, start = disturbance_direction(case)
    return Scenario(
        case.simulation.step,
        disturbance,
        setpoint,
        noise,
        start,
        direction,
        setpoint_step,
        np.inf,
        divergence_limit(case, design),
        settling_segments(case),
        case.simulation.substeps,
        case.secondary.scans_per_primary if case.secondary else 1,
        case.signals.controlled.band,
    )
