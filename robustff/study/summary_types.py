"""Typed description of ``summary.json``, the statistics of one study.

:func:`robustff.study.summary.summarize_study` returns a :class:`Summary`; the CLI, the exports and
the studio read it through these types so a misspelt key is a type error, not a ``KeyError`` at
run time. ``docs/summary.schema.json`` describes the same structure as it appears in the file.

Two differences between the Python value and the file: NaN and infinities become ``null`` when
the file is written (JSON has neither), and the percentile keys ``p<P>`` / ``p<P>_ci95`` depend on
the percentiles asked for (``--percentiles``), so they are not TypedDict keys; read them with
:func:`percentile_value`.

Units: metric values are in the units listed under ``units``; times are in ``time_unit``.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Literal, TypedDict, cast

from robustff.stats import percentile_key

__all__ = [
    "Arm",
    "ARMS",
    "MarginName",
    "Summary",
    "MetricStats",
    "ArmStats",
    "HarmEstimateDict",
    "UnstableCounts",
    "ConvergenceDict",
    "Convergence",
    "SensitivityRow",
    "MarginDistribution",
    "FractionBelowLimits",
    "NominalMargins",
    "MarginsSummary",
    "MarginUnits",
    "FeedbackDesign",
    "FeedforwardDesign",
    "DesignDict",
    "DesignSummary",
    "VersusCase",
    "Versions",
    "percentile_value",
]

#: The two simulated arms: feedback only, and feedback plus feedforward.
Arm = Literal["fb", "fbff"]
ARMS: tuple[Arm, Arm] = ("fb", "fbff")
#: The four stability margins of the ``margins`` section.
MarginName = Literal["gain_margin", "phase_margin", "delay_margin", "ms"]


class MetricStats(TypedDict):
    """Distribution of one metric over the stable samples of one arm.

    Besides these keys, each reported percentile ``P`` adds ``p<P>`` (the value, metric units,
    None when not available) and ``p<P>_ci95`` (``[low, high]`` distribution-free 95 % interval).
    """

    mean: float | None  #: metric units; None without finite samples
    std: float | None  #: metric units, ddof=1; None with fewer than two finite samples
    n: int  #: finite samples used
    n_excluded: int  #: samples left out (unstable: NaN or inf)


class ArmStats(TypedDict):
    """One metric in both arms."""

    fb: MetricStats
    fbff: MetricStats


class HarmEstimateDict(TypedDict):
    """Probability that feedforward makes a metric worse than feedback alone."""

    probability: float | None  #: fraction 0..1; None when no sample is usable
    ci95: list[float | None]  #: [low, high], fraction 0..1
    count: int  #: samples where feedforward was worse
    n: int  #: samples compared
    method: str  #: interval method, "wilson" or "clopper-pearson"


class UnstableCounts(TypedDict):
    """Unstable samples per arm (excluded from the percentiles)."""

    fb: int
    fbff: int


class ConvergenceDict(TypedDict):
    """Whether the sample count reached the target precision."""

    enough: bool
    samples_needed: int  #: estimated samples for the target precision
    n: int  #: samples used
    message: str  #: one sentence for the engineer


class Convergence(TypedDict):
    """Convergence of the harm probability and of the IAE percentiles with feedforward."""

    ff_worse_iae: ConvergenceDict
    iae_fbff: ConvergenceDict | None  #: None with fewer than two finite IAE values


class SensitivityRow(TypedDict):
    """Spearman rank correlation of one uncertain parameter with the IAE ratio fbff/fb."""

    name: str  #: parameter key, e.g. "process.gain"
    rho: float | None  #: -1..1
    ci95: list[float | None]  #: [low, high], Fisher-z interval
    n: int
    rho_harm: float | None  #: correlation with the "feedforward is worse" indicator
    harm_ci95: list[float | None]
    n_harm: int


class MarginDistribution(TypedDict):
    """One stability margin over the stable samples; also ``p<P>`` keys (None: infinite)."""

    n: int  #: samples with a value
    infinite: int  #: samples where the margin is infinite (e.g. no phase crossover)
    min: float | None
    max: float | None


class FractionBelowLimits(TypedDict):
    """Fractions (0..1) of all margin samples beyond the design limits; None without samples."""

    ms_above_2: float | None
    gain_margin_below_2: float | None
    phase_margin_below_30: float | None


class NominalMargins(TypedDict):
    """Margins of the nominal loop (may be inf or NaN here, null in the file)."""

    gain_margin: float  #: dimensionless
    phase_margin: float  #: degrees
    delay_margin: float  #: time units
    ms: float  #: peak sensitivity, dimensionless
    stable: bool


class MarginUnits(TypedDict):
    """Unit of each margin, as written in ``summary.json``."""

    gain_margin: str  #: "-" (a ratio)
    phase_margin: str  #: "deg"
    delay_margin: str  #: the case's time unit
    ms: str  #: "-" (a ratio)


class MarginsSummary(TypedDict):
    """Feedback stability margins (exact dead time) of the first margin samples, of the loop as
    simulated: the controller sampled at the scan period ``sample_time``, output held."""

    gain_margin: MarginDistribution  #: dimensionless
    phase_margin: MarginDistribution  #: degrees
    delay_margin: MarginDistribution  #: time units
    ms: MarginDistribution  #: dimensionless
    units: MarginUnits
    fraction_below_limits: FractionBelowLimits
    unstable: int  #: unstable feedback loops
    unstable_samples: list[int]  #: indices of the first unstable samples
    unstable_parameters: list[dict[str, float]]  #: their process parameters, key without "process."
    samples: int  #: samples whose margins were computed
    sample_time: float  #: time units: the controller's scan period the loop was analysed at
    nominal: NominalMargins  #: the nominal loop as simulated
    nominal_continuous: NominalMargins | None  #: the nominal loop, continuous controller
    nominal_warnings: list[str]
    simulation_unstable: int  #: of the margin samples, flagged unstable by the simulation (fb)
    verdicts_differ: int  #: margin samples where that flag and ``unstable`` disagree
    verdicts_differ_samples: list[int]  #: indices of the first 50 of them
    limits_note: str
    note: str


class FeedbackDesign(TypedDict):
    """The designed PI/PID controller, ideal form, derivative on the measurement."""

    form: str  #: "pi" or "pid"
    kc: float  #: output units per CV unit
    ti: float  #: time units
    td: float  #: time units
    filter_time: float  #: time units
    tracking_time: float  #: time units
    output_low: float  #: output units
    output_high: float  #: output units
    output_bias: float  #: output units
    closed_loop_time: float  #: time units; NaN (null in the file) for manual tuning
    rule: str  #: "SIMC", "IMC" or "manual"


class FeedforwardDesign(TypedDict):
    """The designed compensator ``gain (lead s + 1)/(lag s + 1) exp(-delay s)``."""

    structure: str  #: "none", "static", "lead-lag" or "lead-lag-delay"
    gain: float  #: output units per disturbance unit
    lead: float  #: time units
    lag: float  #: time units
    delay: float  #: time units
    gain_factor: float  #: detuning factor applied, dimensionless
    input_filter: float  #: time units; 0 = no filter on the feedforward input


class DesignDict(TypedDict):
    """The loop design from the nominal models."""

    feedback: FeedbackDesign
    feedforward: FeedforwardDesign
    notes: list[str]


class VersusCase(TypedDict):
    """A design against the case's own design, paired on the same plants."""

    iae_improvement: MetricStats  #: IAE(case) - IAE(design) per sample, metric units
    worse_than_case: HarmEstimateDict  #: P(IAE(design) > IAE(case)), Wilson interval


