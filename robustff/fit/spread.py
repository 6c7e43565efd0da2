"""From fitted models to the uncertainty of a case: spread between test files, distribution choice.

Rules (common practice, no source):

* one file: a normal distribution with the standard deviation implied by the 95 % interval
  (half-width / 1.96), clipped to the interval widened by half its width (and at zero for times);
* two to four files: uniform over the range of the files' values widened by their intervals;
* five or more files: lognormal when every interval is positive and the values span more than a
  factor 1.5 (a multiplicative spread), else normal; the spread combines the between-file
  variance and the mean within-file variance; clipped to the widened range.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from robustff.fit.least_squares import FitResult
from robustff.plant.models import MODEL_PARAMETERS

__all__ = ["Proposal", "propose_distribution", "combine_fits"]

_Z975 = 1.959963984540054


@dataclass(frozen=True)
class Proposal:
    """A proposed distribution for one parameter, in case-file terms.

    Parameters
    ----------
    kind : {"uniform", "normal", "lognormal", "none"}
        ``"none"``: the fits give no spread for this parameter (no interval was computed, or
        every interval has zero width); it is left certain rather than given a degenerate
        distribution such as ``uniform [x, x]``.
    params : tuple of float
        ``uniform``: (low, high); ``normal``: (mean, std); ``lognormal``: (median, factor);
        ``none``: ().
    clip : tuple of float or None
        (low, high) bounds for normal and lognormal.
    value : float
        Nominal value to write into the model block.
    """

    kind: str
    params: tuple[float, ...]
    clip: tuple[float, float] | None
    value: float

    @property
    def has_spread(self) -> bool:
        """False for ``"none"``: nothing to write into ``[uncertainty]``."""
        return self.kind != "none"

    def to_dict(self) -> dict[str, list[float]]:
        """The inline table of the case file, e.g. ``{"normal": [m, s], "clip": [lo, hi]}``;
        ``{}`` for ``"none"``."""
        if not self.has_spread:
            return {}
        out = {self.kind: [_round(v) for v in self.params]}
        if self.clip is not None:
            out["clip"] = [_round(v) for v in self.clip]
        return out

    def scaled(self, factor: float) -> Proposal:
        """The same proposal for a parameter multiplied by ``factor`` (> 0), e.g. a unit change."""
        params = tuple(v * factor for v in self.params)
        if self.kind == "lognormal":
            params = (self.params[0] * factor, self.params[1])
        clip = None if self.clip is None else (self.clip[0] * factor, self.clip[1] * factor)
        return Proposal(self.kind, params, clip, self.value * factor)


def _round(value: float) -> float:
    return float(f"{value:.6g}")


def propose_distribution(values: np.ndarray, cis: np.ndarray, nonnegative: bool) -> Proposal:
    """Choose a distribution for one parameter fitted on several files.

    Parameters
    ----------
    values : ndarray, shape (F,)
        Best-fit values, one per file.
    cis : ndarray, shape (F, 2)
        95 % intervals per file (rows may be NaN when no interval was computed).
    nonnegative : bool
        True for times (the distribution is clipped at zero).

    Returns
    -------
    Proposal
    """
    values = np.asarray(values, dtype=float)
    cis = np.where(np.isfinite(cis), cis, np.column_stack([values, values]))
    low, high = float(np.min(cis[:, 0])), float(np.max(cis[:, 1]))
    within_var = float(np.mean(((cis[:, 1] - cis[:, 0]) / (2 * _Z975)) ** 2))
    widen = 0.5 * (high - low)
    clip = (low - widen, high + widen)
    if nonnegative:
        clip = (max(0.0, clip[0]), clip[1])
        low = max(0.0, low)
    elif np.all(values > 0) or np.all(values < 0):
        # a gain keeps its sign: bound its magnitude away from zero
        floor = 0.05 * float(np.min(np.abs(values)))
        if values[0] > 0:
            clip, low = (max(floor, clip[0]), clip[1]), max(floor, low)
        else:
            clip, high = (clip[0], min(-floor, clip[1])), min(-floor, high)
    n = values.size
    # Zero width (no interval computed, or all intervals collapsed on one value): no spread.
    if not high - low > 1e-9 * max(float(np.max(np.abs(values))), 1e-300):
        return Proposal("none", (), None, float(np.median(values)))
    if n == 1:
        std = math.sqrt(within_var)
        return Proposal("normal", (float(values[0]), std), clip, float(values[0]))
    if n < 5:
        return Proposal("uniform", (low, high), None, float(np.median(values)))
    positive = bool(np.all(cis[:, 0] > 0))
    if positive and values.max() / values.min() > 1.5:
        logs = np.log(values)
        log_within = float(np.mean((np.log(cis[:, 1] / cis[:, 0]) / (2 * _Z975)) ** 2))
        sigma = math.sqrt(float(np.var(logs, ddof=1)) + log_within)
        median = float(np.exp(np.mean(logs)))
        return Proposal("lognormal", (median, math.exp(sigma)), clip, median)
    std = math.sqrt(float(np.var(values, ddof=1)) + within_var)
    mean = float(np.mean(values))
    return Proposal("normal", (mean, std), clip, mean)


def combine_fits(results: list[FitResult]) -> dict[str, Proposal]:
    """A distribution per model parameter from one or more fits of the same loop.

    Parameters
    ----------
    results : list of FitResult
        All of the same model kind, times in the same unit.

    Returns
    -------
    dict of str to Proposal
        Keyed by parameter name (``"gain"``, ``"time_constant"`` ...).
    """
    kind = results[0].model.kind
    out: dict[str, Proposal] = {}
    for name in MODEL_PARAMETERS[kind]:
        values = np.array([r.estimates[name].value for r in results])
        cis = np.array([r.estimates[name].ci95 or (math.nan, math.nan) for r in results])
        out[name] = propose_distribution(values, cis, nonnegative=(name != "gain"))
    return out
