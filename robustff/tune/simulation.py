"""IAE of both arms for a batch of plants (one chunk): shared by the robust searches.

Used by :mod:`robustff.tune.search` (the robust feedforward search) and
:mod:`robustff.tune.sobol` (Sobol indices of the IAE ratio).
"""

from __future__ import annotations

import numpy as np

from robustff.design.tuning import LoopDesign
from robustff.engine import Scenario, SimulationResult, simulate
from robustff.plant.models import PlantBatch
from robustff.study.runner import replay_fits

__all__ = ["simulate_iae", "reference_run", "iae_columns"]


def simulate_iae(batch: PlantBatch, design: LoopDesign, scenario: Scenario,
                 seeds: np.ndarray, reference: SimulationResult | None = None) -> np.ndarray:
    """IAE without and with feedforward, shape (samples, 2); inf where the loop is unstable.

    Parameters
    ----------
    batch : PlantBatch
        The sampled plants.
    design : LoopDesign
        Feedback and feedforward settings.
    scenario : Scenario
        Events and time grid.
    seeds : ndarray of uint64, shape (samples,)
        Per-sample noise seeds.
    reference : SimulationResult, optional
        A run of the same plants, feedback design, scenario and seeds (see
        :func:`reference_run`): only the feedforward arm is then simulated, the same numbers.

    Returns
    -------
    ndarray, shape (samples, 2)
        Column 0 feedback only, column 1 feedback plus feedforward (CV units x time units).
    """
    result = simulate(batch, design, scenario, seeds=seeds, reference=reference)
    return iae_columns(result)


def reference_run(batch: PlantBatch, design: LoopDesign, scenario: Scenario,
                  seeds: np.ndarray) -> SimulationResult:
    """A full run of the batch kept as the reference of later designs: with its disturbance
    recorded for them to replay when it is small enough (see
    :func:`robustff.study.runner.replay_fits`)."""
    return simulate(batch, design, scenario, seeds=seeds,
                    record_noise=replay_fits(batch, scenario))


def iae_columns(result: SimulationResult) -> np.ndarray:
    """IAE of both arms of a result, shape (samples, 2); inf where unstable."""
    return np.where(result.unstable, np.inf, result.metrics["iae"])
