"""Histograms of per-sample ratios and percentile envelopes from per-time histogram counts."""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np

from robustff.errors import DataError
from robustff.stats._validation import as_vector, check_percentiles

__all__ = ["ratio_histogram", "envelope_from_histogram"]


def ratio_histogram(
    ratio: np.ndarray, bins: int = 40, low: float | None = None, high: float | None = None
) -> tuple[np.ndarray, np.ndarray]:
    """Histogram of per-sample ratios ``fbff / fb``.

    NaN is dropped; finite values outside the range and +-inf are counted in the first/last bin.
    The default range is P1..P99 of the finite values, widened to include 1.0 (no change).

    Returns
    -------
    counts : ndarray of int, shape (bins,)
    edges : ndarray, shape (bins + 1,)
    """
    if bins < 1:
        raise DataError(f"number of histogram bins must be at least 1, got {bins}")
    arr = as_vector(ratio, "ratio")
    arr = arr[~np.isnan(arr)]
    finite = arr[np.isfinite(arr)]
    if low is None or high is None:
        p1, p99 = np.percentile(finite, [1, 99]) if finite.size else (1.0, 1.0)
        low = min(float(p1), 1.0) if low is None else low
        high = max(float(p99), 1.0) if high is None else high
    if not (math.isfinite(low) and math.isfinite(high)) or high < low:
        raise DataError(f"histogram range must be finite with low <= high, got {low}, {high}")
    if high == low:
        pad = max(0.05 * abs(low), 0.05)
        low, high = low - pad, high + pad
    edges = np.linspace(low, high, bins + 1)
    idx = np.searchsorted(edges, arr, side="right") - 1
    idx = np.clip(idx, 0, bins - 1)  # out-of-range and +-inf into the end bins
    counts = np.bincount(idx, minlength=bins).astype(np.int64)
    return counts, edges


def envelope_from_histogram(
    counts: np.ndarray, edges: np.ndarray, percentiles: Sequence[float] = (5.0, 50.0, 95.0)
) -> np.ndarray:
    """Percentiles at each time from per-time histogram counts.

    Values are taken as uniformly spread inside each bin, so a percentile is interpolated
    linearly within the bin where the cumulative count crosses it (accurate to one bin width).

    Parameters
    ----------
    counts : ndarray of int, shape (T, B)
        Count of samples per bin at each time (out-of-range values already in the end bins).
    edges : ndarray, shape (B + 1,)
        Increasing bin edges (signal unit).
    percentiles : sequence of float
        Percentiles in percent.

    Returns
    -------
    ndarray, shape (len(percentiles), T)
        NaN at times with no counts.
    """
    plist = check_percentiles(percentiles)
    c = np.asarray(counts, dtype=float)
    e = np.asarray(edges, dtype=float)
    if c.ndim != 2 or e.ndim != 1 or e.size != c.shape[1] + 1:
        raise DataError(
            f"histogram counts must be (times, bins) with bins + 1 edges, got {c.shape} "
            f"and {e.shape}"
        )
    if np.any(c < 0) or np.any(np.diff(e) <= 0):
        raise DataError("histogram counts must be non-negative and edges strictly increasing")
    n_bins = c.shape[1]
    cum = np.concatenate([np.zeros((c.shape[0], 1)), np.cumsum(c, axis=1)], axis=1)  # (T, B+1)
    total = cum[:, -1]
    out = np.full((len(plist), c.shape[0]), np.nan)
    rows = np.arange(c.shape[0])
    for i, p in enumerate(plist):
        # small positive floor so P0 lands in the first non-empty bin, not on an empty one
        target = np.clip(p / 100.0 * total, 1e-9 * total, total)
        j = np.clip(np.sum(cum < target[:, None], axis=1), 1, n_bins)  # crossing bin is j-1
        in_bin = c[rows, j - 1]
        frac = np.divide(
            target - cum[rows, j - 1], in_bin, out=np.zeros_like(target), where=in_bin > 0
        )
        out[i] = np.where(total > 0, e[j - 1] + np.clip(frac, 0, 1) * (e[j] - e[j - 1]), np.nan)
    return out