class DesignSummary(TypedDict):
    """One feedforward design's statistics, in the form of the top-level keys."""

    name: str  #: "case" for the case's own [feedforward], else the [[design]] name
    feedforward: FeedforwardDesign
    ff_worse: dict[str, HarmEstimateDict]
    ratio: dict[str, MetricStats]
    improvement: dict[str, MetricStats]
    metrics: dict[str, ArmStats]
    unstable: int  #: samples unstable (or run away) with this design
    versus_case: VersusCase


class Versions(TypedDict):
    """Versions of robustff and of the numerical libraries that produced the numbers."""

    robustff: str
    python: str
    numpy: str
    scipy: str
    numba: str
    joblib: str


class Summary(TypedDict):
    """The content of ``summary.json``.

    The dictionaries keyed by metric name hold every metric of
    :data:`robustff.engine.metrics.METRIC_NAMES` (``units``, ``metrics``), the paired metrics
    (``improvement``, ``ratio``) or the harm metrics (``ff_worse``) of
    :mod:`robustff.study.summary`.
    """

    case: str
    title: str
    samples: int  #: samples simulated (fewer than ``requested`` when ``partial``)
    requested: int
    seed: int
    partial: bool  #: True when the run was interrupted
    sampling: str  #: "random", "lhs" or "sobol"
    time_unit: str
    units: dict[str, str]  #: metric name -> engineering unit
    metrics: dict[str, ArmStats]
    improvement: dict[str, MetricStats]  #: fb - fbff per sample, metric units
    ratio: dict[str, MetricStats]  #: fbff / fb per sample, dimensionless
    ff_worse: dict[str, HarmEstimateDict]
    unstable: UnstableCounts
    convergence: Convergence
    sensitivity: list[SensitivityRow]  #: ranked; empty without uncertain parameters
    margins: MarginsSummary | None  #: None when margins were not computed
    design: DesignDict
    designs: list[DesignSummary]  #: every feedforward design, the case's own first
    settling_band: float  #: CV units
    warnings: list[str]  #: about the results (e.g. noise passed to the valve), with the remedy
    elapsed_seconds: float  #: wall time, seconds
    versions: Versions
    caution: str


def percentile_value(stats: Mapping[str, object], percentile: float) -> float | None:
    """The ``p<P>`` entry of a :class:`MetricStats` or :class:`MarginDistribution`.

    Parameters
    ----------
    stats : MetricStats or MarginDistribution
    percentile : float
        In percent, e.g. 95.

    Returns
    -------
    float or None
        In the units of the metric; None when not available or not reported.
    """
    # The key depends on the run's percentiles, so the TypedDicts cannot list it.
    return cast("float | None", stats.get(percentile_key(percentile)))

