"""Feedforward settings that stay good across the uncertainty: a sample-average search.

The feedback controller is the nominal design and stays fixed; only the feedforward changes.
Every candidate is simulated on the SAME sampled plants with the SAME noise seeds (common random
numbers), so differences between candidates are not sampling noise. The sample-average
objective is minimised by Nelder-Mead with bounds (``scipy.optimize.minimize``, scipy >= 1.7)
on parameters scaled to the unit box, started from the better of the nominal design and the
rule of :mod:`robustff.design.feedforward_rule`. The winner and the nominal design are then
simulated on FRESH samples (another seed): the optimum's objective on its own samples is biased low
(it was selected on them), the fresh figure is not. On the fresh samples both are also judged
against the case's ``[recommendation]`` criteria (harm probability and median improvement, the
rule of the report), and the verdict of :mod:`robustff.tune.verdict` recommends the winner, the
nominal design or neither. The objectives and the score the search minimises are described in
:mod:`robustff.tune.objectives`.
"""

from __future__ import annotations

import math
import os
from collections.abc import Callable
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, replace

import numpy as np

from robustff.case import Case
from robustff.case.sampling import plant_batch, sample
from robustff.design.feedforward_rule import feedforward_rule
from robustff.design.tuning import FeedforwardSettings, LoopDesign, design_loop
from robustff.engine import Scenario, build_scenario
from robustff.engine.metrics import METRIC_UNITS
from robustff.errors import DesignError
from robustff.jsonvalues import json_float
from robustff.stats.percentiles import metric_ratio
from robustff.stats.sensitivity import SensitivityRow, rank_sensitivity
from robustff.study import CHUNK_SIZE, chunk_spans, noise_seeds
from robustff.study.runner import NOISE_REPLAY_LIMIT
from robustff.tune.objectives import (
    OBJECTIVES,
    objective_value,
    percentile_with_inf,
    search_score,
    unknown_objective,
)
from robustff.tune.simulation import iae_columns, reference_run, simulate_iae
from robustff.tune.sobol import sobol_sensitivity
from robustff.tune.verdict import TuneVerdict, judge_fresh, tune_verdict

__all__ = [
    "OBJECTIVES", "RobustResult", "DesignFigures", "SearchSpace", "robust_search",
    "search_space", "objective_value", "objective_unit", "evaluation_budget",
    "sobol_sensitivity",
]

#: Samples per chunk of noise seeds, as in robustff.study.
_CHUNK = CHUNK_SIZE


@dataclass(frozen=True)
class SearchSpace:
    """The searched feedforward parameters and their bounds.

    Attributes
    ----------
    names : tuple of str
        Subset of ``("gain_factor", "lead", "lag", "delay")`` that the structure uses.
    low, high : ndarray, shape (d,)
        Bounds, time units for lead/lag/delay.
    """

    names: tuple[str, ...]
    low: np.ndarray
    high: np.ndarray


@dataclass(frozen=True)
class DesignFigures:
    """How one feedforward design does on one sample set.

    Attributes
    ----------
    objective : float
        The chosen objective (IAE units, or a probability for ``"harm"``); inf when too many
        samples are unstable.
    iae_p50, iae_p90 : float
        Percentiles of IAE(fbff), CV units x time units (inf counted for unstable samples).
    harm : float
        Fraction of samples with IAE(fbff) > IAE(fb) (unstable with feedforward only: harm).
    median_improvement : float
        Median of IAE(fb) - IAE(fbff).
    unstable : int
        Samples unstable with feedforward but not without.
    """

    objective: float
    iae_p50: float
    iae_p90: float
    harm: float
    median_improvement: float
    unstable: int

    def to_dict(self) -> dict[str, float | int | None]:
        return {k: (json_float(v) if isinstance(v, float) else v)
                for k, v in self.__dict__.items()}


