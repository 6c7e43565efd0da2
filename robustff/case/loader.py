"""Read and validate case files (TOML) into :class:`robustff.case.Case`.

Every problem in a file is collected, then one :class:`~robustff.errors.CaseError` is raised with
one line per problem, ``"FILE: key.path: what is wrong (got VALUE)"``. The schema is described in
``docs/case-format.md``; the uncertainty section is read by
:mod:`robustff.case.uncertainty_section`.
"""

from __future__ import annotations

import hashlib
import math
import re
import tomllib
from dataclasses import replace
from pathlib import Path
from typing import Any

from robustff.case import balance_section
from robustff.case.disturbance_section import (
    is_named_form,
    read_named_disturbances,
    split_feedforward,
)
from robustff.case.fields import REQUIRED, Problems, Table, as_table, join, show
from robustff.case.record_section import (
    RECORD_KEYS,
    has_record_events,
    read_record_event,
    records_cover,
)
from robustff.case.schema import (
    CONTROLLER_STRUCTURES,
    DESIGN_NAME_CHARACTERS,
    EVENT_KINDS,
    FEEDFORWARD_LAWS,
    FEEDFORWARD_STRUCTURES,
    TIME_UNITS,
    TRIM_MODES,
    Case,
    DesignSpec,
    Event,
    FeedbackSpec,
    FeedforwardSpec,
    RecommendationSpec,
    Signal,
    Signals,
    SimulationSpec,
    StudySpec,
)
from robustff.case.secondary_section import read_secondary
from robustff.case.uncertainty_section import INVALID_BLOCK, Models, read_uncertainty
from robustff.case.valve_section import read_valve
from robustff.errors import CaseError
from robustff.plant.models import MODEL_KINDS, MODEL_PARAMETERS, SensorModel, TransferModel

__all__ = [
    "parse_case", "load_case", "MAX_STEPS", "MIN_SAMPLES", "MAX_SAMPLES", "MAX_SEED",
    "SAMPLING_PLANS", "TOP_LEVEL_KEYS",
]

#: Largest number of controller samples in one simulated window (memory and run time guard).
MAX_STEPS = 200_000
SAMPLING_PLANS: tuple[str, ...] = ("random", "lhs", "sobol")
MIN_SAMPLES, MAX_SAMPLES = 10, 10_000_000
#: Largest random seed a case (or the command line) may give: numpy takes 64-bit seeds.
MAX_SEED = 2**63 - 1
TOP_LEVEL_KEYS: tuple[str, ...] = (
    "title", "time_unit", "process", "disturbance", "feedback", "feedforward", "sensor",
    "event", "signals", "simulation", "uncertainty", "study", "design", "recommendation", "valve",
    "secondary",
)
_REQUIRED_TABLES = ("process", "disturbance", "simulation")


def load_case(path: str | Path) -> Case:
    """Read and validate a case file.

    Parameters
    ----------
    path : str or Path
        The TOML file.

    Returns
    -------
    Case
        With ``source_path`` set to ``path``.

    Raises
    ------
    CaseError
        If the file cannot be read or has any problem (all problems are listed).
    """
    path = Path(path)
    try:
        data = path.read_bytes()  # hashed as read: the SHA-256 is that of the bytes that ran
        text = data.decode("utf-8")
    except FileNotFoundError:
        raise CaseError(f"{path}: no such case file") from None
    except UnicodeDecodeError as exc:
        raise CaseError(f"{path}: not a text file in UTF-8 ({exc.reason})") from None
    except OSError as exc:
        raise CaseError(f"{path}: cannot read the case file ({exc.strerror or exc})") from None
    case = parse_case(text, source=str(path), base_dir=path.parent)
    return _with_source(case, path, hashlib.sha256(data).hexdigest())


def _with_source(case: Case, path: Path, sha256: str) -> Case:
    return replace(case, source_path=path, source_sha256=sha256)


