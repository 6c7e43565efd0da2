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
    "CaseFile",
    "ModelParameterRow",
    "EventRow",
    "UncertaintyRow",
    "CorrelationRow",
    "WindowDict",
    "SamplingDict",
    "Reproducibility",
    "NotSettled",
    "Criteria",
    "DesignVerdict",
    "Driver",
    "RecommendationDict",
    "FrequencyDict",
    "FrequencyRecordDict",
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
    law: str  #: "linear" or "balance" (balance plants only)
    trim: str  #: "add" or "multiply": how the feedback trims the balance law


class DisturbanceDriverDict(TypedDict):
    """Which disturbance's uncertainty drives the IAE ratio (its strongest parameter)."""

    disturbance: str  #: its name ("disturbance" for the single one)
    parameter: str | None  #: its parameter with the largest |rho|; None: none is uncertain
    rho: float | None  #: that parameter's Spearman rank correlation with the IAE ratio [-]


class CompensatorDict(FeedforwardDesign):
    """One disturbance's compensator, with several disturbances."""

    disturbance: str  #: its name
    measured: bool  #: False: no transmitter, no feedforward


class _LoopDesignDict(TypedDict):
    feedback: FeedbackDesign
    feedforward: FeedforwardDesign
    notes: list[str]


class DesignDict(_LoopDesignDict, total=False):
    """The loop design from the nominal models."""

    #: with several disturbances, every one's compensator in case order (optional: the string
    #: annotations of this module hide ``NotRequired`` from TypedDict, ``total=False`` does not)
    compensators: list[CompensatorDict]


class VersusCase(TypedDict):
    """A design against the case's own design, paired on the same plants."""

    iae_improvement: MetricStats  #: IAE(case) - IAE(design) per sample, metric units
    worse_than_case: HarmEstimateDict  #: P(IAE(design) > IAE(case)), Wilson interval


class _DesignSummaryBase(TypedDict):

    name: str  #: "case" for the case's own [feedforward], else the [[design]] name
    feedforward: FeedforwardDesign
    ff_worse: dict[str, HarmEstimateDict]
    ratio: dict[str, MetricStats]
    improvement: dict[str, MetricStats]
    metrics: dict[str, ArmStats]
    unstable: int  #: samples unstable (or run away) with this design
    versus_case: VersusCase


class DesignSummary(_DesignSummaryBase, total=False):
    """One feedforward design's statistics, in the form of the top-level keys."""

    #: with several disturbances, every one's compensator in case order
    compensators: list[CompensatorDict]


class Versions(TypedDict):
    """Versions of robustff and of the numerical libraries that produced the numbers."""

    robustff: str
    python: str
    numpy: str
    scipy: str
    numba: str


class CaseFile(TypedDict):
    """The case file the study read."""

    name: str  #: file name
    path: str  #: as given on the command line
    sha256: str | None  #: hex SHA-256 of the bytes read
    bytes: int | None  #: file size, bytes (None when the file is gone)


class ModelParameterRow(TypedDict):
    """One nominal model value (``process.model`` gives the kind, value text, unit empty)."""

    key: str  #: e.g. "process.gain"
    value: float | str
    unit: str


class EventRow(TypedDict):
    """One event of the case."""

    kind: str
    at: float  #: time units
    size: float  #: disturbance or CV units
    duration: float  #: time units (ramps)
    time_constant: float  #: time units (filtered noise)
    words: str  #: the event in one sentence, with units


class UncertaintyRow(TypedDict):
    """One uncertain parameter: its distribution as in the case and in words."""

    key: str
    unit: str
    nominal: float  #: parameter units
    kind: str  #: "uniform", "relative", "normal", "triangular" or "lognormal"
    params: list[float]  #: as in the case file
    clip: list[float] | None
    words: str  #: e.g. "uniform 1.6 .. 2.4 degC/% (nominal +/- 20 %)"
    low: float  #: support, or P0.5 for unbounded distributions, parameter units
    high: float  #: support, or P99.5, parameter units


class CorrelationRow(TypedDict):
    """A rank (Spearman) correlation imposed between two uncertain parameters."""

    first: str
    second: str
    rank_correlation: float  #: -1..1


class WindowDict(TypedDict):
    """The simulated window."""

    duration: float  #: time units
    scan_period: float  #: the controller's scan period, time units
    substeps: int  #: internal plant steps per scan
    internal_step: float  #: time units
    time_unit: str


class SamplingDict(TypedDict):
    """The Monte Carlo plan."""

    plan: str  #: "random", "lhs" or "sobol"
    seed: int
    samples: int  #: simulated
    requested: int


