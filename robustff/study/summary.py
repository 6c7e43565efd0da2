"""Statistics of a finished study, as one JSON-friendly dictionary (the ``summary.json`` content).

Percentile intervals are distribution-free order-statistic intervals; the probability that
feedforward makes a metric worse carries a Wilson score interval (see :mod:`robustff.stats`).
"""

from __future__ import annotations

import os
import platform
from collections.abc import Callable, Mapping, Sequence
from concurrent.futures import ThreadPoolExecutor
from functools import partial
from typing import cast

import numpy as np

from robustff import CAUTION, __version__
from robustff.case.sampling import plant_batch
from robustff.design.case_review import margin_warnings
from robustff.design.margins_result import LIMITS_NOTE, MarginResult
from robustff.design.tuning import compensator_dicts
from robustff.engine.metrics import METRIC_NAMES, METRIC_UNITS
from robustff.stats import (
    DEFAULT_PERCENTILES,
    HarmEstimate,
    convergence_for_percentile,
    convergence_for_probability,
    metric_ratio,
    order_statistic_interval,
    paired_comparison,
    percentile_key,
    probability_worse,
    summarize,
)
from robustff.stats.sensitivity import rank_sensitivity
from robustff.study.disturbance_drivers import disturbance_drivers
from robustff.study.frequency import (
    MAX_PLANTS,
    FrequencyResult,
    frequency_study,
    frequency_summary,
    measured_disturbances,
)
from robustff.study.noise_travel import noise_travel_warning
from robustff.study.provenance import not_settled, reproducibility
from robustff.study.recommendation import recommend
from robustff.study.result_columns import arm_metrics, metric_column
from robustff.study.runner import StudyResult
from robustff.study.summary_types import (
    ArmStats,
    Convergence,
    ConvergenceDict,
    DesignDict,
    DesignSummary,
    DisturbanceDriverDict,
    FeedforwardDesign,
    HarmEstimateDict,
    MarginsSummary,
    MetricStats,
    NominalMargins,
    RecommendationDict,
    SensitivityRow,
    Summary,
    Versions,
)

__all__ = [
    "summarize_study",
    "study_frequency",
    "study_frequencies",
    "metric_unit",
    "nominal_margin_warnings",
    "HARM_METRICS",
    "VERDICT_REASONS",
    "PAIRED_METRICS",
]

#: Metrics for which the probability that feedforward makes things worse is reported.
HARM_METRICS: tuple[str, ...] = ("iae", "peak_deviation")
#: Why the simulation's stability verdict can differ from that of the margins (both are of the
#: same sampled loop; the simulation judges from a finite window of the response).
VERDICT_REASONS = ("a loop at the stability limit, a stable loop still recovering from the load "
                   "when the window ends, or a saturated response beyond the divergence limit")
#: Metrics whose per-sample improvement and ratio are summarised.
PAIRED_METRICS: tuple[str, ...] = ("iae", "ise", "peak_deviation", "valve_travel")
#: Samples from which the per-metric statistics are worked out in two threads.
PARALLEL_SAMPLES = 50_000


def metric_unit(result: StudyResult, metric: str) -> str:
    """Engineering unit of a metric for this case, e.g. ``degC*s``.

    ``overshoot`` is in percent of the step when the first event is a setpoint step.
    """
    signals = result.case.signals
    if metric == "overshoot" and result.scenario.setpoint_step:
        return "%"
    return METRIC_UNITS[metric].format(
        cv=signals.controlled.unit or "CV",
        u=signals.output.unit or "output",
        t=result.case.time_unit,
    )


def _versions() -> Versions:
    import numba
    import scipy

    return {
        "robustff": __version__,
        "python": platform.python_version(),
        "numpy": np.__version__,
        "scipy": scipy.__version__,
        "numba": numba.__version__,
    }


def _column_stats(metrics: Mapping[str, np.ndarray], name: str, arm: int | None,
                  percentiles: Sequence[float]) -> MetricStats:
    return cast(MetricStats,
                summarize(metric_column(metrics, name, arm), percentiles).to_dict())


def _summary_jobs(samples: int) -> int:
    """Threads for the summary's column statistics: two for a large study on two cores or
    more (the sorts release the GIL), else one."""
    return 2 if samples >= PARALLEL_SAMPLES and (os.cpu_count() or 1) >= 2 else 1


def _summaries(work: list[Callable[[], MetricStats]], samples: int) -> list[MetricStats]:
    """The results of ``work`` in order; in two threads for a large study (the partial sorts
    release the GIL; each call is independent, so the numbers do not depend on it)."""
    if _summary_jobs(samples) == 1:
        return [job() for job in work]
    with ThreadPoolExecutor(2, thread_name_prefix="summary") as pool:
        return list(pool.map(lambda job: job(), work))