def parse_case(text: str, source: str = "<text>", base_dir: Path | None = None) -> Case:
    """Validate case text and build the :class:`Case`.

    Parameters
    ----------
    text : str
        TOML text.
    source : str
        Name used at the start of every problem line (usually the file path).
    base_dir : Path, optional
        Folder that relative record files (``disturbance-record`` events) are read from: the
        case file's; None: the folder of ``source`` if it names a file, else the working folder.

    Raises
    ------
    CaseError
        With one line per problem found.
    """
    # Windows editors save UTF-8 with a byte-order mark; TOML itself does not allow one.
    text = text.removeprefix("\ufeff")
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise CaseError(f"{source}: not readable as TOML: {exc}") from None
    except (ValueError, RecursionError) as exc:  # e.g. arrays nested thousands deep
        raise CaseError(f"{source}: not readable as TOML: {type(exc).__name__}") from None
    problems = Problems(source)
    if base_dir is None and Path(source).is_file():
        base_dir = Path(source).parent
    case = _build_case(problems, raw, base_dir)
    if problems.lines or case is None:
        raise CaseError(problems.lines or [f"{source}: the case could not be read"])
    return case


def _build_case(problems: Problems, raw: dict[str, Any], base_dir: Path | None = None
                ) -> Case | None:
    top = Table(problems, "", raw)
    top.check_keys(TOP_LEVEL_KEYS, "at the top level")
    title = top.text("title")
    if title is not None and not title.strip():
        problems.add("title", "must not be empty", title)
    time_unit = top.text("time_unit", choices=TIME_UNITS)
    balance_form = balance_section.is_balance_process(raw.get("process"))
    balance = (balance_section.read_balance_process(problems, raw["process"]) if balance_form
               else None)
    for name in _REQUIRED_TABLES:
        if name not in raw and not (name == "disturbance" and balance_form):
            problems.add(name, f"missing table [{name}]")
    if balance_form:
        process = balance.process_model() if balance is not None else None
    else:
        process = _read_model(problems, raw, "process")
    feedback = _read_feedback(problems, raw.get("feedback", {}))
    if balance is not None:
        feedback = balance_section.balance_feedback(problems, raw.get("feedback"), balance,
                                                    feedback)
    named = None
    balance_inputs: tuple = ()
    if balance_form:  # the plant's own inputs are its disturbances
        feedforward = _read_feedforward(problems, raw.get("feedforward", {}))
        sensor = _read_sensor(problems, raw.get("sensor", {}))
        if balance is not None and sensor is not None:
            balance_inputs = balance_section.balance_disturbances(balance, sensor, time_unit)
        disturbance = balance_inputs[0].model if balance_inputs else None
    elif is_named_form(raw.get("disturbance")):
        named = read_named_disturbances(problems, raw, _read_model, _read_sensor,
                                        _read_feedforward, _merged_feedforward)
        disturbance = named.inputs[0].model if named is not None else None
        sensor = named.inputs[0].sensor if named is not None else None
        base, _ = split_feedforward(raw.get("feedforward", {}), tuple(raw["disturbance"]))
        feedforward = _read_feedforward(problems, base)
    else:
        disturbance = _read_model(problems, raw, "disturbance")
        feedforward = _read_feedforward(problems, raw.get("feedforward", {}))
        sensor = _read_sensor(problems, raw.get("sensor", {}))
    valve = read_valve(problems, raw.get("valve"))
    signals = _read_signals(problems, raw.get("signals", {}))
    if balance is not None:
        signals = balance_section.balance_signals(problems, raw.get("signals"), balance, signals,
                                                  time_unit)
    if feedback is not None and signals is not None:
        _check_spans(problems, feedback, signals)
    simulation = _read_simulation(problems, raw)
    secondary = read_secondary(problems, raw.get("secondary"),
                               simulation.substeps if simulation is not None else None)
    events = _read_events(problems, raw, simulation, base_dir, time_unit)
    if events is not None and not balance_form:  # a balance plant names its inputs itself
        events = _check_event_disturbances(problems, events, raw.get("disturbance"))
    if simulation is not None and events is not None:
        simulation = records_cover(problems, simulation, events, MAX_STEPS, time_unit or "")
    study = _read_study(problems, raw.get("study", {}))
    recommendation = _read_recommendation(problems, raw.get("recommendation", {}))
    designs = _read_designs(problems, raw)
    models: Models = {"process": process,
                      "valve": valve if valve is not None or "valve" not in raw
                      else INVALID_BLOCK,
                      "secondary": secondary.model if secondary is not None
                      else INVALID_BLOCK if "secondary" in raw else None}
    if balance is not None:  # its parameters are the physical ones; its paths follow from them
        models.update({"process": balance.plant, "disturbance": balance.plant,
                       "sensor": sensor})
    elif named is None:
        models.update({"disturbance": disturbance, "sensor": sensor})
    else:
        for item in named.inputs:
            models.update({item.key_prefix: item.model, item.sensor_prefix: item.sensor})
    uncertainty, correlations = read_uncertainty(problems, raw.get("uncertainty", {}), models)
    if balance is not None:
        balance_section.check_balance_case(problems, raw, balance, feedforward, events,
                                           designs)
        balance_section.check_operating_range(problems, balance, uncertainty, events, feedback)
    elif not balance_form:
        balance_section.refuse_balance_keys(problems, feedforward, designs)
    parts = (title, time_unit, process, disturbance, feedback, feedforward, sensor, signals,
             simulation, events, study, uncertainty, correlations, designs,
             recommendation)
    if problems.lines or any(part is None for part in parts):
        return None
    return Case(
        title=title, time_unit=time_unit, process=process, disturbance=disturbance,  # type: ignore[arg-type]
        feedback=feedback, feedforward=feedforward, simulation=simulation,  # type: ignore[arg-type]
        events=events, sensor=sensor, signals=signals, uncertainty=uncertainty,  # type: ignore[arg-type]
        correlations=correlations, study=study, designs=designs,  # type: ignore[arg-type]
        recommendation=recommendation,  # type: ignore[arg-type]
        valve=valve, secondary=secondary, balance=balance,
        disturbances=named.inputs if named is not None else balance_inputs,
    )


