"""The study runner: a case in, per-sample results of the whole Monte Carlo out.

The samples are drawn once for the whole study (same case and seed, same samples), split into
chunks of a fixed size, and the chunks are simulated in parallel: a pool of threads locally (the
compiled kernel releases the GIL), or Dask futures on a cluster, which survive a lost worker
(:mod:`robustff.study.cluster`). Each chunk's noise seeds come from
``numpy.random.SeedSequence(seed).spawn`` by chunk index, so the results are bit-identical
whatever the number of jobs. Memory per chunk is bounded by the chunk
size; only per-sample metrics (a few numbers each) are kept for the whole study, in column files
instead of memory when there are very many (:mod:`robustff.study.result_columns`).

Progress and cancellation cross to the shells as a plain callable and a ``threading.Event``.
"""

from __future__ import annotations

import os
import threading
import time
from collections import deque
from collections.abc import Callable, Iterator, Mapping
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from robustff.case import Case
from robustff.case.sampling import plant_batch, sample
from robustff.design.margins import MarginResult, loop_margins
from robustff.design.tuning import FeedforwardSettings, LoopDesign, design_loop
from robustff.engine import (
    EnvelopeGrid,
    Scenario,
    SimulationResult,
    build_scenario,
    nominal_batch,
    simulate,
)
from robustff.engine.metrics import METRIC_NAMES
from robustff.plant.models import PlantBatch
from robustff.study.cluster import cluster_results
from robustff.study.result_columns import ColumnFiles, SpilledMetrics, arm_metrics, spills

__all__ = ["StudyResult", "DesignArm", "SampleRows", "run_study", "noise_seeds", "chunk_spans",
           "CHUNK_SIZE", "ProgressCallback", "RowsCallback"]

#: Samples per chunk. Fixed (not derived from the number of jobs) so results never depend on it.
CHUNK_SIZE = 1000
#: Chunks submitted per local job ahead of the one being read: keeps both cores busy while the
#: main thread stores a result, and bounds the chunks in memory.
IN_FLIGHT_PER_JOB = 2
#: Number of samples whose full trajectories are kept for plots.
KEPT_TRAJECTORIES = 5
#: Stability margins are computed for the first this many samples (a large subset is enough for
#: their percentiles and keeps the cost below the simulation's).
MARGIN_SAMPLES = 2000

#: Largest number of values (samples x (internal steps + scans)) of a chunk whose disturbance
#: is kept for the other designs to replay (64 MB at this limit).
NOISE_REPLAY_LIMIT = 8_000_000

ProgressCallback = Callable[[int, int], None]


@dataclass
class DesignArm:
    """One feedforward design's per-sample results, on the same plants and noise as the rest.

    Attributes
    ----------
    name : str
        ``"case"`` for the case's own ``[feedforward]``, else the ``[[design]]`` name.
    settings : FeedforwardSettings
        The designed compensator.
    metrics : mapping of str to ndarray (n,)
        Per-sample metrics with this feedforward (NaN where the sample is unstable).
    unstable : ndarray of bool, shape (n,)
    """

    name: str
    settings: FeedforwardSettings
    metrics: Mapping[str, np.ndarray]
    unstable: np.ndarray
    #: With several disturbances, every one's compensator (empty: ``settings`` alone).
    compensators: tuple[FeedforwardSettings, ...] = ()


@dataclass(frozen=True)
class SampleRows:
    """Consecutive samples' per-sample results, from sample ``start`` on: a finished chunk as it
    arrives, or a whole study (:meth:`StudyResult.rows`).

    Attributes
    ----------
    start : int
        Index of the first sample.
    names : list of str
        Uncertain parameter keys (columns of ``parameters``).
    parameters : ndarray, shape (m, p)
    metrics : mapping of str to ndarray (m, 2)
        Arm 0 feedback only, arm 1 with the case's feedforward.
    unstable : ndarray of bool, shape (m, 2)
    arms : list of (str, dict of str to ndarray (m,), ndarray of bool (m,))
        The case's other feedforward designs: name, metrics, unstable flags.
    """

    start: int
    names: list[str]
    parameters: np.ndarray
    metrics: Mapping[str, np.ndarray]
    unstable: np.ndarray
    arms: list[tuple[str, dict[str, np.ndarray], np.ndarray]]

    @property
    def count(self) -> int:
        """Samples in these rows."""
        return int(self.parameters.shape[0])


#: Called with each finished chunk's rows, in sample order, as the chunks arrive.
RowsCallback = Callable[[SampleRows], None]