class Reproducibility(TypedDict):
    """Everything needed to reproduce and review the study."""

    case_file: CaseFile | None  #: None for a case built in Python
    case_as_run: str  #: the case as case-file text, samples and seed as run, designs merged in
    command_line: list[str] | None  #: None when run from Python
    created: str  #: ISO 8601 date and time with the UTC offset
    timezone: str  #: the time zone's name, e.g. "UTC" or "CET"
    host: str
    platform: str
    libraries: dict[str, str]  #: further library versions ("not installed" when absent)
    models: list[ModelParameterRow]
    controller_case_form: dict[str, object]  #: the case's [feedback] as written (None left out)
    events: list[EventRow]
    window: WindowDict
    uncertainty: list[UncertaintyRow]
    correlations: list[CorrelationRow]
    sampling: SamplingDict


class NotSettled(TypedDict):
    """Samples still outside the settling band at the end of the window (finite metrics)."""

    fb: int
    fbff: int
    window_after_last_event: float  #: time units from the last step/ramp/setpoint event


class Criteria(TypedDict):
    """The recommendation criteria applied."""

    max_harm: float  #: fraction 0..1, against the upper 95 % bound
    min_improvement: float  #: fraction 0..1, median IAE improvement
    basis: str  #: whether they are the defaults (common practice) or the case's


class DesignVerdict(TypedDict):
    """One design judged against the criteria (fractions 0..1)."""

    name: str
    structure: str
    gain_factor: float
    passes: bool
    harm_probability: float | None
    harm_ci95: list[float | None]
    harm_count: int
    harm_n: int
    improvement_p50: float | None  #: 1 - P50(IAE ratio)
    improvement_p50_ci95: list[float | None]
    improvement_p90: float | None  #: 1 - P90(IAE ratio): 90 % of plants improve at least this
    unstable: int
    reasons: list[str]  #: criteria missed, empty when it passes


class Driver(TypedDict):
    """A parameter that drives the result (Spearman correlation with the IAE ratio)."""

    name: str
    rho: float | None
    ci95: list[float | None]
    rho_harm: float | None  #: with the "feedforward worse" indicator


class RecommendationDict(TypedDict):
    """Which design the study recommends and why (:mod:`robustff.study.recommendation`)."""

    design: str | None  #: None: no design meets the criteria
    reason: str
    criteria: Criteria
    designs: list[DesignVerdict]
    drivers: list[Driver]
    conditions: list[str]


class FrequencyRecordDict(TypedDict):
    """What share of a recorded disturbance trace's variance feedforward can act on."""

    file: str  #: the record's file as written in the case
    variance_share_below: float  #: % of the record's variance below the crossover (Welch)
    std: float  #: standard deviation of the record, disturbance units
    std_unit: str  #: the disturbance's unit


class FrequencyDict(TypedDict):
    """Where in frequency feedforward helps (see :mod:`robustff.study.frequency`)."""

    disturbance: str  #: the measured disturbance's name
    unit: str  #: unit of the frequencies, rad per time unit
    plants: int  #: plants the bands are taken over
    help_fraction: float  #: fraction of plants in which it must help (0.9)
    crossover: float | None  #: rad/time unit: helps in help_fraction of plants below it
    crossover_period: float | None  #: 2 pi / crossover, time units
    helps_up_to_nyquist: bool  #: the crossover is the scan's Nyquist frequency
    nyquist: float  #: pi / scan period, rad/time unit
    lowest: float  #: lowest frequency examined, rad/time unit
    record: FrequencyRecordDict | None  #: None without a recorded trace
    words: str  #: the answer in one sentence


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
    #: every disturbance's strongest uncertain parameter, the strongest disturbance first
    sensitivity_by_disturbance: list[DisturbanceDriverDict]
    margins: MarginsSummary | None  #: None when margins were not computed
    design: DesignDict
    designs: list[DesignSummary]  #: every feedforward design, the case's own first
    settling_band: float  #: CV units
    warnings: list[str]  #: about the results (e.g. noise passed to the valve), with the remedy
    elapsed_seconds: float  #: wall time, seconds
    versions: Versions
    not_settled: NotSettled
    recommendation: RecommendationDict
    reproducibility: Reproducibility
    frequency: FrequencyDict  #: where in frequency feedforward helps, and a record's share there
    #: the same for every measured disturbance, in case order (the first is ``frequency``)
    frequency_by_disturbance: list[FrequencyDict]
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

