"""Which uncertain parameter drives the result: rank correlations and Sobol indices.

Pure functions on arrays (samples along axis 0); ``scipy.stats`` (slow to import, 0.4 to 0.7 s)
only inside :func:`sobol_first_total`: the ranks of the ``run`` path's rank correlations are
computed with numpy (:func:`average_ranks`).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass

import numpy as np

from robustff.errors import DataError
from robustff.jsonvalues import json_float

__all__ = ["SensitivityRow", "spearman_with_interval", "rank_sensitivity", "sobol_first_total",
           "average_ranks"]

# Standard error of Fisher's z of a Spearman coefficient: 1.06 / sqrt(n - 3).
# Source: Fieller, Hartley and Pearson, "Tests for rank correlation coefficients. I",
# Biometrika 44 (1957) 470-481 [from memory].
_SPEARMAN_SE_FACTOR = 1.06


@dataclass(frozen=True)
class SensitivityRow:
    """Influence of one uncertain parameter (one bar of a tornado chart).

    Attributes
    ----------
    name : str
        Parameter name as in the case (e.g. ``"process.gain"``).
    rho, low, high : float
        Spearman rank correlation with the response and its confidence interval (NaN when the
        parameter or the response does not vary, or too few samples).
    n : int
        Samples used for ``rho`` (finite response and parameter).
    rho_harm, harm_low, harm_high : float
        Spearman correlation with the harm indicator (1 = feedforward worse) and its interval;
        NaN when no indicator was given or it does not vary.
    n_harm : int
        Samples used for ``rho_harm`` (finite parameter; unstable responses are kept because
        the indicator is defined for them).
    """

    name: str
    rho: float
    low: float
    high: float
    n: int
    rho_harm: float = float("nan")
    harm_low: float = float("nan")
    harm_high: float = float("nan")
    n_harm: int = 0

    def to_dict(self) -> dict:
        """JSON-friendly dict; intervals as ``[low, high]`` lists, NaN as None."""
        return {
            "name": self.name,
            "rho": json_float(self.rho),
            "ci95": [json_float(self.low), json_float(self.high)],
            "n": self.n,
            "rho_harm": json_float(self.rho_harm),
            "harm_ci95": [json_float(self.harm_low), json_float(self.harm_high)],
            "n_harm": self.n_harm,
        }


def spearman_with_interval(
    x: np.ndarray, y: np.ndarray, confidence: float = 0.95
) -> tuple[float, float, float]:
    """Spearman rank correlation with a Fisher-z confidence interval.

    Parameters
    ----------
    x, y : ndarray, shape (n,)
        Paired finite values (ties get average ranks).
    confidence : float
        Confidence level of the interval.

    Returns
    -------
    rho, low, high : float
        NaN when either input is constant or ``n < 3``; the interval is NaN for ``n <= 3``.
        ``atanh(rho) +- z * 1.06 / sqrt(n - 3)`` back-transformed with ``tanh``.
    """
    if x.size < 3:
        nan = float("nan")
        return nan, nan, nan
    return _spearman_of_ranks(average_ranks(x), average_ranks(y), confidence)


def _spearman_of_ranks(
    rx: np.ndarray, ry: np.ndarray, confidence: float
) -> tuple[float, float, float]:
    """:func:`spearman_with_interval` from the average ranks of ``x`` and ``y``."""
    from scipy.special import ndtri

    n = rx.size
    nan = float("nan")
    if n < 3:
        return nan, nan, nan
    rx, ry = rx - rx.mean(), ry - ry.mean()
    denom = math.sqrt(float(np.dot(rx, rx)) * float(np.dot(ry, ry)))
    if denom == 0.0:
        return nan, nan, nan
    rho = float(np.clip(np.dot(rx, ry) / denom, -1.0, 1.0))
    if n <= 3:
        return rho, nan, nan
    z = math.atanh(float(np.clip(rho, -1 + 1e-15, 1 - 1e-15)))
    half = float(ndtri(0.5 + confidence / 2)) * _SPEARMAN_SE_FACTOR / math.sqrt(n - 3)
    return rho, math.tanh(z - half), math.tanh(z + half)


def average_ranks(values: np.ndarray) -> np.ndarray:
    """1-based ranks of ``values`` (shape (n,)), ties sharing the mean of their ranks.

    The same numbers as ``scipy.stats.rankdata(values)`` (method "average"; all NaN when any
    value is NaN), with numpy alone: the ``run`` path then does not import ``scipy.stats``.
    """
    data = np.asarray(values, dtype=np.float64).ravel()
    n = data.size
    if n and np.isnan(data).any():
        return np.full(n, np.nan)
    # Any sort gives the same ranks: tied values all get their mean rank, whatever their
    # order among themselves; the default (introsort, SIMD on AVX-512) is 2.5x mergesort.
    order = np.argsort(data)
    ordered = data[order]
    new_value = np.r_[True, ordered[1:] != ordered[:-1]] if n else np.empty(0, bool)
    del ordered
    ranks = np.empty(n, dtype=np.float64)
    if new_value.all():  # no ties (sampled parameters): the k-th smallest has rank k
        ranks[order] = np.arange(1.0, n + 1.0)
        return ranks
    starts = np.flatnonzero(new_value)
    counts = np.diff(np.r_[starts, n])
    ranks[order] = np.repeat(starts + (counts + 1) / 2.0, counts)
    return ranks


def _check_inputs(
    parameters: np.ndarray, names: Sequence[str], response: np.ndarray, harm: np.ndarray | None
) -> tuple[np.ndarray, np.ndarray, np.ndarray | None]:
    par = np.asarray(parameters, dtype=float)
    resp = np.asarray(response, dtype=float)
    if par.ndim != 2 or resp.ndim != 1 or par.shape[0] != resp.size:
        raise DataError(
            "sensitivity needs parameters (samples, parameters) and one response per sample, "
            f"got {par.shape} and {resp.shape}"
        )
    if len(names) != par.shape[1]:
        raise DataError(f"{len(names)} parameter names given for {par.shape[1]} parameter columns")
    flag = None
    if harm is not None:
        flag = np.asarray(harm)
        if flag.shape != resp.shape:
            raise DataError(f"harm indicator has shape {flag.shape}, response {resp.shape}")
        flag = flag.astype(bool).astype(float)
    return par, resp, flag


def _mapped(function: Callable, items: Sequence, jobs: int) -> list:
    """``[function(item) for item in items]``, in ``jobs`` threads when more than one (the
    sorts release the GIL; each item is independent, so the results do not depend on it)."""
    if jobs <= 1 or len(items) <= 1:
        return [function(item) for item in items]
    with ThreadPoolExecutor(jobs, thread_name_prefix="ranks") as pool:
        return list(pool.map(function, items))


def rank_sensitivity(
    parameters: np.ndarray,
    names: Sequence[str],
    response: np.ndarray,
    harm: np.ndarray | None = None,
    confidence: float = 0.95,
    jobs: int = 1,
) -> list[SensitivityRow]:
    """Rank correlation of each uncertain parameter with a response and with harm.

    Parameters
    ----------
    parameters : ndarray, shape (n, p)
        Sampled parameter values, one row per sample.
    names : sequence of str, length p
        Parameter names.
    response : ndarray, shape (n,)
        Response per sample, e.g. the IAE ratio fbff/fb; NaN/inf rows are dropped for ``rho``.
    harm : ndarray of bool, shape (n,), optional
        True where feedforward was worse (including samples unstable only with feedforward).
    confidence : float
        Confidence level of the Fisher-z intervals.
    jobs : int
        Threads ranking the columns (2 pays from about 50,000 samples; the numbers do not
        depend on it).

    Returns
    -------
    list of SensitivityRow
        Sorted by ``|rho|`` descending (parameters with undefined ``rho`` last), ties by
        ``|rho_harm|``.
    """
    par, resp, flag = _check_inputs(parameters, names, response, harm)
    finite_response = np.isfinite(resp)
    # Ranks of a whole column are worked out once and shared by the correlations that use all
    # of its rows (the usual case: every sample finite); a subset is ranked on its own. The
    # response's and the indicator's are kept for every parameter, a parameter's only while
    # its own correlations are worked out (memory: a few columns, whatever the parameters).
    shared = [resp if finite_response.all() else None, flag]  # None: not ranked whole
    response_ranks, harm_ranks = _mapped(
        lambda values: None if values is None else average_ranks(values), shared, jobs)

    def row(j: int) -> SensitivityRow:
        col = par[:, j]
        okh = np.isfinite(col)
        ok = okh & finite_response
        col_ranks = average_ranks(col) if okh.all() else None

        def ranks(values: np.ndarray, of_whole: np.ndarray | None,
                  rows: np.ndarray) -> np.ndarray:
            return of_whole if of_whole is not None and rows.all() else average_ranks(values[rows])

        rho, low, high = _spearman_of_ranks(ranks(col, col_ranks, ok),
                                            ranks(resp, response_ranks, ok), confidence)
        extra: dict = {}
        if flag is not None:
            rh, lh, hh = _spearman_of_ranks(ranks(col, col_ranks, okh),
                                            ranks(flag, harm_ranks, okh), confidence)
            extra = {"rho_harm": rh, "harm_low": lh, "harm_high": hh, "n_harm": int(okh.sum())}
        return SensitivityRow(names[j], rho, low, high, int(ok.sum()), **extra)

    rows = _mapped(row, range(len(names)), jobs)

    def key(row: SensitivityRow) -> tuple[float, float]:
        a = abs(row.rho) if math.isfinite(row.rho) else -1.0
        b = abs(row.rho_harm) if math.isfinite(row.rho_harm) else -1.0
        return (-a, -b)

    return sorted(rows, key=key)


def sobol_first_total(
    func: Callable[[np.ndarray], np.ndarray],
    dists: Sequence,
    n: int,
    seed: int | np.random.SeedSequence | None,
) -> tuple[np.ndarray, np.ndarray]:
    """First-order and total Sobol indices through ``scipy.stats.sobol_indices``.

    Parameters
    ----------
    func : callable
        ``func(x)`` with ``x`` of shape (d, m) (one column per model evaluation) returning
        shape (m,) or (s, m). Values must be finite.
    dists : sequence of scipy.stats frozen distributions, length d
        Independent input distributions (each needs ``ppf``).
    n : int
        Base sample size; rounded up to a power of two (a scipy requirement). The model is
        evaluated ``n * (d + 2)`` times (Saltelli et al. 2010 scheme).
    seed : int, SeedSequence or None
        Seed of the quasi-random generator.

    Returns
    -------
    first, total : ndarray, shape (d,) for a scalar output, else (s, d)
    """
    from scipy.stats import sobol_indices

    if n < 2:
        raise DataError(f"Sobol analysis needs a base sample size of at least 2, got {n}")
    if not dists:
        raise DataError("Sobol analysis needs at least one input distribution")
    n_pow2 = 1 << (int(n) - 1).bit_length()
    scalar = [False]

    def wrapped(x: np.ndarray) -> np.ndarray:
        y = np.asarray(func(x), dtype=float)
        scalar[0] = y.ndim == 1
        return np.atleast_2d(y)

    rng = np.random.default_rng(seed)
    res = sobol_indices(func=wrapped, n=n_pow2, dists=list(dists), rng=rng)
    # scipy squeezes a single output to shape (d,); make it (s, d) before choosing the shape
    d = len(dists)
    first = np.asarray(res.first_order).reshape(-1, d)
    total = np.asarray(res.total_order).reshape(-1, d)
    if scalar[0]:
        return first[0], total[0]
    return first, total