@dataclass
class StudyResult:
    """Everything a study produced.

    Attributes
    ----------
    case : Case
    design : LoopDesign
    scenario : Scenario
    names : list of str
        Uncertain parameter keys (columns of ``parameters``).
    parameters : ndarray, shape (n, p)
        Sampled parameter values of the samples that were simulated.
    metrics : mapping of str to ndarray (n, 2)
        Per-sample metrics, arm 0 feedback only, arm 1 with feedforward: a dict of arrays, or
        for a large study a :class:`robustff.study.result_columns.SpilledMetrics` that reads
        each from its file when asked (use :func:`robustff.study.result_columns.arm_metrics`
        for one arm's columns).
    unstable : ndarray of bool, shape (n, 2)
    envelope : EnvelopeGrid
    envelope_counts : ndarray of int64, shape (2, P, B)
        CV histograms at each envelope time, both arms.
    nominal_trajectories : ndarray, shape (4, T)
        CV fb, CV fbff, output fb, output fbff of the nominal plant (deviations).
    sample_trajectories : ndarray, shape (S, 4, T)
        The same for the first few samples.
    seed : int
    requested : int
        Samples asked for; fewer were simulated when ``partial``.
    partial : bool
        True when the run was stopped before all chunks finished.
    elapsed : float
        Wall time, seconds.
    margins : MarginResult or None
        Feedback stability margins of the first ``MARGIN_SAMPLES`` simulated samples, of the
        loop as simulated (controller sampled at the scan period, output held).
    nominal_margins : MarginResult or None
        Margins of the nominal loop as simulated.
    nominal_continuous_margins : MarginResult or None
        Margins of the nominal loop with a continuous-time controller (what continuous tuning
        rules quote; the hold of the sampled controller adds about half a scan of delay).
    alternatives : list of DesignArm
        The case's other feedforward designs (``design.alternatives``), same samples.
    """

    case: Case
    design: LoopDesign
    scenario: Scenario
    names: list[str]
    parameters: np.ndarray
    metrics: Mapping[str, np.ndarray]
    unstable: np.ndarray
    envelope: EnvelopeGrid
    envelope_counts: np.ndarray
    nominal_trajectories: np.ndarray
    sample_trajectories: np.ndarray
    seed: int
    requested: int
    partial: bool
    elapsed: float
    margins: MarginResult | None = None
    nominal_margins: MarginResult | None = None
    nominal_continuous_margins: MarginResult | None = None
    alternatives: list[DesignArm] = field(default_factory=list)
    #: Results derived from this one, kept so that the summary, the files and the plots
    #: compute each once (see :func:`robustff.study.summary.study_frequencies`).
    derived: dict[str, object] = field(default_factory=dict, repr=False, compare=False)

    @property
    def samples(self) -> int:
        """Samples actually simulated."""
        return int(self.parameters.shape[0])

    def rows(self) -> SampleRows:
        """Every sample's results as :class:`SampleRows`."""
        return SampleRows(0, self.names, self.parameters, self.metrics, self.unstable,
                          [(arm.name, arm.metrics, arm.unstable) for arm in self.alternatives])

    def design_arms(self) -> list[DesignArm]:
        """Every feedforward design, the case's own first (named ``"case"``)."""
        own = DesignArm("case", self.design.feedforward, arm_metrics(self.metrics, 1),
                        self.unstable[:, 1], self.design.compensators)
        return [own, *self.alternatives]


@dataclass(frozen=True)
class _Chunk:
    index: int
    start: int
    stop: int


def _envelope_grid(scenario: Scenario, nominal: np.ndarray) -> EnvelopeGrid:
    """Bins wide enough for the spread: the nominal CV range widened 1.5 spans each side."""
    cv = nominal[:2]
    low, high = float(min(cv.min(), 0.0)), float(max(cv.max(), 0.0))
    span = max(high - low, 1e-9)
    return EnvelopeGrid.spanning(low - 1.5 * span, high + 1.5 * span, scenario)


def chunk_spans(n: int, size: int = CHUNK_SIZE) -> list[tuple[int, int]]:
    """Half-open index ranges ``[(0, size), (size, 2 size), ...]`` covering ``0..n``."""
    return [(a, min(a + size, n)) for a in range(0, n, size)]


def noise_seeds(seed: int, n: int, chunk_size: int = CHUNK_SIZE) -> np.ndarray:
    """Per-sample noise seeds, shape (n,) uint64: chunk ``i`` draws from child ``i`` of
    ``SeedSequence(seed)``, so a sample's seed depends only on the seed and its index."""
    parts = [chunk_noise_seeds(seed, index, stop - start)
             for index, (start, stop) in enumerate(chunk_spans(n, chunk_size))]
    return np.concatenate(parts) if parts else np.empty(0, dtype=np.uint64)


