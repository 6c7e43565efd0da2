"""The study description (a *case*) as frozen dataclasses, and its file entry points.

A case file is TOML; the schema is documented in ``docs/case-format.md``. Loading and validation
live in :mod:`robustff.case.loader`, writing in :mod:`robustff.case.writer`; this module holds the
types every other layer uses and re-exports :func:`load_case`, :func:`parse_case` and
:func:`save_case`.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from pathlib import Path

from robustff.case.balance_spec import BalanceSpec
from robustff.case.record import DisturbanceRecord
from robustff.plant.models import SensorModel, TransferModel
from robustff.plant.valve import VALVE_PARAMETER_UNITS, ValveModel

__all__ = [
    "TIME_UNITS",
    "EVENT_KINDS",
    "DISTRIBUTION_KINDS",
    "CONTROLLER_STRUCTURES",
    "FEEDFORWARD_LAWS",
    "TRIM_MODES",
    "BalanceSpec",
    "FeedbackSpec",
    "FeedforwardSpec",
    "DesignSpec",
    "DisturbanceInput",
    "DISTURBANCE_NAME_CHARACTERS",
    "SecondarySpec",
    "DESIGN_NAME_CHARACTERS",
    "Event",
    "Signal",
    "Signals",
    "SimulationSpec",
    "Distribution",
    "UncertainParameter",
    "Correlation",
    "StudySpec",
    "RecommendationSpec",
    "Case",
]

TIME_UNITS: tuple[str, ...] = ("s", "min", "h")
EVENT_KINDS: tuple[str, ...] = (
    "disturbance-step",
    "disturbance-ramp",
    "disturbance-noise",
    "setpoint-step",
    "disturbance-record",
)
DISTRIBUTION_KINDS: tuple[str, ...] = ("uniform", "relative", "normal", "triangular", "lognormal")
FEEDFORWARD_STRUCTURES: tuple[str, ...] = ("none", "static", "lead-lag", "lead-lag-delay")
#: How the feedforward is computed: the linear compensator -Gd/Gp, or the steady-state balance
#: of a balance plant solved for the manipulated flow.
FEEDFORWARD_LAWS: tuple[str, ...] = ("linear", "balance")
#: How the feedback output trims the balance law's flow.
TRIM_MODES: tuple[str, ...] = ("add", "multiply")
#: How the control system writes the PID algorithm (see :mod:`robustff.design.controller_forms`).
CONTROLLER_STRUCTURES: tuple[str, ...] = ("ideal", "series", "parallel")


@dataclass(frozen=True)
class FeedbackSpec:
    """How the feedback controller is designed.

    Parameters
    ----------
    form : {"pi", "pid"}
    tuning : {"simc", "imc", "manual"}
    closed_loop_time : float or None
        Desired closed-loop time constant tau_c, time units; ``None`` means the process dead time.
    kc, ti, td : float or None
        Manual settings in the form of ``structure``: gain (output units per CV unit), integral
        time and derivative time (time units). Used only with ``tuning = "manual"``.
    output_low, output_high : float
        Controller output limits, output units (e.g. % valve).
    output_bias : float
        Controller output at the initial steady state, output units.
    structure : {"ideal", "series", "parallel"}
        How the control system writes the algorithm; manual settings are read, and the design
        is shown, in this form (and in the ideal form the simulator uses).
    proportional_band : float or None
        Manual gain as a proportional band, % (``PB = 100 / Kc`` with CV and output in % of
        their spans, ``[signals.*] range``); instead of ``kc``.
    repeats : float or None
        Manual integral action in repeats per time unit (``1 / ti``); instead of ``ti``.
    ki : float or None
        Manual integral gain of the parallel form, output units per CV unit per time unit.
    kd : float or None
        Manual derivative gain of the parallel form, output units per CV unit times time units.
    derivative_filter : float or None
        Time constant of the derivative filter as a fraction of the ideal-form Td,
        dimensionless (None: the default fraction of :mod:`robustff.design.tuning`).
    setpoint_weight : float
        Weight b of the setpoint in the proportional action, dimensionless, 0 .. 1 (1: error).
    derivative_setpoint_weight : float
        Weight c of the setpoint in the derivative action, dimensionless, 0 .. 1 (0: derivative
        on the measurement).
    """

    form: str = "pi"
    tuning: str = "simc"
    closed_loop_time: float | None = None
    kc: float | None = None
    ti: float | None = None
    td: float | None = None
    output_low: float = 0.0
    output_high: float = 100.0
    output_bias: float = 50.0
    structure: str = "ideal"
    proportional_band: float | None = None
    repeats: float | None = None
    ki: float | None = None
    kd: float | None = None
    derivative_filter: float | None = None
    setpoint_weight: float = 1.0
    derivative_setpoint_weight: float = 0.0


@dataclass(frozen=True)
class FeedforwardSpec:
    """How the feedforward compensator is designed.

    Parameters
    ----------
    structure : {"none", "static", "lead-lag", "lead-lag-delay"}
    gain_factor : float
        Multiplies the designed feedforward gain (1.0 = full model-based gain, < 1 = detuned).
    lead, lag, delay : float or None
        Optional explicit lead time, lag time and added delay (time units) that replace the
        model-based design values (written by ``robustff tune``).
    input_filter : float or None
        Time constant of a first-order filter on the measured disturbance before the
        compensator, time units (None: no filter). Keeps transmitter noise off the valve at the
        cost of a slower feedforward.
    law : {"linear", "balance"}
        ``"linear"``: the compensator ``-Gd/Gp`` reduced to ``structure``; ``"balance"`` (balance
        plants only): the steady-state balance solved for the manipulated flow at every scan,
        with the lead-lag of ``structure`` on it.
    trim : {"add", "multiply"}
        With ``law = "balance"``: whether the feedback output adds to the computed flow or
        multiplies it (a ratio trim, whose loop gain stays the same at every throughput; the
        default with the balance law, set by the loader).
    """

    structure: str = "none"
    gain_factor: float = 1.0
    lead: float | None = None
    lag: float | None = None
    delay: float | None = None
    input_filter: float | None = None
    law: str = "linear"
    trim: str = "add"


#: Characters a design name may use (it becomes part of column names in ``samples.csv``).
DESIGN_NAME_CHARACTERS = "letters, digits, '.', '_' and '-'"


@dataclass(frozen=True)
class DesignSpec:
    """One alternative feedforward design, simulated on the same plants as the case's own.

    Parameters
    ----------
    name : str
        Unique name (not ``"case"``, which names the case's own ``[feedforward]``).
    feedforward : FeedforwardSpec
        The case's ``[feedforward]`` with the design's keys overriding it.
    """

    name: str
    feedforward: FeedforwardSpec


#: Characters a disturbance name may use (it becomes part of parameter keys and column names).
DISTURBANCE_NAME_CHARACTERS = "letters, digits and '_'"


@dataclass(frozen=True)
class DisturbanceInput:
    """One disturbance of the plant: its path to the CV, its transmitter, whether it is measured.

    A case with the single ``[disturbance]`` table has one, unnamed (``name = ""``); a case with
    ``[disturbance.NAME]`` tables has one per table, in file order.

    Parameters
    ----------
    name : str
        ``NAME`` of ``[disturbance.NAME]``; ``""`` for the single ``[disturbance]`` table.
    model : TransferModel
        Path from the disturbance to the CV (CV units per disturbance unit).
    sensor : SensorModel
        Its transmitter (lag, time units; noise, disturbance units). Unused when not measured.
    measured : bool
        False: no transmitter sees it; there is no feedforward from it (feedback alone).
    feedforward : FeedforwardSpec or None
        ``[feedforward]`` with ``[feedforward.NAME]`` overriding it; None: ``[feedforward]``.
    unit : str
        Engineering unit of the disturbance (``[disturbance.NAME] unit``; for the single table
        ``[signals.disturbance] unit``).
    """

    name: str
    model: TransferModel
    sensor: SensorModel = SensorModel()
    measured: bool = True
    feedforward: FeedforwardSpec | None = None
    unit: str = ""

    @property
    def key_prefix(self) -> str:
        """Prefix of its path parameters' keys: ``"disturbance"`` or ``"disturbance.NAME"``."""
        return f"disturbance.{self.name}" if self.name else "disturbance"

    @property
    def sensor_prefix(self) -> str:
        """Prefix of its transmitter's keys: ``"sensor"`` or ``"disturbance.NAME.sensor"``."""
        return f"disturbance.{self.name}.sensor" if self.name else "sensor"

    @property
    def label(self) -> str:
        """The name shown to the engineer (``"disturbance"`` for the single table)."""
        return self.name or "disturbance"


@dataclass(frozen=True)
class SecondarySpec:
    """A secondary (flow) loop: the primary output plus the feedforward is its setpoint.

    Parameters
    ----------
    model : TransferModel
        Secondary controller output (%) -> flow; the primary process model then takes the flow
        as its input (its gain in CV units per flow unit).
    tuning : {"simc", "manual"}
        SIMC PI from ``model`` (``closed_loop_time`` or its default), or ``kc`` and ``ti``.
    closed_loop_time, kc, ti : float or None
        Time units; ``kc`` in % per flow unit.
    output_low, output_high, output_bias : float
        The secondary controller's output range and its output at the initial steady state, %.
    scans_per_primary : int
        Secondary scans per primary scan (its scan period is ``step / scans_per_primary``).
    """

    model: TransferModel
    tuning: str = "simc"
    closed_loop_time: float | None = None
    kc: float | None = None
    ti: float | None = None
    output_low: float = 0.0
    output_high: float = 100.0
    output_bias: float = 50.0
    scans_per_primary: int = 1


@dataclass(frozen=True)
class Event:
    """Something that happens during the simulated window.

    Parameters
    ----------
    kind : str
        One of :data:`EVENT_KINDS`.
    at : float
        Start time, time units.
    size : float
        Step size (disturbance or setpoint units); for a ramp the total change reached after
        ``duration``; for filtered noise the standard deviation of the filtered signal.
    duration : float
        Ramp duration, time units (ramps only).
    time_constant : float
        Filter time constant of the noise, time units (noise only).
    record : DisturbanceRecord or None
        The recorded trace replayed from ``at`` (``disturbance-record`` only; its ``size`` is
        then the trace's largest deviation from its baseline, read from the file).
    disturbance : str
        Name of the disturbance the event moves (``""``: the first, or only, one); for a plant
        built from balances, the input it moves (``"wild_flow"``, ...); unused by setpoint
        steps.
    """

    kind: str
    at: float
    size: float
    duration: float = 0.0
    time_constant: float = 0.0
    record: DisturbanceRecord | None = None
    disturbance: str = ""


@dataclass(frozen=True)
class Signal:
    """A signal's display name, engineering unit and, optionally, its span.

    Parameters
    ----------
    name : str
    unit : str
    range : tuple of float or None
        ``(low, high)``, the engineering values at 0 % and 100 % of the signal's span (the
        transmitter's or the output's range), signal units; needed to state gains in %/%.
    band : float or None
        Controlled variable only: the allowed deviation from the setpoint, signal units (the
        ``outside_band`` metric is the percentage of the window beyond it).
    """

    name: str
    unit: str = ""
    range: tuple[float, float] | None = None
    band: float | None = None

    @property
    def span(self) -> float | None:
        """``high - low`` in signal units, or None without a range."""
        return None if self.range is None else self.range[1] - self.range[0]

    def label(self) -> str:
        """``"name [unit]"`` or just the name."""
        return f"{self.name} [{self.unit}]" if self.unit else self.name


@dataclass(frozen=True)
class Signals:
    """Names and units of the controlled variable, controller output and measured disturbance."""

    controlled: Signal = Signal("controlled variable")
    output: Signal = Signal("controller output", "%")
    disturbance: Signal = Signal("measured disturbance")


@dataclass(frozen=True)
class SimulationSpec:
    """Simulated window and the controller's scan period, both in time units.

    Parameters
    ----------
    duration : float
        The simulated window, time units.
    step : float
        The controller's scan period (the control system's execution interval), time units:
        the controller reads the CV and writes its output once per scan.
    substeps : int
        Internal steps per scan: the plant between scans is simulated (exactly, input held)
        at ``step / substeps``, where the metrics integrate the CV and events take effect;
        raising it refines the accuracy without changing the controller.
    """

    duration: float
    step: float
    substeps: int = 1

    @property
    def n_steps(self) -> int:
        """Number of controller scans in the window."""
        return int(round(self.duration / self.step))

    @property
    def internal_step(self) -> float:
        """The plant's internal step, time units."""
        return self.step / self.substeps


@dataclass(frozen=True)
class Distribution:
    """One uncertain parameter's distribution.

    Parameters
    ----------
    kind : str
        One of :data:`DISTRIBUTION_KINDS`.
    params : tuple of float
        ``uniform``: (low, high); ``relative``: (r,) meaning nominal * (1 +- r);
        ``normal``: (mean, std); ``triangular``: (low, mode, high);
        ``lognormal``: (median, factor) with factor = exp(sigma of log).
    clip : tuple of float or None
        Optional (low, high) bounds applied after sampling (``normal`` and ``lognormal``).
    """

    kind: str
    params: tuple[float, ...]
    clip: tuple[float, float] | None = None


@dataclass(frozen=True)
class UncertainParameter:
    """An uncertain plant parameter, keyed like ``"process.gain"``."""

    key: str
    distribution: Distribution

    @property
    def block(self) -> str:
        return self.key.split(".", 1)[0]

    @property
    def parameter(self) -> str:
        return self.key.split(".", 1)[1]


@dataclass(frozen=True)
class Correlation:
    """Rank correlation between two uncertain parameters (Spearman, -1 < rho < 1)."""

    first: str
    second: str
    rank_correlation: float


@dataclass(frozen=True)
class StudySpec:
    """Monte Carlo settings: sample count, seed and sampling plan ("random", "lhs", "sobol")."""

    samples: int = 2000
    seed: int = 1
    sampling: str = "lhs"


@dataclass(frozen=True)
class RecommendationSpec:
    """When the report calls a feedforward design recommended (``[recommendation]``).

    The defaults are common practice, not a standard: a site sets its own.

    Parameters
    ----------
    max_harm : float
        Largest acceptable upper end of the 95 % (Wilson) interval of the probability that the
        design makes the IAE worse than feedback alone, fraction 0..1 (0.01 = 1 %).
    min_improvement : float
        Smallest acceptable median (P50) IAE improvement, fraction of the feedback-only IAE:
        ``1 - P50(IAE fbff / IAE fb)`` (0.20 = 20 %).
    """

    max_harm: float = 0.01
    min_improvement: float = 0.20


@dataclass(frozen=True)
class Case:
    """One study: nominal models, controller and feedforward design rules, events, uncertainty."""

    title: str
    time_unit: str
    process: TransferModel
    disturbance: TransferModel
    feedback: FeedbackSpec
    feedforward: FeedforwardSpec
    simulation: SimulationSpec
    events: tuple[Event, ...]
    sensor: SensorModel = SensorModel()
    signals: Signals = Signals()
    uncertainty: tuple[UncertainParameter, ...] = ()
    correlations: tuple[Correlation, ...] = ()
    study: StudySpec = StudySpec()
    designs: tuple[DesignSpec, ...] = ()
    valve: ValveModel | None = None
    secondary: SecondarySpec | None = None
    recommendation: RecommendationSpec = RecommendationSpec()
    #: Named disturbances (``[disturbance.NAME]``) in file order; empty for the single
    #: ``[disturbance]`` table, whose model and sensor are ``disturbance`` and ``sensor``. With
    #: names, ``disturbance`` and ``sensor`` are the first named one's. For a plant built from
    #: balances, its disturbance inputs, each with its path linearised at the operating point.
    disturbances: tuple[DisturbanceInput, ...] = ()
    #: The plant built from balances (``[process] model = "blending-tank"``, ...); None for a
    #: case of transfer-function models. ``process`` and the ``disturbances`` paths are then
    #: its linearisation at the nominal operating point.
    balance: BalanceSpec | None = None
    source_path: Path | None = field(default=None, compare=False)
    #: SHA-256 (hex) of the case file's bytes as read by ``load_case``; None for text cases.
    source_sha256: str | None = field(default=None, compare=False)

    @property
    def name(self) -> str:
        """Short name for output folders: the file stem, else a slug of the title."""
        if self.source_path is not None:
            return self.source_path.stem
        slug = "".join(c if c.isalnum() else "-" for c in self.title.lower()).strip("-")
        return "-".join(part for part in slug.split("-") if part) or "case"

    @property
    def disturbance_inputs(self) -> tuple[DisturbanceInput, ...]:
        """Every disturbance, in file order (the single ``[disturbance]`` as one unnamed)."""
        if self.disturbances:
            return self.disturbances
        return (DisturbanceInput("", self.disturbance, self.sensor, True, None,
                                 self.signals.disturbance.unit),)

    @property
    def headline_input(self) -> DisturbanceInput:
        """The disturbance whose compensator is reported as the feedforward and tuned by
        ``robustff tune``: the first measured one (the first when none is measured)."""
        inputs = self.disturbance_inputs
        return next((item for item in inputs if item.measured), inputs[0])

    def disturbance_named(self, name: str) -> DisturbanceInput:
        """The disturbance called ``name`` (``""``: the first).

        Raises
        ------
        KeyError
            If the case has no disturbance of that name.
        """
        inputs = self.disturbance_inputs
        if not name:
            return inputs[0]
        for item in inputs:
            if item.name == name:
                return item
        raise KeyError(name)

    def with_disturbance_input(self, name: str, item: DisturbanceInput) -> Case:
        """A copy with the named disturbance replaced by ``item`` (``name`` ``""``: the single
        one; ``disturbance`` and ``sensor`` follow the first)."""
        if not self.disturbances:
            return replace(self, disturbance=item.model, sensor=item.sensor)
        inputs = tuple(item if old.name == name else old for old in self.disturbances)
        if inputs == self.disturbances and item not in inputs:
            raise KeyError(name)
        return replace(self, disturbances=inputs, disturbance=inputs[0].model,
                       sensor=inputs[0].sensor)

    def feedforward_of(self, item: DisturbanceInput) -> FeedforwardSpec:
        """The feedforward rule of one disturbance (its own override, else ``[feedforward]``)."""
        return item.feedforward if item.feedforward is not None else self.feedforward

    def split_key(self, key: str) -> tuple[str, DisturbanceInput | None, str]:
        """``(block, disturbance, parameter)`` of a plant parameter key.

        ``block`` is ``"process"``, ``"disturbance"``, ``"sensor"``, ``"valve"`` or
        ``"secondary"``; ``disturbance`` the input a disturbance or sensor key belongs to (None
        for the others). ``"disturbance.feed.sensor.noise_std"`` gives ``("sensor", feed,
        "noise_std")``.
        """
        for item in self.disturbance_inputs:
            for block, prefix in (("sensor", item.sensor_prefix),
                                  ("disturbance", item.key_prefix)):
                if key.startswith(prefix + ".") and "." not in key[len(prefix) + 1:]:
                    return block, item, key[len(prefix) + 1:]
        block, _, name = key.partition(".")
        return block, None, name

    def parameter_unit(self, key: str) -> str:
        """Engineering unit of a plant parameter such as ``"process.gain"`` (from ``[signals]``)."""
        block, item, name = self.split_key(key)
        signals = self.signals
        if block == "process" and self.balance is not None and (
                name in self.balance.plant.parameter_names()):
            return self.balance.plant.parameter(name).unit_text(self.time_unit)
        if block == "valve":
            return VALVE_PARAMETER_UNITS[name].format(time=self.time_unit)
        if block == "secondary" and self.secondary is not None:
            if name != "gain":
                return self.time_unit
            return f"{signals.output.unit or 'output unit'} per % of secondary output"
        disturbance_unit = item.unit if item is not None else signals.disturbance.unit
        if name == "noise_std":
            return disturbance_unit
        model = self.process if item is None else item.model
        if block == "sensor" or name not in model.spec.parameter_names:
            return self.time_unit
        source_unit = signals.output.unit if block == "process" else disturbance_unit
        return model.spec.parameter(name).unit_text(
            signals.controlled.unit or "CV unit", source_unit or "input unit", self.time_unit
        )

    def nominal_value(self, key: str) -> float:
        """Nominal value of a plant parameter such as ``"process.gain"``."""
        block, item, parameter = self.split_key(key)
        if block == "process" and self.balance is not None and (
                parameter in self.balance.plant.parameter_names()):
            return self.balance.plant.parameters()[parameter]
        if item is not None:
            return float(getattr(item.sensor if block == "sensor" else item.model, parameter))
        owner = {"process": self.process, "valve": self.valve or ValveModel(),
                 "sensor": self.sensor,  # a balance plant's one transmitter lag
                 "secondary": self.secondary.model if self.secondary else None}[block]
        return float(getattr(owner, parameter))
