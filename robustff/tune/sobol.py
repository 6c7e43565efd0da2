"""Sobol indices of the IAE ratio fbff/fb of a case's nominal design over its uncertainty.

The variance-based counterpart of the rank correlations in
:class:`robustff.tune.search.RobustResult`: which uncertain parameter drives the spread of the
ratio, alone (first-order index) and with its interactions (total index). The estimator is
:func:`robustff.stats.sensitivity.sobol_first_total`.
"""

from __future__ import annotations

import math
import os
from collections.abc import Callable
from concurrent.futures import ThreadPoolExecutor

import numpy as np

from robustff.case import Case
from robustff.case.sampling import inverse_cdf, plant_batch
from robustff.design.tuning import LoopDesign, design_loop
from robustff.engine import Scenario, build_scenario
from robustff.errors import DesignError
from robustff.stats.percentiles import metric_ratio
from robustff.stats.sensitivity import sobol_first_total
from robustff.study import chunk_spans
from robustff.tune.simulation import simulate_iae

__all__ = ["sobol_sensitivity"]


class _CaseDistribution:
    """One uncertain parameter of a case as an object with ``ppf`` (what scipy's Sobol needs)."""

    def __init__(self, case: Case, index: int) -> None:
        parameter = case.uncertainty[index]
        self.distribution, self.nominal = parameter.distribution, case.nominal_value(parameter.key)

    def ppf(self, u: np.ndarray) -> np.ndarray:
        u = np.clip(np.asarray(u, dtype=float), 2.0**-53, 1.0 - 2.0**-53)
        return inverse_cdf(self.distribution, self.nominal, u.ravel()).reshape(u.shape)


def _ratio_response(case: Case, names: list[str], design: LoopDesign, scenario: Scenario,
                    jobs: int) -> Callable[[np.ndarray], np.ndarray]:
    """The function of a (d, m) parameter array that returns the m IAE ratios fbff/fb.

    Non-finite ratios (unstable samples) are replaced by the largest finite ratio of the call.
    """

    def response(x: np.ndarray) -> np.ndarray:
        values = np.ascontiguousarray(x.T)
        spans = chunk_spans(values.shape[0], max(64, math.ceil(values.shape[0] / jobs)))
        with ThreadPoolExecutor(max_workers=jobs) as pool:
            parts = pool.map(lambda ab: simulate_iae(
                plant_batch(case, names, values[ab[0]:ab[1]]), design, scenario,
                np.arange(ab[0], ab[1], dtype=np.uint64)), spans)
            iae = np.concatenate(list(parts))
        ratio = metric_ratio(iae[:, 0], iae[:, 1])
        finite = np.isfinite(ratio)
        return np.where(finite, ratio, np.max(ratio[finite], initial=1.0))

    return response


def sobol_sensitivity(case: Case, n: int = 512, seed: int | None = None,
                      jobs: int | None = None) -> list[tuple[str, float, float]]:
    """First-order and total Sobol indices of the IAE ratio fbff/fb of the nominal design.

    Parameters
    ----------
    case : Case
        Uncertain parameters are treated as independent (rank correlations are ignored: the
        Sobol decomposition assumes independent inputs).
    n : int
        Base sample size (rounded up to a power of two); ``n (p + 2)`` plants are simulated.
    seed : int, optional
        Default: the case's seed.
    jobs : int, optional
        Threads (default: all cores).

    Returns
    -------
    list of (name, first, total)
        Sorted by the total index, largest first. Samples whose ratio is not finite (unstable)
        are given the largest finite ratio of the run.
    """
    if not case.uncertainty:
        raise DesignError("sensitivity: the case has no [uncertainty] section")
    design = design_loop(case)
    scenario = build_scenario(case, design)
    names = [parameter.key for parameter in case.uncertainty]
    response = _ratio_response(case, names, design, scenario, jobs or os.cpu_count() or 1)
    dists = [_CaseDistribution(case, i) for i in range(len(names))]
    first, total = sobol_first_total(response, dists, n,
                                     case.study.seed if seed is None else seed)
    rows = [(name, float(f), float(t)) for name, f, t in zip(names, first, total, strict=True)]
    return sorted(rows, key=lambda row: -row[2])