@dataclass(frozen=True)
class RobustResult:
    """What :func:`robust_search` returns.

    Attributes
    ----------
    objective : str
    nominal, robust : FeedforwardSettings
        The model-based design and the search's winner.
    rule : FeedforwardSettings or None
        The rule of :mod:`robustff.design.feedforward_rule` when it applies.
    objective_value, objective_fresh : float
        The winner's objective on the optimisation samples and on fresh samples.
    figures : dict of str to dict of str to DesignFigures
        ``figures[design][sample_set]``; design in ``nominal``, ``robust``, ``rule`` (if any),
        sample set in ``optimisation``, ``fresh``.
    feedback_iae : dict of str to tuple of float
        (P50, P90) of IAE(fb) on each sample set.
    space : SearchSpace
    evaluations : int
        Objective evaluations (simulations of the whole optimisation sample set).
    screening_evaluations, screened : int
        Evaluations of the screening stage and its plants, the first ``screened`` of the
        optimisation samples (0 and 0 when the set was searched whole; see
        :func:`screening_samples`).
    samples, seed, fresh_seed : int
    excluded : int
        Optimisation samples left out because feedback alone is unstable.
    message : str
        The optimiser's termination message.
    sensitivity : list of SensitivityRow
        Rank correlation of each uncertain parameter with the IAE ratio fbff/fb and with harm,
        for the nominal design on the optimisation samples (strongest first).
    improvement_interval : tuple of float
        90 % paired-bootstrap interval of (nominal objective - robust objective) on the
        optimisation samples (positive: the search improved on the nominal design).
    verdict : TuneVerdict
        Which design is recommended and why: the winner only when it meets the case's
        ``[recommendation]`` criteria on the fresh samples and its improvement is clear of
        Monte Carlo noise (an improvement within the noise is not worth changing the design for,
        and on fresh samples it may vanish, the optimiser's bias); see
        :mod:`robustff.tune.verdict`.
    """

    objective: str
    nominal: FeedforwardSettings
    robust: FeedforwardSettings
    rule: FeedforwardSettings | None
    objective_value: float
    objective_fresh: float
    figures: dict[str, dict[str, DesignFigures]]
    feedback_iae: dict[str, tuple[float, float]]
    space: SearchSpace
    evaluations: int
    samples: int
    seed: int
    fresh_seed: int
    excluded: int
    message: str
    sensitivity: list[SensitivityRow]
    improvement_interval: tuple[float, float]
    verdict: TuneVerdict
    screening_evaluations: int = 0
    screened: int = 0

    @property
    def evaluations_text(self) -> str:
        """The search's evaluations and on how many plants, with the screening stage when it
        had one (the printout's and the studio's wording)."""
        if not self.screened:
            return f"{self.evaluations} evaluations on {self.samples} plants"
        return (f"{self.screening_evaluations} evaluations on the first {self.screened} plants, "
                f"then {self.evaluations} on all {self.samples}")

    @property
    def recommended(self) -> str:
        """``"robust"``, ``"nominal"`` or ``"none"`` (:attr:`verdict`)."""
        return self.verdict.recommended

    @property
    def recommended_settings(self) -> FeedforwardSettings | None:
        """The settings to write into a case: the winner, the nominal design, or None when
        neither meets the criteria."""
        return {"robust": self.robust, "nominal": self.nominal}.get(self.recommended)


def _max_time_constant(case: Case) -> float:
    path = case.headline_input.model
    lags = [case.process.time_constant, case.process.time_constant_2,
            path.time_constant, path.time_constant_2]
    return max(lags)