def chunk_noise_seeds(seed: int, index: int, count: int) -> np.ndarray:
    """The noise seeds of chunk ``index`` (``count`` samples) of :func:`noise_seeds`: child
    ``index`` of ``SeedSequence(seed)`` (a child's spawn key is its parent's plus its index),
    worked out by the chunk's own task while other chunks run (0.2 s of a 10^6-plant study
    when done for all chunks before the first starts)."""
    child = np.random.SeedSequence(seed, spawn_key=(index,))
    return child.generate_state(count, dtype=np.uint64)


def replay_fits(batch: PlantBatch, scenario: Scenario) -> bool:
    """Whether the batch's disturbance is small enough (:data:`NOISE_REPLAY_LIMIT`) to record
    for other designs to replay."""
    size = batch.size * scenario.noise_record_width(len(batch.paths))
    return size <= NOISE_REPLAY_LIMIT


def _run_chunk(
    case: Case,
    design: LoopDesign,
    scenario: Scenario,
    grid: EnvelopeGrid,
    names: list[str],
    values: np.ndarray,
    seed: int,
    index: int,
    keep: int,
):
    # The chunk's noise seeds are worked out here, in its own task (chunk_noise_seeds).
    seeds = chunk_noise_seeds(seed, index, values.shape[0])
    batch = plant_batch(case, names, values)
    # With other designs to run, keep this chunk's disturbance (its effect on the CV and its
    # measurement, noise included) so that they replay it instead of simulating it again,
    # when it stays small.
    record = bool(design.alternatives) and replay_fits(batch, scenario)
    result = simulate(
        batch, design, scenario, seeds=seeds, envelope=grid, keep=np.arange(min(keep, batch.size)),
        record_noise=record,
    )
    # Other designs: the feedforward arm alone, same plants and noise seeds (common random
    # numbers), so differences between designs are not Monte Carlo noise.
    alternatives = []
    for alternative in design.alternatives:
        arm = simulate(batch, design.with_feedforward(alternative.settings,
                                                      alternative.compensators), scenario,
                       seeds=seeds, reference=result)
        alternatives.append(({name: values[:, 1] for name, values in arm.metrics.items()},
                             arm.unstable[:, 1]))
    # not kept: the metrics hold what is needed
    result.accumulators, result.noise = np.empty((0, 2, 0)), None
    return result, alternatives


def _chunks(n: int, size: int) -> list[_Chunk]:
    return [_Chunk(i, start, stop) for i, (start, stop) in enumerate(chunk_spans(n, size))]


def _parallel_results(tasks: list, jobs: int, cluster: str | None) -> Iterator:
    """Run the ``(function, args, kwargs)`` tasks; results in task order. Local threads, or a
    Dask cluster when ``cluster`` is set."""
    if cluster is None:
        yield from _thread_results(tasks, jobs)
        return
    # Chunks as Dask futures: a lost worker's chunks are rerun elsewhere (robustff.study.cluster).
    yield from cluster_results(tasks, cluster)


def _thread_results(tasks: list, jobs: int) -> Iterator:
    """The tasks on ``jobs`` threads, results in task order, at most ``IN_FLIGHT_PER_JOB`` x
    ``jobs`` submitted and not yet read (memory bounded whatever the number of chunks).
    Closing the generator cancels the tasks not yet started; running ones finish."""
    ahead = max(1, IN_FLIGHT_PER_JOB * jobs)
    pool = ThreadPoolExecutor(jobs, thread_name_prefix="chunk")
    pending: deque = deque()
    try:
        for function, args, kwargs in tasks:
            pending.append(pool.submit(function, *args, **kwargs))
            if len(pending) >= ahead:
                yield pending.popleft().result()
        while pending:
            yield pending.popleft().result()
    finally:
        for future in pending:
            future.cancel()
        pool.shutdown(wait=False)