def _check_event_disturbances(problems: Problems, events: tuple[Event, ...], table: object
                              ) -> tuple[Event, ...] | None:
    """Every disturbance event names a disturbance of the case (optional when there is one)."""
    names = tuple(table) if is_named_form(table) else ()
    before = len(problems)
    for index, event in enumerate(events):
        path = f"event[{index + 1}].disturbance"
        if event.kind == "setpoint-step":
            if event.disturbance:
                problems.add(path, "a setpoint step moves no disturbance", event.disturbance)
            continue
        if not event.disturbance:
            if len(names) > 1:
                problems.add(path, f"missing: name the disturbance it moves (one of "
                             f"{', '.join(names)})")
            continue
        if not names:
            problems.add(path, "the case has one disturbance ([disturbance]); name "
                         "disturbances as [disturbance.NAME] tables to tell them apart",
                         event.disturbance)
        elif event.disturbance not in names:
            problems.add(path, f"no disturbance of that name (the case has "
                         f"{', '.join(names)})", event.disturbance)
    if len(problems) > before:
        return None
    return events


def _section(problems: Problems, path: str, value: object) -> Table | None:
    table = as_table(problems, path, value, f"[{path}]")
    return None if table is None else Table(problems, path, table)


def _read_model(problems: Problems, raw: dict[str, Any], block: str) -> TransferModel | None:
    if block not in raw:
        return None
    table = _section(problems, block, raw[block])
    if table is None:
        return None
    before = len(problems)
    kind = table.text("model", choices=MODEL_KINDS)
    if kind is None:
        return None
    names = MODEL_PARAMETERS[kind]
    table.check_keys(("model", *names), f"for model = {kind!r}")
    values: dict[str, float | None] = {}
    for name in names:
        if name == "gain":
            values[name] = table.number(name, nonzero=block == "process")
        else:
            values[name] = table.number(name, minimum=0.0, what=f"a number >= 0, {_UNIT}")
    if len(problems) > before:
        return None
    return TransferModel(kind, **values)  # type: ignore[arg-type]


