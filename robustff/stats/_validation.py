"""Argument checks and small conversions shared by the statistics modules (private)."""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from robustff.errors import DataError


def z_value(confidence: float) -> float:
    """Two-sided standard normal quantile for a confidence level (1.96 for 0.95)."""
    from scipy.special import ndtri

    check_confidence(confidence)
    return float(ndtri(0.5 + confidence / 2.0))


def check_confidence(confidence: float) -> None:
    """Raise DataError unless 0 < confidence < 1."""
    if not (0.0 < confidence < 1.0):
        raise DataError(f"confidence level must lie strictly between 0 and 1, got {confidence!r}")


def as_vector(values: np.ndarray, what: str) -> np.ndarray:
    """``values`` as a float array of shape (n,); DataError naming ``what`` otherwise."""
    arr = np.asarray(values, dtype=float)
    if arr.ndim != 1:
        raise DataError(f"{what} must be a 1-D array of samples, got shape {arr.shape}")
    return arr


def check_percentiles(percentiles: Sequence[float]) -> list[float]:
    """Percentiles (percent) as floats; DataError if none or any outside 0..100."""
    out = [float(p) for p in percentiles]
    if not out:
        raise DataError("at least one percentile is needed, e.g. 5, 50, 95")
    bad = [p for p in out if not (0.0 <= p <= 100.0)]
    if bad:
        raise DataError(f"percentiles must lie between 0 and 100, got {bad}")
    return out


def finite_values(values: np.ndarray, what: str) -> np.ndarray:
    """The finite entries of a 1-D array (NaN/inf, i.e. unstable samples, dropped)."""
    arr = as_vector(values, what)
    return arr[np.isfinite(arr)]


def paired_arrays(fb: np.ndarray, fbff: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Both arms as float arrays of the same shape (n,); DataError otherwise."""
    a = as_vector(fb, "feedback-only metric")
    b = as_vector(fbff, "feedback-plus-feedforward metric")
    if a.shape != b.shape:
        raise DataError(
            f"paired metrics need one value per sample in both arms, got {a.size} and {b.size}"
        )
    return a, b