def run_study(
    case: Case,
    *,
    samples: int | None = None,
    seed: int | None = None,
    jobs: int | None = None,
    cluster: str | None = None,
    chunk_size: int = CHUNK_SIZE,
    progress: ProgressCallback | None = None,
    cancel: threading.Event | None = None,
    margins: bool = True,
    on_rows: RowsCallback | None = None,
    spill_folder: Path | None = None,
) -> StudyResult:
    """Run the Monte Carlo study of a case.

    Parameters
    ----------
    case : Case
    samples, seed : int, optional
        Override the case's ``[study]`` values.
    jobs : int, optional
        Parallel workers (default: all cores).
    cluster : str, optional
        Address of a Dask scheduler (``tcp://HOST:PORT``); needs the ``cluster`` extra.
    chunk_size : int
        Samples per chunk.
    progress : callable(done, total), optional
        Called after each finished chunk with sample counts.
    cancel : threading.Event, optional
        When set, no new chunk starts and the finished ones are returned, marked partial.
        A KeyboardInterrupt does the same.
    margins : bool
        Also compute the feedback stability margins (exact dead time) of the nominal loop and
        of the first ``MARGIN_SAMPLES`` samples, as simulated (at the scan period) and, for the
        nominal loop, with a continuous controller.
    on_rows : callable(SampleRows), optional
        Called with each finished chunk's rows, in sample order, while the next chunks are
        simulated (``samples.csv`` is written this way as the study runs). The chunks it is
        called with are exactly the study's samples, a prefix when the run is stopped.
    spill_folder : Path, optional
        Where a study too large to keep its metrics in memory writes them (a folder of its own
        inside, removed with the result; default the system's temporary folder; see
        :mod:`robustff.study.result_columns`).

    Returns
    -------
    StudyResult
    """
    started = time.perf_counter()
    n = case.study.samples if samples is None else int(samples)
    seed = case.study.seed if seed is None else int(seed)
    jobs = jobs or os.cpu_count() or 1
    design = design_loop(case)
    # The samples are drawn in a thread while the kernel is loaded (numpy's generators release
    # the GIL; numba's set-up is Python): 0.3-0.4 s of a 10^6-plant study.
    with ThreadPoolExecutor(1, thread_name_prefix="sampling") as sampling:
        drawn = sampling.submit(sample, case, n, seed)
        scenario = build_scenario(case, design)
        nominal = simulate(nominal_batch(case), design, scenario, keep=np.array([0]))
        values, names = drawn.result()
    assert nominal.trajectories is not None  # asked for with keep
    nominal_traj = nominal.trajectories[0]
    grid = _envelope_grid(scenario, nominal_traj)
    chunks = _chunks(n, chunk_size)
    tasks = [
        (_run_chunk, (case, design, scenario, grid, names, values[c.start : c.stop],
                      seed, c.index, KEPT_TRAJECTORIES if c.index == 0 else 0), {})
        for c in chunks
    ]
    collected = _Collected(design, n, scenario.n_steps, spill_folder)
    # The margins need only the samples: computed in a thread of their own while the chunks
    # are simulated (the kernel threads release the GIL), not after them.
    planned = min(n, MARGIN_SAMPLES)
    margin_pool = ThreadPoolExecutor(1, thread_name_prefix="margins") if margins else None
    margin_work = (margin_pool.submit(_study_margins, case, design, names, values[:planned])
                   if margin_pool is not None else None)
    partial = False
    # Envelope histograms are summed as chunks arrive so memory does not grow with their count.
    counts = np.zeros((2, grid.times.size, grid.edges.size - 1), np.int64)
    cancel = cancel or threading.Event()
    generator = _parallel_results(tasks, jobs, cluster)
    try:
        for chunk, (result, alternatives) in zip(chunks, generator, strict=False):
            counts += result.envelope_counts
            collected.add(chunk, result, alternatives)
            if on_rows is not None:
                on_rows(_chunk_rows(chunk, names, values, design, result, alternatives))
            if progress is not None:
                progress(chunk.stop, n)
            if cancel.is_set():
                partial = True
                break
    except KeyboardInterrupt:
        partial = True
    finally:
        close = getattr(generator, "close", None)
        if close is not None:
            close()
        if margin_pool is not None:  # its one task still runs to the end
            margin_pool.shutdown(wait=False)
    metrics, unstable = collected.metrics(), collected.unstable()
    result = StudyResult(
        case, design, scenario, names, values[: collected.filled], metrics, unstable, grid,
        counts, nominal_traj, collected.kept, seed, n,
        partial or collected.filled < n, 0.0, alternatives=collected.arms(),
    )
    if margins:
        subset = min(result.samples, MARGIN_SAMPLES)
        if subset == planned:
            margins_found = margin_work.result()
        else:  # stopped early: the margins of the samples that finished
            margin_work.cancel()
            margins_found = _study_margins(case, design, names, values[:subset])
        result.margins, result.nominal_margins, result.nominal_continuous_margins = margins_found
    result.elapsed = time.perf_counter() - started
    return result