_UNIT = "in the case's time unit"
_MANUAL = "with tuning = 'manual'"


_MANUAL_KEYS = ("kc", "proportional_band", "ti", "repeats", "td", "ki", "kd")


def _read_feedback(problems: Problems, value: object) -> FeedbackSpec | None:
    table = _section(problems, "feedback", value)
    if table is None:
        return None
    before = len(problems)
    default = FeedbackSpec()
    table.check_keys(tuple(default.__dataclass_fields__))
    form = table.text("form", default.form, ("pi", "pid"))
    tuning = table.text("tuning", default.tuning, ("simc", "imc", "manual"))
    structure = table.text("structure", default.structure, CONTROLLER_STRUCTURES)
    manual = tuning == "manual"
    parallel = structure == "parallel"
    spec = FeedbackSpec(
        form=form or "pi",
        tuning=tuning or "simc",
        closed_loop_time=table.number("closed_loop_time", None, positive=True),
        kc=table.number("kc", None, nonzero=True, what=f"the controller gain, {_MANUAL}"),
        ti=table.number("ti", None, positive=True),
        td=table.number("td", None, minimum=0.0),
        output_low=table.number("output_low", default.output_low),  # type: ignore[arg-type]
        output_high=table.number("output_high", default.output_high),  # type: ignore[arg-type]
        output_bias=table.number("output_bias", default.output_bias),  # type: ignore[arg-type]
        structure=structure or "ideal",
        proportional_band=table.number("proportional_band", None, positive=True),
        repeats=table.number("repeats", None, positive=True),
        ki=table.number("ki", None, nonzero=True),
        kd=table.number("kd", None),
        derivative_filter=_fraction(table, "derivative_filter", None),
        setpoint_weight=_fraction(table, "setpoint_weight", default.setpoint_weight),  # type: ignore[arg-type]
        derivative_setpoint_weight=_fraction(  # type: ignore[arg-type]
            table, "derivative_setpoint_weight", default.derivative_setpoint_weight),
    )
    if tuning is not None and not manual:
        for key in _MANUAL_KEYS:
            table.forbid(key, f"used only with tuning = 'manual' (tuning is {tuning!r})")
    if manual:
        table.forbid("closed_loop_time", "not used with tuning = 'manual'; remove it")
        _manual_keys(problems, table, form, structure)
    if form == "pi":
        for key in ("td", "kd", "derivative_filter", "derivative_setpoint_weight"):
            table.forbid(key, "a PI controller has no derivative action; use form = 'pid' or "
                              f"remove {key}")
    _check_output_range(problems, table, spec)
    if not parallel and structure is not None:
        for key in ("ki", "kd"):
            table.forbid(key, f"gains of the parallel form (structure is {structure!r}); use "
                              "ti or repeats and td, or structure = 'parallel'")
    return spec if len(problems) == before else None


def _fraction(table: Table, key: str, default: float | None) -> float | None:
    """A dimensionless number in 0 .. 1 (weights, the derivative filter fraction)."""
    value = table.number(key, default, minimum=0.0)
    if value is not None and value > 1.0 and table.has(key):
        table.problems.add(join("feedback", key), "must be between 0 and 1", value)
        return None
    return value


