"""Stability margins per sample as a result object, with its JSON-friendly summary.

:func:`robustff.design.margins.loop_margins` computes the arrays; this module holds them and
turns them into the ``margins`` section of ``summary.json``: percentiles over the stable
samples, the fractions beyond the design limits, the unstable samples and their process parameters.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from robustff.jsonvalues import json_float
from robustff.percentile import percentile_with_inf
from robustff.plant.models import PlantBatch

__all__ = ["MarginResult", "MS_LIMIT", "GAIN_MARGIN_LIMIT", "PHASE_MARGIN_LIMIT", "LIMITS_NOTE"]

#: Design limits for the "fraction below limits" summary (common practice, no source).
MS_LIMIT = 2.0
GAIN_MARGIN_LIMIT = 2.0
PHASE_MARGIN_LIMIT = 30.0
#: The limits in words, for reports.
LIMITS_NOTE = (f"Ms > {MS_LIMIT:g}, GM < {GAIN_MARGIN_LIMIT:g}, PM < {PHASE_MARGIN_LIMIT:g} deg: "
               "common practice, no source")


def _percentile(values: np.ndarray, p: float) -> float | None:
    """Linear-interpolation percentile; None where it is (or leans on) an infinite value."""
    return json_float(percentile_with_inf(values, p))


def _distribution(values: np.ndarray, percentiles: Sequence[float]) -> dict[str, object]:
    """``n``, ``infinite``, ``min``, ``p..``, ``max`` of the non-NaN values (None: infinite)."""
    data = values[~np.isnan(values)]
    out: dict[str, object] = {"n": int(data.size), "infinite": int(np.isinf(data).sum())}
    if data.size == 0:
        return out | {"min": None, "max": None} | {f"p{p:g}": None for p in percentiles}
    out["min"] = _percentile(data, 0.0)
    for p in percentiles:
        out[f"p{p:g}"] = _percentile(data, p)
    out["max"] = _percentile(data, 100.0)
    return out


@dataclass(frozen=True)
class MarginResult:
    """Stability margins per sample (arrays of shape (n,)).

    Attributes
    ----------
    gain_margin : ndarray
        Smallest ``1/|L|`` over the phase crossovers (dimensionless); ``inf`` without any.
    phase_margin : ndarray
        Smallest phase margin over the gain crossovers, degrees; ``inf`` without any.
    delay_margin : ndarray
        Extra dead time that makes the loop marginal, time units; ``inf`` without a gain
        crossover, NaN for unstable samples.
    ms : ndarray
        Peak sensitivity ``max |1/(1+L)|``; ``inf`` for unstable samples.
    stable : ndarray of bool
        Closed loop stable (Nyquist criterion).
    """

    gain_margin: np.ndarray
    phase_margin: np.ndarray
    delay_margin: np.ndarray
    ms: np.ndarray
    stable: np.ndarray

    @property
    def size(self) -> int:
        return int(self.stable.shape[0])

    def unstable_indices(self) -> np.ndarray:
        """Indices of the unstable samples, shape (k,)."""
        return np.nonzero(~self.stable)[0]

    def fraction_below_limits(self) -> dict[str, float | None]:
        """Fractions of ALL samples beyond the design limits; unstable samples count as beyond.

        Limits Ms > 2, GM < 2, PM < 30 deg are common practice, no source.
        """
        if self.size == 0:
            return {"ms_above_2": None, "gain_margin_below_2": None, "phase_margin_below_30": None}
        bad = ~self.stable
        return {
            "ms_above_2": float(np.mean(bad | (self.ms > MS_LIMIT))),
            "gain_margin_below_2": float(np.mean(bad | (self.gain_margin < GAIN_MARGIN_LIMIT))),
            "phase_margin_below_30": float(np.mean(bad | (self.phase_margin < PHASE_MARGIN_LIMIT))),
        }

    def summary(
        self, percentiles: Sequence[float] = (5.0, 50.0, 95.0), batch: PlantBatch | None = None,
        listed: int = 50,
    ) -> dict[str, object]:
        """JSON-friendly summary (no NaN or inf).

        Percentiles (``numpy`` linear method) are over the STABLE samples only; each metric has
        ``n`` (samples used), ``infinite`` (how many are infinite, e.g. no phase crossover),
        ``min``, ``p..``, ``max``. A value that is infinite, or interpolates towards an infinite
        one, is ``None``. ``fraction_below_limits`` is over all samples, unstable ones counting
        as below every limit (Ms > 2, GM < 2, PM < 30 deg: common practice, no source).
        ``unstable_samples`` lists the first ``listed`` indices; with ``batch`` given,
        ``unstable_parameters`` gives their process parameters.
        """
        stable = self.stable
        out: dict[str, object] = {
            name: _distribution(getattr(self, name)[stable], percentiles)
            for name in ("gain_margin", "phase_margin", "delay_margin", "ms")
        }
        unstable = self.unstable_indices()
        out["fraction_below_limits"] = self.fraction_below_limits()
        out["unstable"] = int(unstable.size)
        out["unstable_samples"] = [int(i) for i in unstable[:listed]]
        if batch is not None:
            out["unstable_parameters"] = [
                {key[len("process."):]: float(col[i]) for key, col in batch.values.items()
                 if key.startswith("process.")}
                for i in unstable[:listed]
            ]
        return out
