"""The percentile of a sample that may hold infinite values (unstable loops, no crossover).

One home for the convention shared by the stability-margin tables and the robust search: the
linear-interpolation percentile (numpy's default, Hyndman and Fan, "Sample quantiles in
statistical packages", The American Statistician 50 (1996) 361-365, definition 7), and ``inf``
wherever that interpolation leans on an infinite value, so that a percentile is never a
finite number computed from an infinity.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["percentile_with_inf"]


def percentile_with_inf(values: np.ndarray, q: float) -> float:
    """Linear-interpolation percentile of ``values``; ``inf`` where it leans on ``+inf``.

    Parameters
    ----------
    values : ndarray, shape (n,)
        Sample without NaN, in any unit; ``+inf`` allowed.
    q : float
        Percentile, in percent (0 to 100).

    Returns
    -------
    float
        In the unit of ``values``; NaN for an empty sample.
    """
    values = np.asarray(values, dtype=float)
    if values.size == 0:
        return math.nan
    if np.isinf(np.percentile(values, q, method="higher")):
        return math.inf
    return float(np.percentile(values, q, method="linear"))