def _manual_keys(problems: Problems, table: Table, form: str | None,
                 structure: str | None) -> None:
    """One gain, one integral and (for a PID) one derivative setting in the case's form."""
    if not (table.has("kc") or table.has("proportional_band")):
        problems.add("feedback.kc", f"missing key (the controller gain, {_MANUAL}; or "
                     "proportional_band, in %)")
    elif table.has("kc") and table.has("proportional_band"):
        problems.add("feedback.proportional_band", "give the gain once: kc or "
                     f"proportional_band, not both (kc = {show(table.raw['kc'])})",
                     table.raw["proportional_band"])
    if structure == "parallel":
        for key in ("ti", "repeats", "td"):
            table.forbid(key, "not used with structure = 'parallel' (its settings are kc or "
                              "proportional_band, ki and kd)")
        if not table.has("ki"):
            problems.add("feedback.ki", f"missing key (the integral gain of the parallel form, "
                         f"output units per CV unit per time unit, {_MANUAL})")
        if form == "pid" and not table.has("kd"):
            problems.add("feedback.kd", "missing key (the derivative gain of the parallel form, "
                         "with form = 'pid' and tuning = 'manual')")
        return
    if not (table.has("ti") or table.has("repeats")):
        problems.add("feedback.ti", f"missing key (the integral time, {_MANUAL}; or repeats, "
                     "repeats per time unit)")
    elif table.has("ti") and table.has("repeats"):
        problems.add("feedback.repeats", "give the integral action once: ti or repeats, not "
                     f"both (ti = {show(table.raw['ti'])})", table.raw["repeats"])
    if form == "pid" and not table.has("td"):
        problems.add("feedback.td", "missing key (the derivative time, with form = 'pid' and "
                     "tuning = 'manual')")


def _check_output_range(problems: Problems, table: Table, spec: FeedbackSpec) -> None:
    low, high, bias = spec.output_low, spec.output_high, spec.output_bias
    if low is None or high is None:
        return
    if low >= high:
        problems.add("feedback.output_low", f"must be below output_high ({high:g})", low)
    elif bias is not None and not low <= bias <= high:
        problems.add("feedback.output_bias", f"must lie within output_low .. output_high "
                     f"({low:g} .. {high:g})", bias)


def _read_feedforward(
    problems: Problems, value: object, path: str = "feedforward"
) -> FeedforwardSpec | None:
    table = _section(problems, path, value)
    if table is None:
        return None
    before = len(problems)
    default = FeedforwardSpec()
    table.check_keys(tuple(default.__dataclass_fields__))
    structure = table.text("structure", default.structure, FEEDFORWARD_STRUCTURES)
    spec = FeedforwardSpec(
        structure=structure or "none",
        gain_factor=table.number("gain_factor", default.gain_factor, minimum=0.0),  # type: ignore[arg-type]
        lead=table.number("lead", None, minimum=0.0),
        lag=table.number("lag", None, minimum=0.0),
        delay=table.number("delay", None, minimum=0.0),
        input_filter=table.number(
            "input_filter", None, minimum=0.0,
            what=f"the filter time constant on the feedforward input, {_UNIT}"),
        law=table.text("law", default.law, FEEDFORWARD_LAWS) or default.law,
        trim=table.text("trim", default.trim, TRIM_MODES) or default.trim,
    )
    if spec.law == "balance":
        if not table.has("trim"):  # a ratio law is trimmed as a ratio (docs/balance-plants.md)
            spec = replace(spec, trim="multiply")
        if not table.has("structure"):  # the balance law itself is static
            spec = replace(spec, structure="static")
        elif structure == "none":
            problems.add(join(path, "structure"), "the balance law needs a structure, 'static' "
                         "or 'lead-lag' (its dynamics)", structure)
    elif spec.trim != "add":
        problems.add(join(path, "trim"), "used only with law = 'balance' (the feedback of the "
                     "linear law adds to the compensator's output)", spec.trim)
    if structure == "none":
        table.forbid("input_filter", "used only with a feedforward (structure is 'none')")
    if structure is not None and structure not in ("lead-lag", "lead-lag-delay"):
        for key in ("lead", "lag"):
            table.forbid(key, f"used only with structure 'lead-lag' or 'lead-lag-delay' "
                              f"(structure is {structure!r})")
    if structure is not None and structure != "lead-lag-delay":
        table.forbid("delay", "used only with structure 'lead-lag-delay' "
                              f"(structure is {structure!r})")
    return spec if len(problems) == before else None