def _margins(result: StudyResult, percentiles: Sequence[float]) -> MarginsSummary | None:
    """Margin percentiles, limit fractions, unstable samples, and the nominal loop's margins."""
    if result.margins is None or result.nominal_margins is None:
        return None
    subset = result.margins.size
    batch = plant_batch(result.case, result.names, result.parameters[:subset])
    # MarginResult.summary gives the distribution keys; the rest is added here.
    out = cast(MarginsSummary, result.margins.summary(percentiles, batch=batch))
    _margin_intervals(out, result.margins, percentiles)
    out["samples"] = subset
    out["units"] = {"gain_margin": "-", "phase_margin": "deg",
                    "delay_margin": result.case.time_unit, "ms": "-"}
    out["sample_time"] = result.case.simulation.step
    out["nominal"] = _nominal_values(result.nominal_margins)
    out["nominal_continuous"] = (_nominal_values(result.nominal_continuous_margins)
                                 if result.nominal_continuous_margins is not None else None)
    out["nominal_warnings"] = nominal_margin_warnings(out["nominal"])
    # The simulation's own verdict on the same samples (feedback only), and where it differs.
    simulated = result.unstable[:subset, 0]
    out["simulation_unstable"] = int(simulated.sum())
    differ = np.nonzero(simulated == result.margins.stable)[0]  # unstable there, stable here
    out["verdicts_differ"] = int(differ.size)
    out["verdicts_differ_samples"] = [int(i) for i in differ[:50]]
    out["limits_note"] = LIMITS_NOTE
    out["note"] = (
        f"the loop as simulated: the controller samples the CV every "
        f"{result.case.simulation.step:g} {result.case.time_unit} (the scan period) and holds "
        "its output in between, analysed exactly as a discrete-time loop with the exact dead "
        "time; the hold adds about half a scan of delay, so these margins are a little smaller "
        "than those of a continuous controller (nominal_continuous). The simulation judges "
        "stability from the response to a load within the window: a sample counted in "
        f"verdicts_differ was judged differently there ({VERDICT_REASONS})"
    )
    out["note"] += _installed_loop_note(result.case.valve is not None,
                                       result.case.secondary is not None)
    return out


def _installed_loop_note(valve: bool, secondary: bool) -> str:
    """What the margins take of the valve and the secondary loop, and what they leave out
    (the sentence ending the margins note; empty for a loop with neither)."""
    parts = []
    if secondary:
        parts.append("the secondary loop enters as its linear closed loop T = Cs Ps Va / (1 + "
                     "Cs Ps Va) (its PI, its path model and the actuator lag) in series with "
                     "the process, continuous (its own scan period and output limits are left "
                     "out: an approximation, tested for a secondary closed-loop time up to "
                     "twice the primary's dead time)")
    if valve:
        parts.append("the valve enters linearised at its nominal position (slope 1 there: the "
                     "process gain is the bump-test gain) with its actuator lag; its "
                     "characteristic away from that position, stiction, deadband and rate "
                     "limit are not part of the margins (nonlinear: the simulation has them)")
    return f". The loop as installed: {'; '.join(parts)}" if parts else ""


def _margin_intervals(
    out: MarginsSummary, margins: MarginResult, percentiles: Sequence[float]
) -> None:
    """Add ``p<P>_ci95`` to each margin: the distribution-free 95 % interval of the percentile
    (order statistics of the stable samples, the same ranks as the metrics' intervals); an
    infinite end (no crossover) is None."""
    for name in ("gain_margin", "phase_margin", "delay_margin", "ms"):
        values = np.asarray(getattr(margins, name), dtype=float)[margins.stable]
        ordered = np.sort(values[~np.isnan(values)])
        stats = cast("dict[str, object]", out[name])  # type: ignore[literal-required]
        for p in percentiles:
            r, s, _ = order_statistic_interval(ordered.size, p / 100.0)
            ends: list[float | None] = [None, None]
            if r > 0:
                ends = [float(ordered[r - 1]), float(ordered[s - 1])]
            stats[f"{percentile_key(p)}_ci95"] = [
                None if end is None or not np.isfinite(end) else end for end in ends]


def _nominal_values(nominal: MarginResult) -> NominalMargins:
    return {
        "gain_margin": float(nominal.gain_margin[0]),
        "phase_margin": float(nominal.phase_margin[0]),
        "delay_margin": float(nominal.delay_margin[0]),
        "ms": float(nominal.ms[0]),
        "stable": bool(nominal.stable[0]),
    }