def search_space(case: Case, structure: str,
                 bounds: dict[str, tuple[float, float]] | None = None) -> SearchSpace:
    """Parameters searched for a structure and their bounds.

    Defaults: gain_factor in [0, 1.5]; lead in [0, 3 tau_max] and lag in [h, 3 tau_max]
    (``tau_max`` the largest nominal time constant of either path, ``h`` the sample time, so
    the compensator stays proper); delay in [0, 2 theta_d]. Parameters whose range is empty are
    not searched. ``bounds`` overrides single entries.
    """
    tau3 = 3.0 * _max_time_constant(case)
    step = case.simulation.step
    table = {"gain_factor": (0.0, 1.5)}
    if structure in ("lead-lag", "lead-lag-delay") and tau3 > step:
        table |= {"lead": (0.0, tau3), "lag": (step, tau3)}
    dead_time = case.headline_input.model.dead_time
    if structure == "lead-lag-delay" and dead_time > 0.0:
        table["delay"] = (0.0, 2.0 * dead_time)
    for name, (low, high) in (bounds or {}).items():
        if name not in table:
            raise DesignError(f"tune: {name!r} is not searched for structure {structure!r} "
                              f"(searched: {', '.join(table)})")
        if not (math.isfinite(low) and math.isfinite(high) and high > low):
            raise DesignError(f"tune: bounds of {name} must satisfy low < high, got {low}, {high}")
        if low < 0.0:
            raise DesignError(f"tune: bounds of {name} must be >= 0, got {low}")
        table[name] = (low, high)
    names = tuple(table)
    return SearchSpace(names, np.array([table[n][0] for n in names]),
                       np.array([table[n][1] for n in names]))


def _settings(nominal: FeedforwardSettings, base_gain: float, space: SearchSpace,
              x: np.ndarray) -> FeedforwardSettings:
    values = dict(zip(space.names, (float(v) for v in x), strict=True))
    gain_factor = values.pop("gain_factor", nominal.gain_factor)
    settings = replace(
        nominal, gain=base_gain * gain_factor, gain_factor=gain_factor,
        lead=values.get("lead", nominal.lead), lag=values.get("lag", nominal.lag),
        delay=values.get("delay", nominal.delay),
    )
    if settings.lead > 0.0 and settings.lag <= 0.0:
        settings = replace(settings, lag=settings.lead * 1e-3)
    return settings


def _point(settings: FeedforwardSettings, space: SearchSpace) -> np.ndarray:
    x = np.array([float(getattr(settings, name)) for name in space.names])
    return np.clip(x, space.low, space.high)


class _SampleSet:
    """Plants and noise seeds of one sample set, simulated in parallel chunks."""

    def __init__(self, case: Case, design: LoopDesign, scenario: Scenario,
                 plants: tuple[np.ndarray, list[str], np.ndarray], pool: ThreadPoolExecutor,
                 jobs: int, replay: bool = False) -> None:
        self.values, self.names, self.seeds = plants
        n = self.values.shape[0]
        self.jobs, self.replay = jobs, replay
        # any chunking gives the same numbers: every sample has its own seed and state
        self.spans = chunk_spans(n, _span_size(case, scenario, n, jobs, replay))
        self.batches = [plant_batch(case, self.names, self.values[a:b]) for a, b in self.spans]
        self.case, self.design, self.scenario, self.pool = case, design, scenario, pool
        # The feedback arm does not depend on the feedforward: it is simulated once here, and
        # each later design runs its feedforward arm alone on the recorded disturbance.
        jobs = [pool.submit(reference_run, batch, self._with(design.feedforward), scenario,
                            self.seeds[a:b])
                for batch, (a, b) in zip(self.batches, self.spans, strict=True)]
        self.references = [job.result() for job in jobs]
        both = (np.concatenate([iae_columns(r) for r in self.references]) if self.references
                else np.empty((0, 2)))
        self.keep = np.isfinite(both[:, 0])
        self.iae_fb = both[self.keep, 0]
        self._nominal = (design.feedforward, both[self.keep, 1])
        self._recent: dict[FeedforwardSettings, np.ndarray] = {}  # the last few designs

    def head(self, m: int) -> _SampleSet:
        """The first ``m`` plants with their own noise seeds: a subset of these plants, each
        with the same numbers as here (every sample has its own seed and state)."""
        return _SampleSet(self.case, self.design, self.scenario,
                          (self.values[:m], self.names, self.seeds[:m]), self.pool, self.jobs,
                          self.replay)

    def _with(self, settings: FeedforwardSettings) -> LoopDesign:
        return self.design.with_headline(settings, self.case)

    def _run(self, settings: FeedforwardSettings) -> np.ndarray:
        design = self._with(settings)
        jobs = [self.pool.submit(simulate_iae, batch, design, self.scenario, self.seeds[a:b],
                                 reference)
                for batch, (a, b), reference in zip(self.batches, self.spans, self.references,
                                                    strict=True)]
        return np.concatenate([job.result() for job in jobs]) if jobs else np.empty((0, 2))

    def iae_fbff(self, settings: FeedforwardSettings) -> np.ndarray:
        """IAE with feedforward, shape (kept samples,), inf where unstable."""
        if settings == self._nominal[0]:
            return self._nominal[1]
        if settings not in self._recent:
            if len(self._recent) >= 3:
                del self._recent[next(iter(self._recent))]
            self._recent[settings] = self._run(settings)[self.keep, 1]
        return self._recent[settings]

    def feedback_percentiles(self) -> tuple[float, float]:
        """(P50, P90) of IAE without feedforward, CV units x time units."""
        return percentile_with_inf(self.iae_fb, 50.0), percentile_with_inf(self.iae_fb, 90.0)

    def figures(self, settings: FeedforwardSettings, objective: str, percentile: float,
                cvar_alpha: float) -> DesignFigures:
        fbff = self.iae_fbff(settings)
        return DesignFigures(
            objective_value(objective, self.iae_fb, fbff, percentile=percentile,
                            cvar_alpha=cvar_alpha),
            percentile_with_inf(fbff, 50.0), percentile_with_inf(fbff, 90.0),
            float(np.mean(fbff > self.iae_fb)),
            float(np.median(self.iae_fb - fbff)) if fbff.size else math.nan,
            int(np.sum(~np.isfinite(fbff))),
        )