_DESIGN_NAME = re.compile(r"[A-Za-z0-9._-]{1,40}")
#: Keys tied to a structure: a design that changes the structure does not inherit them.
_STRUCTURE_KEYS = {"lead": ("lead-lag", "lead-lag-delay"), "lag": ("lead-lag", "lead-lag-delay"),
                   "delay": ("lead-lag-delay",)}


def _merged_feedforward(base: dict[str, Any], overrides: dict[str, Any]) -> dict[str, Any]:
    """``[feedforward]`` keys with ``overrides`` on top; a changed structure drops the base's
    keys that belong to the old structure only."""
    merged = dict(base)
    if "structure" in overrides:
        structure = overrides["structure"]
        for key, structures in _STRUCTURE_KEYS.items():
            if structure not in structures:
                merged.pop(key, None)
    if "law" in overrides and overrides["law"] != "balance":
        merged.pop("trim", None)  # a linear design has no trim to inherit
    merged.update(overrides)
    return merged


def _read_designs(problems: Problems, raw: dict[str, Any]) -> tuple[DesignSpec, ...] | None:
    """``[[design]]`` tables: a name plus ``[feedforward]`` keys overriding the case's."""
    value = raw.get("design", [])
    if isinstance(value, dict) or not isinstance(value, list):
        problems.add("design", "must be written [[design]] (with double brackets), one per "
                     "design", value)
        return None
    named = tuple(raw["disturbance"]) if is_named_form(raw.get("disturbance")) else ()
    base, _ = split_feedforward(raw.get("feedforward", {}), named)
    base = dict(base) if isinstance(base, dict) else {}
    before, designs, seen = len(problems), [], {"case"}
    for index, item in enumerate(value):
        path = f"design[{index + 1}]"
        if not isinstance(item, dict):
            problems.add(path, "must be a table with a name and [feedforward] keys", item)
            continue
        name = item.get("name")
        if not isinstance(name, str) or not _DESIGN_NAME.fullmatch(name):
            problems.add(f"{path}.name", f"required: 1 to 40 {DESIGN_NAME_CHARACTERS}", name)
            continue
        if name in seen:
            problems.add(f"{path}.name", "must be unique (and not 'case', the name of the "
                         "case's own [feedforward])", name)
            continue
        seen.add(name)
        overrides = {key: sub for key, sub in item.items() if key != "name"}
        spec = _read_feedforward(problems, _merged_feedforward(base, overrides),
                                 f"design.{name}")
        if spec is not None:
            designs.append(DesignSpec(name, spec))
    return tuple(designs) if len(problems) == before else None


def _read_sensor(problems: Problems, value: object, path: str = "sensor") -> SensorModel | None:
    table = _section(problems, path, value)
    if table is None:
        return None
    before = len(problems)
    table.check_keys(("time_constant", "noise_std"))
    time_constant = table.number("time_constant", 0.0, minimum=0.0)
    noise_std = table.number("noise_std", 0.0, minimum=0.0)
    if len(problems) > before:
        return None
    return SensorModel(time_constant, noise_std)  # type: ignore[arg-type]


