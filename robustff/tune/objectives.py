"""The objectives of the robust feedforward search and the smooth score it minimises.

Objectives (on IAE with feedforward; samples where feedback alone is unstable are left out,
since no feedforward changes them; samples unstable only with feedforward count as +inf):

* ``"p90"``: the ``percentile``-th percentile of IAE(fbff) (linear interpolation);
* ``"cvar"``: the conditional value at risk, the mean of the worst ``ceil((1 - alpha) n)``
  IAE(fbff) values (Rockafellar and Uryasev, "Optimization of conditional value-at-risk",
  J. Risk 2 (2000) 21-41);
* ``"harm"``: the probability that IAE(fbff) > IAE(fb), subject to a median improvement
  IAE(fb) - IAE(fbff) > 0.

The search minimises a *score*: the objective with +inf replaced by a finite penalty, and for
``"harm"`` the indicator smoothed by a logistic of width 2 % of IAE(fb), plus 0.01 x the median
IAE ratio as a tie-break, plus 1 + the shortfall when the median improvement is not positive
(otherwise the score is flat and the search has no direction). Reported objective values are
the unsmoothed ones.
"""

from __future__ import annotations

import math

import numpy as np

from robustff.errors import DesignError
from robustff.percentile import percentile_with_inf

__all__ = ["OBJECTIVES", "objective_value", "percentile_with_inf", "search_score",
           "unknown_objective"]

OBJECTIVES: tuple[str, ...] = ("p90", "cvar", "harm")
_HARM_WIDTH = 0.02
_HARM_TIE_WEIGHT = 0.01


def objective_value(objective: str, iae_fb: np.ndarray, iae_fbff: np.ndarray, *,
                    percentile: float = 90.0, cvar_alpha: float = 0.9) -> float:
    """The (unsmoothed) objective of one design on one sample set.

    Parameters
    ----------
    objective : {"p90", "cvar", "harm"}
    iae_fb, iae_fbff : ndarray, shape (n,)
        IAE without and with feedforward; ``inf`` marks a sample unstable with feedforward.
        Samples where feedback alone is unstable must already be removed.
    percentile : float
        Percentile for ``"p90"``, in percent.
    cvar_alpha : float
        Level of the conditional value at risk, 0 < alpha < 1.

    Returns
    -------
    float
        IAE units for p90/cvar; the probability of harm for ``"harm"``.
    """
    if objective == "p90":
        return percentile_with_inf(iae_fbff, percentile)
    if objective == "cvar":
        worst = max(1, math.ceil((1.0 - cvar_alpha) * iae_fbff.size - 1e-9))
        return float(np.mean(np.sort(iae_fbff)[-worst:]))
    if objective == "harm":
        return float(np.mean(iae_fbff > iae_fb))
    raise DesignError(unknown_objective(objective))


def search_score(objective: str, iae_fb: np.ndarray, iae_fbff: np.ndarray, penalty: float,
                 percentile: float, cvar_alpha: float) -> float:
    """The smooth, finite version of the objective that the optimiser minimises."""
    finite = np.where(np.isfinite(iae_fbff), iae_fbff, penalty)
    if objective != "harm":
        return objective_value(objective, iae_fb, finite, percentile=percentile,
                               cvar_alpha=cvar_alpha)
    scale = _HARM_WIDTH * np.maximum(iae_fb, 1e-300)
    smooth = float(np.mean(0.5 * (1.0 + np.tanh((finite - iae_fb) / (2.0 * scale)))))
    ratio = float(np.median(finite / np.maximum(iae_fb, 1e-300)))
    score = smooth + _HARM_TIE_WEIGHT * ratio
    if ratio >= 1.0:  # median improvement not positive: the constraint is violated
        score += 1.0 + (ratio - 1.0)
    return score


def unknown_objective(objective: str) -> str:
    """The message for an objective name not in :data:`OBJECTIVES`."""
    return f"tune: objective {objective!r} is unknown (use one of {', '.join(OBJECTIVES)})"