#: Values (samples x (internal steps + scans x disturbances)) of recorded disturbance the
#: optimisation set may keep for the searched designs to replay: 512 MB.
TUNE_REPLAY_LIMIT = 64_000_000


def _span_size(case: Case, scenario: Scenario, n: int, jobs: int, replay: bool) -> int:
    """Samples per chunk of a sample set: one chunk per job, or, with ``replay`` and a
    disturbance record of the whole set within :data:`TUNE_REPLAY_LIMIT`, chunks small enough
    to record theirs (:data:`robustff.study.runner.NOISE_REPLAY_LIMIT`). Each searched design
    then replays the disturbance instead of simulating it again (its noise, paths and
    transmitters): the pasteuriser's feedforward arm 303 -> 126 us per plant."""
    size = max(64, math.ceil(n / max(jobs, 1)))
    per_sample = scenario.noise_record_width(len(case.disturbance_inputs))
    if replay and per_sample * n <= TUNE_REPLAY_LIMIT:
        size = min(size, max(1, NOISE_REPLAY_LIMIT // per_sample))
    return size


def _noise_seeds(seed: int, n: int) -> np.ndarray:
    # The runner's seeds, so the nominal design's figures match ``robustff run`` with that seed.
    return noise_seeds(seed, n, _CHUNK)


def evaluation_budget(dimensions: int) -> int:
    """Objective evaluations allowed to the optimiser: 40 for one parameter, +25 per extra one."""
    return 40 + 25 * max(dimensions - 1, 0)


#: The screening stage searches on one plant in SCREEN_SHARE of the optimisation samples ...
SCREEN_SHARE = 8
#: ... when that subset holds at least this many plants (smaller sets are searched whole).
MIN_SCREEN = 200


def screening_samples(n: int) -> int:
    """Plants of the screening stage for ``n`` optimisation samples (0: no screening).

    The search runs in two stages, the usual way of sample-average optimisation with growing
    samples (Homem-de-Mello and Bayraksan, "Monte Carlo sampling-based methods for stochastic
    optimization", Surveys in Operations Research and Management Science 19, 2014, sec. 4,
    from memory): the whole budget on the first ``n / SCREEN_SHARE`` plants, then a short
    polish on all ``n`` from the screening's winner. The subset shares its plants and noise
    seeds with the whole set, so the polish starts where the whole set's optimum is expected;
    its plants spread like the whole set's (a Latin hypercube's columns are shuffled, so its
    first rows are a random subset of them, and a Sobol sequence's first points are balanced).
    """
    m = n // SCREEN_SHARE
    return m if m >= MIN_SCREEN else 0


def polish_budget(dimensions: int) -> int:
    """Objective evaluations on the whole optimisation set after a screening stage."""
    return 8 + 6 * dimensions


class _Progress:
    """Evaluations done out of the budget of both stages, reported to the caller's callback."""

    def __init__(self, callback: Callable[[int, int], None] | None, budget: int) -> None:
        self.callback, self.budget, self.done = callback, budget, 0

    def step(self) -> None:
        self.done += 1
        if self.callback is not None:
            self.callback(min(self.done, self.budget), self.budget)


class _Objective:
    """Cached score of a point of the unit box on the optimisation samples."""

    def __init__(self, samples: _SampleSet, space: SearchSpace, nominal: FeedforwardSettings,
                 base_gain: float, settings: tuple[str, float, float],
                 progress: _Progress) -> None:
        self.samples, self.space, self.nominal, self.base_gain = samples, space, nominal, base_gain
        self.objective, self.percentile, self.cvar_alpha = settings
        finite = samples.iae_fb[np.isfinite(samples.iae_fb)]
        self.penalty = 10.0 * float(np.max(finite, initial=1.0))
        self.cache: dict[tuple[float, ...], float] = {}
        self.progress = progress

    def settings_at(self, z: np.ndarray) -> FeedforwardSettings:
        z = np.clip(np.asarray(z, dtype=float), 0.0, 1.0)
        x = self.space.low + z * (self.space.high - self.space.low)
        return _settings(self.nominal, self.base_gain, self.space, x)

    def unit(self, settings: FeedforwardSettings) -> np.ndarray:
        span = self.space.high - self.space.low
        return (_point(settings, self.space) - self.space.low) / span

    def __call__(self, z: np.ndarray) -> float:
        key = tuple(np.round(np.clip(z, 0.0, 1.0), 12))
        if key not in self.cache:
            fbff = self.samples.iae_fbff(self.settings_at(np.array(key)))
            self.cache[key] = search_score(self.objective, self.samples.iae_fb, fbff, self.penalty,
                                     self.percentile, self.cvar_alpha)
            self.progress.step()
        return self.cache[key]

    def best(self) -> np.ndarray:
        return np.array(min(self.cache, key=self.cache.__getitem__))


def _initial_simplex(start: np.ndarray, size: float = 0.15) -> np.ndarray:
    """Start point plus one step per coordinate, each step pointing into the unit box."""
    d = start.size
    simplex = np.tile(start, (d + 1, 1))
    for i in range(d):
        simplex[i + 1, i] += size if start[i] + size <= 1.0 else -size
    return simplex


def _minimise(objective: _Objective, starts: list[np.ndarray], budget: int,
              size: float = 0.15) -> str:
    """Nelder-Mead from the best of ``starts`` with a simplex of ``size`` (unit box)."""
    from scipy.optimize import minimize

    start = min(starts, key=objective)
    f0 = objective(start)
    fatol = 1e-4 * abs(f0) if math.isfinite(f0) and f0 != 0.0 else 1e-12
    result = minimize(
        objective, start, method="Nelder-Mead", bounds=[(0.0, 1.0)] * start.size,
        options={"initial_simplex": _initial_simplex(start, size), "maxfev": budget,
                 "xatol": 2e-3, "fatol": fatol},
    )
    return str(result.message)


def _sample_plan(case: Case, samples: int | None, seed: int | None,
                 fresh_seed: int | None) -> tuple[int, int, int]:
    """Sample count, optimisation seed and fresh seed, defaults from the case's ``[study]``."""
    n = case.study.samples if samples is None else int(samples)
    seed = case.study.seed if seed is None else int(seed)
    return n, seed, seed + 1 if fresh_seed is None else int(fresh_seed)


def _check_arguments(objective: str, samples: int, percentile: float, cvar_alpha: float) -> None:
    if objective not in OBJECTIVES:
        raise DesignError(unknown_objective(objective))
    if samples < 10:
        raise DesignError(f"tune: at least 10 samples are needed, got {samples}")
    if not 0.0 < percentile < 100.0:
        raise DesignError(
            f"tune: the percentile must lie strictly between 0 and 100, got {percentile}")
    if not 0.0 < cvar_alpha < 1.0:
        raise DesignError(f"tune: cvar_alpha must lie strictly between 0 and 1, got {cvar_alpha}")


@dataclass(frozen=True)
class _Problem:
    """What the search takes from the case: the nominal loop, the searched space, the budget."""

    case: Case
    design: LoopDesign
    scenario: Scenario
    space: SearchSpace
    base_gain: float
    rule: FeedforwardSettings | None
    budget: int

    @classmethod
    def build(cls, case: Case, bounds: dict[str, tuple[float, float]] | None,
              max_evaluations: int | None) -> _Problem:
        design = design_loop(case)
        if not design.feedforward.active:
            raise DesignError("tune: the case has no feedforward to tune; set [feedforward] "
                              "structure to \"static\", \"lead-lag\" or \"lead-lag-delay\" and "
                              "gain_factor > 0")
        if not case.uncertainty:
            raise DesignError("tune: the case has no [uncertainty] section; a robust search "
                              "needs one")
        space = search_space(case, design.feedforward.structure, bounds)
        base_gain = -case.headline_input.model.gain / case.process.gain
        rule = feedforward_rule(case)
        budget = max_evaluations or evaluation_budget(len(space.names))
        return cls(case, design, build_scenario(case, design), space, base_gain, rule, budget)

    @property
    def nominal(self) -> FeedforwardSettings:
        """The model-based feedforward design."""
        return self.design.feedforward

    def sample_set(self, n: int, seed: int, pool: ThreadPoolExecutor, jobs: int,
                   replay: bool = False) -> _SampleSet:
        """``n`` sampled plants from ``seed``, with the feedback arm simulated; ``replay``:
        keep their disturbance for the designs to replay (the optimisation set, which runs
        many)."""
        values, names = sample(self.case, n, seed)
        return _SampleSet(self.case, self.design, self.scenario,
                          (values, names, _noise_seeds(seed, n)), pool, jobs, replay)

    def compare(self, robust: FeedforwardSettings, sets: dict[str, _SampleSet],
                settings: tuple[str, float, float]) -> dict[str, dict[str, DesignFigures]]:
        """``figures[design][sample_set]`` of the nominal design, the winner and the rule."""
        designs = {"nominal": self.nominal, "robust": robust}
        if self.rule is not None:
            designs["rule"] = self.rule
        return {name: {label: sample_set.figures(design, *settings)
                       for label, sample_set in sets.items()}
                for name, design in designs.items()}


@dataclass(frozen=True)
class _Search:
    """What :func:`_optimise` found: the rounded winner, the optimiser's message, the
    evaluations on the whole optimisation set, and those of the screening stage on its
    ``screened`` first plants (0 and 0 without one)."""

    robust: FeedforwardSettings
    message: str
    evaluations: int
    screening_evaluations: int
    screened: int


def _optimise(optimisation: _SampleSet, problem: _Problem, settings: tuple[str, float, float],
              progress: Callable[[int, int], None] | None) -> _Search:
    """Minimise the score on the optimisation samples from the nominal design (and the rule),
    screening on a subset first when the set is large (:func:`screening_samples`)."""
    if optimisation.iae_fb.size == 0:
        raise DesignError("tune: feedback alone is unstable on every sample; fix the feedback "
                          "design before tuning the feedforward")
    nominal, space, rule = problem.nominal, problem.space, problem.rule
    m = screening_samples(optimisation.values.shape[0])
    screen = optimisation.head(m) if m else None
    if screen is not None and screen.iae_fb.size == 0:
        screen = None  # feedback alone unstable on every screened plant: search them all
    polish = polish_budget(len(space.names))
    counter = _Progress(progress, problem.budget + (polish if screen is not None else 0))
    target = _Objective(optimisation, space, nominal, problem.base_gain, settings, counter)
    starts = [target.unit(nominal)]
    if rule is not None and space.names != ("gain_factor",):
        starts.append(target.unit(replace(rule, structure=nominal.structure)))
    if screen is None:
        message = _minimise(target, starts, problem.budget)
        screening, screened = 0, 0
    else:
        first = _Objective(screen, space, nominal, problem.base_gain, settings, counter)
        _minimise(first, starts, problem.budget)
        # The polish judges the screening's winner against the starts on every plant, so the
        # result is never worse there than the nominal design.
        message = _minimise(target, [first.best(), *starts], polish, size=0.05)
        screening, screened = len(first.cache), m
    robust = _rounded(target.settings_at(target.best()), space, problem.base_gain)
    return _Search(robust, message, len(target.cache), screening, screened)


def robust_search(
    case: Case,
    *,
    objective: str = "p90",
    samples: int | None = None,
    seed: int | None = None,
    fresh_seed: int | None = None,
    percentile: float = 90.0,
    cvar_alpha: float = 0.9,
    bounds: dict[str, tuple[float, float]] | None = None,
    max_evaluations: int | None = None,
    jobs: int | None = None,
    progress: Callable[[int, int], None] | None = None,
) -> RobustResult:
    """Search the feedforward settings that minimise a risk-aware objective.

    Parameters
    ----------
    case : Case
        Its ``[feedforward] structure`` decides the searched parameters (see
        :func:`search_space`); its uncertainty defines the sample sets.
    objective : {"p90", "cvar", "harm"}
    samples, seed : int, optional
        Optimisation sample count and seed (default: the case's ``[study]``).
    fresh_seed : int, optional
        Seed of the fresh sample set used for the re-check (default ``seed + 1``).
    percentile : float
        Percentile of the ``"p90"`` objective, percent.
    cvar_alpha : float
        Level of the ``"cvar"`` objective.
    bounds : dict, optional
        ``{"gain_factor": (low, high), "lead": ..., "lag": ..., "delay": ...}`` overrides.
    max_evaluations : int, optional
        Optimiser budget (default :func:`evaluation_budget` of the number of parameters).
    jobs : int, optional
        Threads (default: all cores).
    progress : callable(done, budget), optional
        Called after each new objective evaluation.

    Returns
    -------
    RobustResult

    Raises
    ------
    DesignError
        For a plant built from balances (its search is not yet written).
    """
    if case.balance is not None:
        raise DesignError("the robust search does not yet handle plants built from balances "
                          f"({case.balance.kind}); compare their designs as [[design]] tables "
                          "with robustff run")
    n, seed, fresh_seed = _sample_plan(case, samples, seed, fresh_seed)
    _check_arguments(objective, n, percentile, cvar_alpha)
    problem = _Problem.build(case, bounds, max_evaluations)
    settings = (objective, percentile, cvar_alpha)
    jobs = jobs or os.cpu_count() or 1
    with ThreadPoolExecutor(max_workers=jobs) as pool:
        optimisation = problem.sample_set(n, seed, pool, jobs, replay=True)
        search = _optimise(optimisation, problem, settings, progress)
        robust = search.robust
        fresh = problem.sample_set(n, fresh_seed, pool, jobs)
        sets = {"optimisation": optimisation, "fresh": fresh}
        figures = problem.compare(robust, sets, settings)
        interval = _improvement_interval(optimisation, problem.nominal, robust, settings, seed)
        verdict = _verdict(problem, fresh, robust, interval, objective)
    return RobustResult(
        objective, problem.nominal, robust, problem.rule,
        figures["robust"]["optimisation"].objective, figures["robust"]["fresh"].objective, figures,
        {label: s.feedback_percentiles() for label, s in sets.items()}, problem.space,
        search.evaluations, n, seed, fresh_seed, int(np.sum(~optimisation.keep)), search.message,
        _sensitivity(optimisation, problem.nominal), interval, verdict,
        search.screening_evaluations, search.screened,
    )


def objective_unit(case: Case, objective: str) -> str:
    """Unit of an objective's value for a case: the IAE unit, or percentage points for harm."""
    if objective == "harm":
        return "percentage points of P(harm)"
    signals = case.signals
    return METRIC_UNITS["iae"].format(cv=signals.controlled.unit or "CV",
                                      u=signals.output.unit or "output", t=case.time_unit)


def _verdict(problem: _Problem, fresh: _SampleSet, robust: FeedforwardSettings,
             interval: tuple[float, float], objective: str) -> TuneVerdict:
    """The winner and the nominal design judged on the fresh samples (the report's rule)."""
    criteria = problem.case.recommendation
    nominal = problem.nominal
    judged = {name: judge_fresh(name, settings, fresh.iae_fb, fresh.iae_fbff(settings), criteria)
              for name, settings in (("robust", robust), ("nominal", nominal))}
    scale = 100.0 if objective == "harm" else 1.0  # a difference of probabilities: points
    low, high = interval
    text = (f"{scale * low:.3g} to {scale * high:.3g} {objective_unit(problem.case, objective)}"
            if math.isfinite(low) and math.isfinite(high)
            else "not available: unstable samples in every resample")
    return tune_verdict(judged["robust"], judged["nominal"], criteria, interval, text,
                        same=robust == nominal)


def _improvement_interval(
    optimisation: _SampleSet, nominal: FeedforwardSettings, robust: FeedforwardSettings,
    settings: tuple[str, float, float], seed: int, resamples: int = 200,
) -> tuple[float, float]:
    """90 % paired-bootstrap interval of objective(nominal) - objective(robust).

    The samples are resampled with replacement and both designs scored on the same resample
    (Efron and Tibshirani, An Introduction to the Bootstrap, 1993, percentile interval
    [from memory]); the lower end is a one-sided 95 % bound on the improvement.
    """
    objective, percentile, cvar_alpha = settings
    fb = optimisation.iae_fb
    if fb.size == 0 or robust == nominal:
        return (0.0, 0.0)
    a, b = optimisation.iae_fbff(nominal), optimisation.iae_fbff(robust)
    rng = np.random.default_rng(np.random.SeedSequence([seed, 90]))
    differences = np.empty(resamples)
    for r in range(resamples):
        rows = rng.integers(0, fb.size, fb.size)
        score = [objective_value(objective, fb[rows], x[rows], percentile=percentile,
                                 cvar_alpha=cvar_alpha) for x in (a, b)]
        differences[r] = score[0] - score[1] if np.all(np.isfinite(score)) else np.nan
    differences = differences[np.isfinite(differences)]
    if differences.size == 0:
        return (math.nan, math.nan)
    low, high = np.percentile(differences, [5.0, 95.0])
    return float(low), float(high)


def _rounded(settings: FeedforwardSettings, space: SearchSpace,
             base_gain: float) -> FeedforwardSettings:
    """The searched values to 4 significant digits (what an engineer writes in a case file)."""
    values = {name: float(f"{getattr(settings, name):.4g}") for name in space.names}
    gain_factor = values.get("gain_factor", settings.gain_factor)
    return replace(
        settings, gain_factor=gain_factor,
        gain=base_gain * gain_factor if "gain_factor" in values else settings.gain,
        lead=values.get("lead", settings.lead), lag=values.get("lag", settings.lag),
        delay=values.get("delay", settings.delay),
    )


def _sensitivity(samples: _SampleSet, nominal: FeedforwardSettings) -> list[SensitivityRow]:
    fbff = samples.iae_fbff(nominal)
    ratio = metric_ratio(samples.iae_fb, fbff)
    return rank_sensitivity(samples.values[samples.keep], samples.names, ratio,
                            fbff > samples.iae_fb)