def _read_signals(problems: Problems, value: object) -> Signals | None:
    table = _section(problems, "signals", value)
    if table is None:
        return None
    before = len(problems)
    default = Signals()
    names = tuple(default.__dataclass_fields__)
    table.check_keys(names)
    signals: dict[str, Signal] = {}
    for name in names:
        fallback: Signal = getattr(default, name)
        sub = _section(problems, f"signals.{name}", table.raw.get(name, {}))
        if sub is None:
            continue
        spanned = name in _SPANNED_SIGNALS
        keys = ("name", "unit", "range") if spanned else ("name", "unit")
        sub.check_keys((*keys, "band") if name == "controlled" else keys)
        label = sub.text("name", fallback.name)
        unit = sub.text("unit", fallback.unit)
        span = _read_range(problems, sub, name) if spanned and sub.has("range") else None
        if label is not None and not label.strip():
            problems.add(f"signals.{name}.name", "must not be empty", label)
        band = sub.number("band", None, positive=True, what="the allowed deviation from the "
                          "setpoint, CV units") if name == "controlled" else None
        if label is not None and unit is not None:
            signals[name] = Signal(label, unit, span, band)
    return Signals(**signals) if len(problems) == before else None


#: Signals with a span (``range``): what a gain in %/% or a proportional band is relative to.
_SPANNED_SIGNALS = ("controlled", "output")


def _read_range(problems: Problems, sub: Table, name: str) -> tuple[float, float] | None:
    values = sub.numbers("range", 2, "[low, high]")
    if values is None:
        return None
    if not values[0] < values[1]:
        problems.add(f"signals.{name}.range", "must be [low, high] with low < high (the "
                     "values at 0 % and 100 % of the span)", list(values))
        return None
    return values[0], values[1]


def _check_spans(problems: Problems, feedback: FeedbackSpec, signals: Signals) -> None:
    """A proportional band needs the spans it is relative to."""
    if feedback.proportional_band is None:
        return
    missing = []
    if signals.controlled.range is None:
        missing.append("[signals.controlled] range")
    if signals.output.range is None and signals.output.unit.strip() != "%":
        missing.append("[signals.output] range (the output is not in %)")
    if missing:
        problems.add("feedback.proportional_band", "is relative to the signals' spans: add "
                     + " and ".join(missing), feedback.proportional_band)


def _read_simulation(problems: Problems, raw: dict[str, Any]) -> SimulationSpec | None:
    if "simulation" not in raw:
        return None
    table = _section(problems, "simulation", raw["simulation"])
    if table is None:
        return None
    before = len(problems)
    table.check_keys(("duration", "step", "substeps"))
    # with a recorded trace the window may be left out: it then covers the record(s)
    duration = table.number("duration", math.nan if has_record_events(raw) else REQUIRED,
                            positive=True, what=f"the simulated window, {_UNIT}")
    step = table.number("step", positive=True, what=f"the controller's scan period, {_UNIT}")
    substeps = table.integer("substeps", 1, 1, 1000)
    if duration is not None and step is not None:
        if duration <= step:
            problems.add("simulation.duration", f"must be longer than the step ({step:g})",
                         duration)
        elif duration / step > MAX_STEPS:
            problems.add(
                "simulation.step",
                f"gives {duration / step:,.0f} samples in the window; at most {MAX_STEPS:,} are "
                "allowed (use a longer step or a shorter duration)",
                step,
            )
        elif substeps is not None and duration / step * substeps > MAX_STEPS:
            problems.add(
                "simulation.substeps",
                f"gives {duration / step * substeps:,.0f} internal steps in the window; at most "
                f"{MAX_STEPS:,} are allowed (fewer substeps, or a shorter duration)",
                substeps,
            )
    if len(problems) > before or duration is None or step is None or substeps is None:
        return None
    return SimulationSpec(duration, step, substeps)


def _read_events(
    problems: Problems, raw: dict[str, Any], simulation: SimulationSpec | None,
    base_dir: Path | None = None, time_unit: str | None = None,
) -> tuple[Event, ...] | None:
    value = raw.get("event")
    if value is None:
        problems.add("event", "missing: at least one [[event]] is required (what happens in the "
                     "window, e.g. kind = \"disturbance-step\")")
        return None
    if isinstance(value, dict):
        problems.add("event", "must be written [[event]] (with double brackets), one per event",
                     value)
        return None
    if not isinstance(value, list) or not value:
        problems.add("event", "must be one or more [[event]] tables", value)
        return None
    before = len(problems)
    events = [_read_event(problems, index, item, simulation, base_dir, time_unit)
              for index, item in enumerate(value)]
    if len(problems) > before:
        return None
    return tuple(event for event in events if event is not None)


