"""IAE of both arms for a batch of plants (one chunk): shared by the robust searches.

Used by :mod:`robustff.tune.search` (the robust feedforward search) and
:mod:`robustff.tune.sobol` (Sobol indices of the IAE ratio).
"""

from __future__ import annotations

import numpy as np

from robustff.design.tuning import LoopDesign
from robustff.engine import Scenario, simulate
from robustff.plant.models import PlantBatch

__all__ = ["simulate_iae"]


def simulate_iae(batch: PlantBatch, design: LoopDesign, scenario: Scenario,
                 seeds: np.ndarray) -> np.ndarray:
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

    Returns
    -------
    ndarray, shape (samples, 2)
        Column 0 feedback only, column 1 feedback plus feedforward (CV units x time units).
    """
    result = simulate(batch, design, scenario, seeds=seeds)
    return np.where(result.unstable, np.inf, result.metrics["iae"])