def _study_margins(case: Case, design: LoopDesign, names: list[str],
                   values: np.ndarray) -> tuple[MarginResult, MarginResult, MarginResult]:
    """Feedback margins of the sampled plants ``values`` and of the nominal plant, as simulated
    (sampled controller at the scan period, output held), and of the nominal plant with a
    continuous controller."""
    scan = case.simulation.step
    inner = design.secondary
    return (loop_margins(plant_batch(case, names, values), design.feedback, sample_time=scan,
                         secondary=inner),
            loop_margins(nominal_batch(case), design.feedback, sample_time=scan,
                         secondary=inner),
            loop_margins(nominal_batch(case), design.feedback, secondary=inner))


class _Collected:
    """The finished chunks' per-sample results, copied into arrays of the study's size as the
    chunks arrive (in order), so that no chunk is kept and nothing is concatenated at the end:
    the peak memory is the study's arrays plus the chunks in flight. A study whose metrics
    would exceed :data:`robustff.study.result_columns.SPILL_BYTES` appends them to column files
    in ``spill_folder`` instead (:class:`robustff.study.result_columns.ColumnFiles`)."""

    def __init__(self, design: LoopDesign, n: int, n_steps: int,
                 spill_folder: Path | None = None) -> None:
        self.design = design
        self.filled = 0
        self.kept = np.empty((0, 4, n_steps))
        self._unstable = np.zeros((n, 2), dtype=bool)
        self._arm_unstable = [np.zeros(n, dtype=bool) for _ in design.alternatives]
        arms = 2 + len(design.alternatives)
        self._files = (ColumnFiles(spill_folder) if spills(n, len(METRIC_NAMES), arms)
                       else None)
        if self._files is None:
            self._metrics = {name: np.empty((n, 2)) for name in METRIC_NAMES}
            self._arms = [{name: np.empty(n) for name in METRIC_NAMES}
                          for _ in design.alternatives]

    def add(self, chunk: _Chunk, result: SimulationResult, alternatives: list) -> None:
        """Copy one chunk's results in; chunks arrive in order."""
        span = slice(chunk.start, chunk.stop)
        self._unstable[span] = result.unstable
        if chunk.index == 0 and result.trajectories is not None:
            self.kept = result.trajectories
        for k, (_, chunk_unstable) in enumerate(alternatives):
            self._arm_unstable[k][span] = chunk_unstable
        files = self._files
        for name in METRIC_NAMES:
            if files is None:
                self._metrics[name][span] = result.metrics[name]
            else:
                files.append(f"fb|{name}", result.metrics[name][:, 0])
                files.append(f"fbff|{name}", result.metrics[name][:, 1])
            for k, (chunk_metrics, _) in enumerate(alternatives):
                if files is None:
                    self._arms[k][name][span] = chunk_metrics[name]
                else:
                    files.append(f"design{k}|{name}", chunk_metrics[name])
        self.filled = chunk.stop

    def metrics(self) -> Mapping[str, np.ndarray]:
        """Per-sample metrics of the finished chunks, (filled, 2) each."""
        if self._files is not None:
            return SpilledMetrics(self._files, METRIC_NAMES, ("fb", "fbff"), self.filled)
        return {name: _trimmed(values, self.filled) for name, values in self._metrics.items()}

    def unstable(self) -> np.ndarray:
        return _trimmed(self._unstable, self.filled)

    def arms(self) -> list[DesignArm]:
        """The alternative designs' per-sample results of the finished chunks."""
        out = []
        for k, alternative in enumerate(self.design.alternatives):
            metrics: Mapping[str, np.ndarray] = (
                SpilledMetrics(self._files, METRIC_NAMES, (f"design{k}",), self.filled)
                if self._files is not None else
                {name: _trimmed(values, self.filled) for name, values in self._arms[k].items()})
            out.append(DesignArm(alternative.name, alternative.settings, metrics,
                                 _trimmed(self._arm_unstable[k], self.filled),
                                 alternative.compensators))
        return out


def _chunk_rows(chunk: _Chunk, names: list[str], values: np.ndarray, design: LoopDesign,
                result: SimulationResult, alternatives: list) -> SampleRows:
    """One finished chunk's results as :class:`SampleRows` (its other designs by name)."""
    arms = [(alternative.name, metrics, unstable) for alternative, (metrics, unstable)
            in zip(design.alternatives, alternatives, strict=True)]
    return SampleRows(chunk.start, names, values[chunk.start:chunk.stop], result.metrics,
                      result.unstable, arms)


def _trimmed(values: np.ndarray, filled: int) -> np.ndarray:
    # An interrupted study keeps a copy of what finished, not the whole unfilled array.
    return values if filled == values.shape[0] else values[:filled].copy()