def _read_event(
    problems: Problems, index: int, value: object, simulation: SimulationSpec | None,
    base_dir: Path | None = None, time_unit: str | None = None,
) -> Event | None:
    path = f"event[{index + 1}]"
    table = _section(problems, path, value)
    if table is None:
        return None
    before = len(problems)
    kind = table.text("kind", choices=EVENT_KINDS)
    if kind == "disturbance-record":
        table.check_keys(RECORD_KEYS, "for kind = 'disturbance-record'")
        at = table.number("at", 0.0, minimum=0.0, what=f"the start time, {_UNIT}")
        if at is not None and simulation is not None and at >= simulation.duration:
            problems.add(join(path, "at"), f"must lie inside the simulated window 0 .. "
                         f"{simulation.duration:g}", at)
            return None
        event = read_record_event(problems, table, at, base_dir, time_unit)
        name = _event_disturbance(problems, table)
        return None if event is None else replace(event, disturbance=name)
    allowed = ["kind", "at", "size", "disturbance"]
    if kind == "disturbance-ramp":
        allowed.append("duration")
    if kind == "disturbance-noise":
        allowed.append("time_constant")
    table.check_keys(allowed, f"for kind = {kind!r}" if kind else "")
    at = table.number("at", minimum=0.0, what=f"the start time, {_UNIT}")
    size = table.number("size", positive=kind == "disturbance-noise")
    duration = time_constant = 0.0
    if kind == "disturbance-ramp":
        duration = table.number("duration", positive=True, what=f"the ramp time, {_UNIT}")  # type: ignore[assignment]
    if kind == "disturbance-noise":
        time_constant = table.number(  # type: ignore[assignment]
            "time_constant", positive=True, what=f"the noise filter time constant, {_UNIT}"
        )
    if at is not None and simulation is not None and at >= simulation.duration:
        problems.add(join(path, "at"), f"must lie inside the simulated window 0 .. "
                     f"{simulation.duration:g}", at)
    name = _event_disturbance(problems, table)
    if len(problems) > before or kind is None or at is None or size is None:
        return None
    return Event(kind, at, size, duration, time_constant, disturbance=name)


def _event_disturbance(problems: Problems, table: Table) -> str:
    """The ``disturbance`` key of an event (``""`` when not given)."""
    name = table.text("disturbance", "")
    return name or ""


def _read_study(problems: Problems, value: object) -> StudySpec | None:
    table = _section(problems, "study", value)
    if table is None:
        return None
    before = len(problems)
    default = StudySpec()
    table.check_keys(("samples", "seed", "sampling"))
    samples = table.integer("samples", default.samples, MIN_SAMPLES, MAX_SAMPLES)
    seed = table.integer("seed", default.seed, 0, MAX_SEED)
    sampling = table.text("sampling", default.sampling, SAMPLING_PLANS)
    if len(problems) > before:
        return None
    return StudySpec(samples, seed, sampling)  # type: ignore[arg-type]


def _read_recommendation(problems: Problems, value: object) -> RecommendationSpec | None:
    table = _section(problems, "recommendation", value)
    if table is None:
        return None
    before = len(problems)
    default = RecommendationSpec()
    table.check_keys(("max_harm", "min_improvement"))
    values = []
    for key, fallback in (("max_harm", default.max_harm),
                          ("min_improvement", default.min_improvement)):
        value = table.number(key, fallback, minimum=0.0, what="a fraction 0 .. 1")
        if value is not None and value > 1.0:
            problems.add(join("recommendation", key),
                         "must be a fraction 0 .. 1 (0.01 means 1 %)", value)
        values.append(value)
    if len(problems) > before:
        return None
    return RecommendationSpec(*values)  # type: ignore[arg-type]
