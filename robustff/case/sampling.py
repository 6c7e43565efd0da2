"""Sampling of the uncertain plant parameters of a case.

A sample is built in three steps, all vectorised over the samples:

1. *uniform scores* in (0, 1)^p from a sampling plan: plain pseudo-random numbers
   (``numpy.random.Generator``), a Latin hypercube (numpy alone) or a scrambled Sobol sequence
   (``scipy.stats.qmc``), all seeded from one seed;
2. optional *rank correlation* by a Gaussian copula: the scores of the correlated parameters are
   mapped to normal scores, mixed with the Cholesky factor of their correlation matrix and mapped
   back. The target Spearman rank correlation rho is converted to the Pearson correlation of the
   normal scores, ``r = 2 sin(pi rho / 6)``, which gives exactly rho for a bivariate normal
   (Kruskal, "Ordinal measures of association", JASA 53 (1958) 814-861; from memory);
3. the *inverse distribution function* of each parameter (closed forms using
   ``scipy.special.ndtri``; the tests check them against ``scipy.stats`` ppf).

Clipped distributions (``normal``/``lognormal`` with ``clip``) are clipped after the inverse
transform: values beyond a bound are set to the bound, so the bounds carry the tail mass (this is
not a truncated distribution).

Only the parameters taking part in a correlation pass through the copula, so a Latin hypercube
keeps its exact stratification in every uncorrelated column.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Sequence
from statistics import NormalDist

import numpy as np

from robustff.case.balance_sampling import balance_plant_batch
from robustff.case.schema import Case, Correlation, Distribution, UncertainParameter
from robustff.errors import CaseError
from robustff.plant.models import PlantBatch

__all__ = [
    "SAMPLING_PLANS",
    "nominal_plants",
    "sample",
    "uniform_scores",
    "inverse_cdf",
    "copula_factor",
    "plant_batch",
    "describe_distribution",
    "distribution_bounds",
]

SAMPLING_PLANS: tuple[str, ...] = ("random", "lhs", "sobol")
# Scores are kept inside (0, 1) so that unbounded inverse distribution functions stay finite.
_SCORE_EPS = 2.0**-53
_SKIP_CHUNK = 1 << 20
_Z995 = NormalDist().inv_cdf(0.995)


def sample(
    case: Case,
    n: int,
    seed: int | np.random.SeedSequence,
    *,
    sampling: str | None = None,
    skip: int = 0,
) -> tuple[np.ndarray, list[str]]:
    """Draw ``n`` perturbed parameter sets for the uncertain parameters of ``case``.

    Parameters
    ----------
    case : Case
        Supplies the distributions (``case.uncertainty``), correlations and nominal values.
    n : int
        Number of samples (>= 0).
    seed : int or numpy.random.SeedSequence
        Same seed, same samples, bit for bit.
    sampling : {"random", "lhs", "sobol"}, optional
        Sampling plan; default ``case.study.sampling``.
    skip : int
        Return rows ``skip .. skip + n - 1`` of the plan of ``skip + n`` points. For "random" and
        "sobol" these rows are the same whatever the total (a continuation); a Latin hypercube
        depends on its total size, so its rows are only stratified over all ``skip + n`` points.

    Returns
    -------
    values : ndarray, shape (n, p), float64
        One row per sample, one column per uncertain parameter, in case units.
    names : list of str
        The ``p`` parameter keys (e.g. ``"process.gain"``), in ``case.uncertainty`` order.
    """
    plan = sampling or case.study.sampling
    names = [parameter.key for parameter in case.uncertainty]
    if n < 0 or skip < 0:
        raise ValueError(f"n and skip must be >= 0 (got n = {n}, skip = {skip})")
    if not names:
        return np.empty((n, 0), dtype=np.float64), names
    scores = uniform_scores(plan, n, len(names), seed, skip=skip)
    if case.correlations:
        _apply_copula(scores, names, case.correlations)
    values = np.empty_like(scores)
    for column, parameter in enumerate(case.uncertainty):
        nominal = case.nominal_value(parameter.key)
        values[:, column] = inverse_cdf(parameter.distribution, nominal, scores[:, column])
    return values, names


def uniform_scores(
    plan: str, n: int, d: int, seed: int | np.random.SeedSequence, *, skip: int = 0
) -> np.ndarray:
    """Points of a sampling plan in the open unit cube.

    Parameters
    ----------
    plan : {"random", "lhs", "sobol"}
    n, d : int
        Number of points and dimensions.
    seed : int or numpy.random.SeedSequence
    skip : int
        Leading points of the plan to drop (see :func:`sample`).

    Returns
    -------
    ndarray, shape (n, d), float64, values in [2**-53, 1 - 2**-53]

    Notes
    -----
    Sobol points are scrambled (Owen scrambling with a digital shift, ``scipy.stats.qmc.Sobol``).
    Their balance properties hold for a power-of-two number of points from the start of the
    sequence; for other counts the first ``n`` points are used as they are, without scipy's
    warning about it.
    """
    rng = np.random.default_rng(_private_copy(seed))
    total = n + skip
    if plan == "random":
        for start in range(0, skip, _SKIP_CHUNK):  # discard in chunks to bound memory
            rng.random((min(_SKIP_CHUNK, skip - start), d))
        scores = rng.random((n, d))
    elif plan == "lhs":
        scores = _latin_hypercube(total, d, rng)[skip:] if total else np.empty((0, d))
    elif plan == "sobol":
        scores = _sobol(d, n, skip, rng)
    else:
        choices = ", ".join(SAMPLING_PLANS)
        raise CaseError(f"sampling plan {plan!r} is unknown (use one of {choices})")
    scores = np.asarray(scores, dtype=np.float64)
    return np.clip(scores, _SCORE_EPS, 1.0 - _SCORE_EPS, out=scores)


def _private_copy(seed: int | np.random.SeedSequence) -> int | np.random.SeedSequence:
    """A copy of a seed sequence, so that the caller's object is never changed.

    scipy's samplers spawn from the generator's seed sequence; without the copy, a second call
    with the same SeedSequence object would draw different numbers.
    """
    if not isinstance(seed, np.random.SeedSequence):
        return seed
    return np.random.SeedSequence(
        seed.entropy, spawn_key=seed.spawn_key, pool_size=seed.pool_size,
        n_children_spawned=seed.n_children_spawned,
    )


def _latin_hypercube(n: int, d: int, rng: np.random.Generator) -> np.ndarray:
    """A Latin hypercube of ``n`` points in ``[0, 1)^d``.

    In every column each of the ``n`` equal strata holds one point, placed uniformly inside it,
    and the strata of the columns are paired at random (McKay, Beckman and Conover,
    Technometrics 21 (1979) 239-245; from memory). The random numbers are drawn as
    ``scipy.stats.qmc.LatinHypercube(d, rng=rng).random(n)`` draws them (scipy 1.11 to 1.17:
    a child generator spawned from ``rng``, the in-stratum offsets, then one shuffle per
    column), so a case gives the same samples as before; with numpy alone the run does not
    import ``scipy.stats`` (0.4 to 0.7 s).
    """
    child = rng.spawn(1)[0]
    offsets = child.uniform(size=(n, d))
    strata = np.tile(np.arange(1, n + 1), (d, 1))
    for column in range(d):
        child.shuffle(strata[column, :])
    # In place, into the offsets' array: the same numbers, one (n, d) array fewer at once.
    points = np.subtract(strata.T, offsets, out=offsets)
    del strata
    points /= n
    return points


def _sobol(d: int, n: int, skip: int, rng: np.random.Generator) -> np.ndarray:
    from scipy.stats import qmc

    engine = qmc.Sobol(d, scramble=True, rng=rng)
    if n == 0:
        return np.empty((0, d))
    if skip == 0 and n & (n - 1) == 0:
        return engine.random_base2(int(n).bit_length() - 1)
    if skip:
        engine.fast_forward(skip)
    with warnings.catch_warnings():
        warnings.filterwarnings("ignore", message=".*balance properties of Sobol.*")
        return engine.random(n)


def copula_factor(
    names: Sequence[str], correlations: Sequence[Correlation]
) -> tuple[list[int], np.ndarray]:
    """Columns that are rank-correlated and the Cholesky factor of their normal-score correlation.

    Parameters
    ----------
    names : sequence of str
        Uncertain parameter keys, in column order.
    correlations : sequence of Correlation
        Target Spearman rank correlations between pairs of them.

    Returns
    -------
    columns : list of int
        Indices into ``names`` of the parameters that take part in a correlation (sorted).
    factor : ndarray, shape (m, m)
        Lower-triangular ``L`` with ``L @ L.T = R``, ``R[i, j] = 2 sin(pi rho_ij / 6)``.

    Raises
    ------
    CaseError
        If the correlations cannot hold together (``R`` not positive definite).
    """
    columns = sorted({names.index(c.first) for c in correlations}
                     | {names.index(c.second) for c in correlations})
    position = {column: i for i, column in enumerate(columns)}
    matrix = np.eye(len(columns))
    for c in correlations:
        i, j = position[names.index(c.first)], position[names.index(c.second)]
        matrix[i, j] = matrix[j, i] = 2.0 * math.sin(math.pi * c.rank_correlation / 6.0)
    try:
        factor = np.linalg.cholesky(matrix)
    except np.linalg.LinAlgError:
        factor = None
    if factor is None or np.min(np.diag(factor)) < 1e-6:
        raise CaseError("the rank correlations contradict each other (their correlation matrix "
                        "is not positive definite); make them weaker")
    return columns, factor


def _apply_copula(
    scores: np.ndarray, names: list[str], correlations: Sequence[Correlation]
) -> None:
    """Impose the rank correlations on ``scores`` (shape (n, p)) in place."""
    from scipy.special import ndtr, ndtri

    columns, factor = copula_factor(names, correlations)
    independent = ndtri(scores[:, columns])
    # Row i of L mixes the first i + 1 independent normal scores; an explicit sum over a few
    # columns is faster than a matrix product on (n, m) arrays.
    for i, column in enumerate(columns):
        mixed = factor[i, 0] * independent[:, 0]
        for j in range(1, i + 1):
            mixed += factor[i, j] * independent[:, j]
        scores[:, column] = np.clip(ndtr(mixed), _SCORE_EPS, 1.0 - _SCORE_EPS)


def inverse_cdf(distribution: Distribution, nominal: float, scores: np.ndarray) -> np.ndarray:
    """Map uniform scores to parameter values (the distribution's quantile function).

    Parameters
    ----------
    distribution : Distribution
    nominal : float
        The parameter's nominal value (used by ``relative``).
    scores : ndarray, shape (n,)
        Values in (0, 1).

    Returns
    -------
    ndarray, shape (n,), float64
    """
    from scipy.special import ndtri

    kind, params = distribution.kind, distribution.params
    u = np.asarray(scores, dtype=np.float64)
    if kind in ("uniform", "relative"):
        low, high = _uniform_range(distribution, nominal)
        values = low + u * (high - low)
    elif kind == "triangular":
        values = _triangular(u, *params)
    elif kind == "normal":
        values = params[0] + params[1] * ndtri(u)
    elif kind == "lognormal":
        values = params[0] * np.exp(math.log(params[1]) * ndtri(u))
    else:
        raise CaseError(f"distribution {kind!r} is unknown")
    if distribution.clip is not None:
        values = np.clip(values, distribution.clip[0], distribution.clip[1])
    return values


def _uniform_range(distribution: Distribution, nominal: float) -> tuple[float, float]:
    if distribution.kind == "relative":
        r = distribution.params[0]
        ends = sorted((nominal * (1.0 - r), nominal * (1.0 + r)))  # nominal may be negative
        return ends[0], ends[1]
    return distribution.params[0], distribution.params[1]


def _triangular(u: np.ndarray, low: float, mode: float, high: float) -> np.ndarray:
    width = high - low
    split = (mode - low) / width
    rising = low + np.sqrt(u * width * (mode - low))
    falling = high - np.sqrt((1.0 - u) * width * (high - mode))
    return np.where(u < split, rising, falling)


def plant_batch(case: Case, names: Sequence[str], values: np.ndarray) -> PlantBatch:
    """Nominal plants with the sampled parameters written in.

    Parameters
    ----------
    case : Case
    names : sequence of str
        Parameter keys, one per column of ``values``.
    values : ndarray, shape (n, len(names))

    Returns
    -------
    PlantBatch
        ``n`` plants; parameters not in ``names`` keep their nominal values.
    """
    values = np.asarray(values, dtype=np.float64)
    if values.ndim != 2 or values.shape[1] != len(names):
        raise ValueError(f"values must have shape (n, {len(names)}), got {values.shape}")
    if case.balance is not None:
        return balance_plant_batch(case, names, values)
    batch = nominal_plants(case, values.shape[0])
    for column, name in enumerate(names):
        batch.set_parameter(name, np.ascontiguousarray(values[:, column]))
    return batch


def nominal_plants(case: Case, n: int) -> PlantBatch:
    """``n`` copies of the case's nominal plant (every disturbance path, valve, secondary)."""
    named = tuple((item.name, item.model, item.sensor, item.measured)
                  for item in case.disturbances)
    return PlantBatch.from_nominal(case.process, case.disturbance, case.sensor, n, case.valve,
                                   case.secondary.model if case.secondary else None, named)


def distribution_bounds(parameter: UncertainParameter, nominal: float) -> tuple[float, float]:
    """Range of a parameter: the support of bounded distributions, else P0.5 .. P99.5.

    Clip bounds are applied to the percentiles of ``normal`` and ``lognormal``.
    """
    distribution = parameter.distribution
    kind, params = distribution.kind, distribution.params
    if kind in ("uniform", "relative"):
        return _uniform_range(distribution, nominal)
    if kind == "triangular":
        return params[0], params[2]
    if kind == "normal":
        low, high = params[0] - _Z995 * params[1], params[0] + _Z995 * params[1]
    else:
        low, high = params[0] / params[1] ** _Z995, params[0] * params[1] ** _Z995
    if distribution.clip is not None:
        low, high = max(low, distribution.clip[0]), min(high, distribution.clip[1])
    return low, high


def describe_distribution(parameter: UncertainParameter, nominal: float, unit: str = "") -> str:
    """One line for tables, e.g. ``"uniform 1.6 .. 2.4 degC/%"``."""
    distribution = parameter.distribution
    kind, params, clip = distribution.kind, distribution.params, distribution.clip
    u = f" {unit}" if unit else ""
    if kind == "uniform":
        text = f"uniform {params[0]:.4g} .. {params[1]:.4g}{u}"
    elif kind == "relative":
        low, high = _uniform_range(distribution, nominal)
        text = f"uniform {low:.4g} .. {high:.4g}{u} (nominal +/- {100 * params[0]:.3g} %)"
    elif kind == "triangular":
        text = f"triangular {params[0]:.4g} .. {params[2]:.4g}{u}, mode {params[1]:.4g}{u}"
    elif kind == "normal":
        text = f"normal mean {params[0]:.4g}{u}, std {params[1]:.4g}{u}"
    else:
        # the factor multiplies: it has no unit
        text = f"lognormal median {params[0]:.4g}{u}, factor {params[1]:.4g}"
    if clip is not None:
        text += f", clipped to {clip[0]:.4g} .. {clip[1]:.4g}{u}"
    return text