def nominal_margin_warnings(nominal: NominalMargins) -> list[str]:
    """Warnings when the NOMINAL loop already misses common design limits (common practice);
    the same sentences as ``robustff check`` (``design.case_review.margin_warnings``)."""
    def one(key: str) -> np.ndarray:
        return np.array([float(nominal[key])])  # type: ignore[literal-required]

    margins = MarginResult(one("gain_margin"), one("phase_margin"), one("delay_margin"),
                           one("ms"), np.array([bool(nominal["stable"])]))
    return margin_warnings(margins)


def _paired(
    fb: Mapping[str, np.ndarray], fbff: Mapping[str, np.ndarray], percentiles: Sequence[float]
) -> tuple[dict[str, MetricStats], dict[str, MetricStats]]:
    """Per-sample improvement ``fb - fbff`` and ratio ``fbff / fb`` of the paired metrics."""
    improvement: dict[str, MetricStats] = {}
    ratio: dict[str, MetricStats] = {}
    for name in PAIRED_METRICS:
        paired = paired_comparison(fb[name], fbff[name], percentiles)
        improvement[name] = cast(MetricStats, paired["improvement_summary"].to_dict())
        ratio[name] = cast(MetricStats, paired["ratio_summary"].to_dict())
        del paired  # its per-sample arrays, before the next metric's are made
    return improvement, ratio


def _harm(fb: Mapping[str, np.ndarray],
          fbff: Mapping[str, np.ndarray]) -> dict[str, HarmEstimate]:
    return {name: probability_worse(fb[name], fbff[name]) for name in HARM_METRICS}


def _harm_dicts(harm: dict[str, HarmEstimate]) -> dict[str, HarmEstimateDict]:
    return {name: cast(HarmEstimateDict, estimate.to_dict()) for name, estimate in harm.items()}


def _designs(
    result: StudyResult, metrics: dict[str, ArmStats], percentiles: Sequence[float],
    own: tuple[dict[str, MetricStats], dict[str, MetricStats], dict[str, HarmEstimate]],
) -> list[DesignSummary]:
    """One entry per feedforward design (the case's own first), same form as the top level.

    ``versus_case`` pairs each design with the case's own design on the same plants (common
    random numbers): the per-sample IAE difference ``IAE(case) - IAE(design)`` (positive: the
    design does better) and the probability that the design does worse than the case's.
    ``own`` is the top level's improvement, ratio and harm, which the case's own entry repeats
    (the same arm: not computed twice).
    """
    fb = arm_metrics(result.metrics, 0)
    arms = result.design_arms()
    case_iae = arms[0].metrics["iae"]
    out: list[DesignSummary] = []
    for index, arm in enumerate(arms):
        if index == 0:  # the case's own design is the top level's feedforward arm
            improvement, ratio, harm = own
            fbff_stats = {name: metrics[name]["fbff"] for name in METRIC_NAMES}
        else:
            improvement, ratio = _paired(fb, arm.metrics, percentiles)
            harm = _harm(fb, arm.metrics)
            fbff_stats = dict(zip(METRIC_NAMES, _summaries(
                [partial(_column_stats, arm.metrics, name, None, percentiles)
                 for name in METRIC_NAMES], result.samples), strict=True))
        versus = paired_comparison(case_iae, arm.metrics["iae"], percentiles)
        several = ({"compensators": compensator_dicts(result.case, arm.compensators)}
                   if arm.compensators else {})
        out.append(several | {
            "name": arm.name,
            "feedforward": cast(FeedforwardDesign, arm.settings.to_dict()),
            "ff_worse": _harm_dicts(harm),
            "ratio": ratio,
            "improvement": improvement,
            "metrics": {
                name: cast(ArmStats, {"fb": metrics[name]["fb"], "fbff": fbff_stats[name]})
                for name in METRIC_NAMES
            },
            "unstable": int(arm.unstable.sum()),
            "versus_case": {
                "iae_improvement": cast(MetricStats, versus["improvement_summary"].to_dict()),
                "worse_than_case": cast(HarmEstimateDict, probability_worse(
                    case_iae, arm.metrics["iae"]).to_dict()),
            },
        })
    return out


def _convergence(result: StudyResult, harm_iae: HarmEstimate) -> Convergence:
    """Convergence of the IAE harm probability and of the IAE percentiles with feedforward."""
    iae_fbff = result.metrics["iae"][:, 1]
    return {
        "ff_worse_iae": cast(ConvergenceDict, convergence_for_probability(harm_iae).to_dict()),
        "iae_fbff": cast(ConvergenceDict, convergence_for_percentile(iae_fbff).to_dict())
        if np.isfinite(iae_fbff).sum() > 1
        else None,
    }


