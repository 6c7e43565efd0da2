"""Run the compiled balance-plant kernel for a batch: arrays in, raw per-arm results out.

:func:`robustff.engine.simulate` calls this for plants built from balances and turns the result
into the same :class:`~robustff.engine.SimulationResult` as for transfer-function plants; the
tests call it directly for what only this simulation has (the balance closure).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from robustff.design.tuning import LoopDesign
from robustff.engine.balance_kernel import (
    BALANCE_ACCUMULATORS,
    LAW_BALANCE,
    LAW_LINEAR,
    LAW_NONE,
    balance_kernel,
)
from robustff.engine.kernel import ACCUMULATOR_NAMES, N_ACCUMULATORS
from robustff.engine.scenario import Scenario
from robustff.errors import DesignError
from robustff.plant.models import PlantBatch

__all__ = ["BalanceRun", "run_balance_kernel", "feedforward_vector"]

if set(BALANCE_ACCUMULATORS) != set(ACCUMULATOR_NAMES):  # fail loudly, never a stale column
    raise RuntimeError("the balance kernel computes "
                       f"{sorted(BALANCE_ACCUMULATORS)} but the engine's accumulators are "
                       f"{sorted(ACCUMULATOR_NAMES)}: update robustff.engine.balance_kernel")
_SLOTS = np.array([ACCUMULATOR_NAMES.index(name) for name in BALANCE_ACCUMULATORS])


@dataclass
class BalanceRun:
    """Raw results of :func:`run_balance_kernel`.

    Attributes
    ----------
    accumulators : ndarray, shape (N, 2, N_ACCUMULATORS)
        Per-arm accumulators (NaN where the arm ran away), columns as
        :data:`robustff.engine.kernel.ACCUMULATOR_NAMES`.
    unstable : ndarray of bool, shape (N, 2)
        The arm ran away (CV beyond the divergence limit or not finite).
    envelope_counts : ndarray of int64, shape (2, P, B)
    trajectories : ndarray, shape (S, 4, T)
        CV fb, CV fbff (deviations, CV units), output fb, output fbff (deviations from the
        nominal bias, output units) at every scan, for the kept samples.
    closure : ndarray, shape (N, 2, 3)
        Per arm, the balanced quantity that flowed in and out over the window and its
        accumulation in the tank (kg times the output's unit: component mass for the blending
        tank, energy over c_p, kg K, for the heated tank).
    """

    accumulators: np.ndarray
    unstable: np.ndarray
    envelope_counts: np.ndarray
    trajectories: np.ndarray
    closure: np.ndarray


def feedforward_vector(design: LoopDesign) -> tuple[int, int, np.ndarray, np.ndarray]:
    """The kernel's law code, trim code, law constants (8,) and dynamics (3,) of a design."""
    ff, balance = design.feedforward, design.balance
    assert balance is not None
    plant = balance.plant
    law = LAW_NONE if not ff.active else (LAW_BALANCE if ff.law == "balance" else LAW_LINEAR)
    # The linear law: each disturbance input's own compensator (none for an unmeasured one).
    gains = [c.gain if c.active else 0.0 for c in design.all_compensators]
    if len(gains) != len(plant.DISTURBANCES):
        raise DesignError(f"the design has {len(gains)} compensators for the "
                          f"{len(plant.DISTURBANCES)} disturbance inputs of the {plant.KIND}")
    nominal = plant.operating_inputs()
    vector = np.array([
        gains[0], gains[1], ff.gain_factor, plant.kernel_constant(),
        nominal[plant.DISTURBANCES[0]], nominal[plant.DISTURBANCES[1]],
        float(plant.DISTURBANCES[0] in balance.measured),
        float(plant.DISTURBANCES[1] in balance.measured),
    ])
    lead_lag = ff.structure == "lead-lag"
    dynamics = np.array([ff.lead if lead_lag else 0.0, ff.lag if lead_lag else 0.0,
                         ff.input_filter])
    return law, 1 if ff.trim == "multiply" else 0, vector, dynamics


def run_balance_kernel(batch: PlantBatch, design: LoopDesign, scenario: Scenario,
                       controller: np.ndarray, *, edges: np.ndarray | None = None,
                       index: np.ndarray | None = None, keep: np.ndarray | None = None,
                       feedback_arm: bool = True,
                       seeds: np.ndarray | None = None) -> BalanceRun:
    """Simulate the balance plants of ``batch`` in both arms.

    Parameters
    ----------
    batch : PlantBatch
        With ``batch.balance`` set (see :func:`robustff.case.sampling.plant_batch`).
    design : LoopDesign
        With ``design.balance`` (the nominal plant the feedforward was designed from).
    scenario : Scenario
        Of a balance-plant case (see :mod:`robustff.engine.balance_scenario`): one
        ``disturbance_profile`` row per disturbance input of the plant.
    controller : ndarray, shape (10,)
        The controller vector of :func:`robustff.engine.simulate`.
    edges, index : ndarray, optional
        Envelope bin edges (B+1,) and the envelope point of each scan (T,); default none.
    keep : ndarray of int, optional
        Samples whose trajectories are returned.
    feedback_arm : bool
        False: only the feedforward arm (arm 0 is returned as NaN, unstable).
    seeds : ndarray of uint64, shape (N,), optional
        Per-sample seeds of the filtered noise on the inputs (default 0..N-1).
    """
    assert batch.balance is not None
    n, n_steps = batch.size, scenario.n_steps
    keep = np.asarray([] if keep is None else keep, dtype=np.int64)
    slots = np.full(n, -1, dtype=np.int64)
    slots[keep] = np.arange(keep.size)
    if edges is None or index is None:
        edges, index = np.array([0.0, 1.0]), np.full(n_steps, -1, dtype=np.int64)
        counts = np.zeros((2, 1, 1), dtype=np.int64)
    else:
        counts = np.zeros((2, int(np.max(index)) + 1, edges.size - 1), dtype=np.int64)
    law, trim, vector, dynamics = feedforward_vector(design)
    run = BalanceRun(np.empty((n, 2, N_ACCUMULATORS)), np.zeros((n, 2), dtype=np.bool_), counts,
                     np.zeros((keep.size, 4, n_steps)), np.zeros((n, 2, 3)))
    balance_kernel(
        batch.balance.code, np.ascontiguousarray(batch.balance.rows), scenario.step,
        scenario.substeps, np.ascontiguousarray(scenario.disturbance_profile, dtype=np.float64),
        np.ascontiguousarray(scenario.setpoint_profile, dtype=np.float64),
        np.ascontiguousarray(scenario.direction, dtype=np.float64),
        np.ascontiguousarray(scenario.segment_start, dtype=np.float64), controller,
        design.feedback.output_bias, law, trim, vector, dynamics,
        np.array([scenario.event_start, scenario.settling_band,
                  np.inf if scenario.cv_band is None else scenario.cv_band]),
        np.asarray(edges, dtype=np.float64), np.asarray(index, dtype=np.int64), slots, _SLOTS,
        run.accumulators, run.unstable, run.envelope_counts, run.trajectories, run.closure,
        feedback_arm,
        np.asarray(np.arange(n) if seeds is None else seeds, dtype=np.uint64),
        np.ascontiguousarray(scenario.noise_events, dtype=np.float64).reshape(-1, 4),
    )
    return run