def study_frequency(result: StudyResult) -> FrequencyResult:
    """The error ratio of the study's feedforward over its first sampled plants (at most
    :data:`robustff.study.frequency.MAX_PLANTS`), for its first measured disturbance."""
    return study_frequencies(result)[0]


def study_frequencies(result: StudyResult) -> list[FrequencyResult]:
    """:func:`study_frequency` for every measured disturbance, in case order (the bands of
    frequency.csv); the first disturbance alone when none is measured. Computed once per
    result, case, design and sample count (the summary, the files and the plots share it)."""
    cached = result.derived.get("frequencies")
    if isinstance(cached, tuple):
        case, design, samples, studies = cached
        if case is result.case and design is result.design and samples == result.samples:
            return list(studies)
    batch = plant_batch(result.case, result.names, result.parameters[:MAX_PLANTS])
    indices = measured_disturbances(result.case) or [0]
    studies = [frequency_study(result.case, result.design, batch, index) for index in indices]
    result.derived["frequencies"] = (result.case, result.design, result.samples, tuple(studies))
    return studies


def summarize_study(
    result: StudyResult,
    percentiles: Sequence[float] = DEFAULT_PERCENTILES,
    command_line: Sequence[str] | None = None,
) -> Summary:
    """The study's statistics.

    Parameters
    ----------
    result : StudyResult
    percentiles : sequence of float
        Percentiles to report, in percent.
    command_line : sequence of str, optional
        The command that ran the study (the CLI passes ``sys.argv``), kept under
        ``reproducibility``.

    Returns
    -------
    Summary
        The ``summary.json`` content (NaN and inf still present; the writer turns them into
        null). See :mod:`robustff.study.summary_types` and ``docs/summary.schema.json``.
    """
    stats = _summaries([partial(_column_stats, result.metrics, name, i, percentiles)
                        for name in METRIC_NAMES for i in (0, 1)], result.samples)
    metrics: dict[str, ArmStats] = {
        name: cast(ArmStats, {"fb": stats[2 * k], "fbff": stats[2 * k + 1]})
        for k, name in enumerate(METRIC_NAMES)
    }
    fb, fbff = arm_metrics(result.metrics, 0), arm_metrics(result.metrics, 1)
    improvement, ratio = _paired(fb, fbff, percentiles)
    harm = _harm(fb, fbff)
    # The IAE columns read once (from their files, for a large study) for the ratio and harm.
    iae_fb, iae_fbff = fb["iae"], fbff["iae"]
    iae_ratio = metric_ratio(iae_fb, iae_fbff)
    harmful = iae_fbff > iae_fb
    del iae_fb, iae_fbff
    sensitivity: list[SensitivityRow] = []
    if result.names and result.samples > 3:
        sensitivity = [
            cast(SensitivityRow, row.to_dict())
            for row in rank_sensitivity(result.parameters, result.names, iae_ratio, harmful,
                                        jobs=_summary_jobs(result.samples))
        ]
    frequencies = study_frequencies(result)
    summary: Summary = {
        "case": result.case.name,
        "title": result.case.title,
        "samples": result.samples,
        "requested": result.requested,
        "seed": result.seed,
        "partial": result.partial,
        "sampling": result.case.study.sampling,
        "time_unit": result.case.time_unit,
        "units": {name: metric_unit(result, name) for name in METRIC_NAMES},
        "metrics": metrics,
        "improvement": improvement,
        "ratio": ratio,
        "ff_worse": _harm_dicts(harm),
        "unstable": {
            "fb": int(result.unstable[:, 0].sum()),
            "fbff": int(result.unstable[:, 1].sum()),
        },
        "convergence": _convergence(result, harm["iae"]),
        "sensitivity": sensitivity,
        "sensitivity_by_disturbance": [
            cast(DisturbanceDriverDict, {"disturbance": d.disturbance, "parameter": d.key,
                                         "rho": d.rho})
            for d in disturbance_drivers(result.case, cast(list, sensitivity))],
        "margins": _margins(result, percentiles),
        "design": cast(DesignDict, result.design.to_dict(result.case)),
        "designs": _designs(result, metrics, percentiles, (improvement, ratio, harm)),
        "settling_band": result.scenario.settling_band,
        "warnings": [text for text in (noise_travel_warning(result),) if text],
        "elapsed_seconds": round(result.elapsed, 3),
        "versions": _versions(),
        "not_settled": not_settled(result),
        "recommendation": cast(RecommendationDict, {}),  # judged below, on the summary itself
        "reproducibility": reproducibility(result, command_line),
        "frequency": frequency_summary(frequencies[0], result.case),
        "frequency_by_disturbance": [frequency_summary(item, result.case)
                                     for item in frequencies],
        "caution": CAUTION,
    }
    summary["recommendation"] = recommend(summary, result.case.recommendation)
    return summary
