"""Reading a plant built from material and energy balances: ``[process] model = "..."``.

The ``[process]`` table names the plant kind and gives its physical parameters and operating
point (see ``docs/balance-plants.md``); the plant's disturbances are its own inputs, named by
``disturbance = "NAME"`` in step and ramp events and listed as measured (seen by the
feedforward) in ``measured``. The case's ``process`` and ``disturbance`` models are the
linearisation at the nominal operating point, so the tuning rules, the linear feedforward
designs and the stability margins work on them unchanged; the simulation runs the nonlinear
balances. Private helpers of :mod:`robustff.case.loader`, which calls them in a few lines.
"""

from __future__ import annotations

import itertools
import math
from dataclasses import replace
from typing import Any

from robustff.case.balance_spec import BalanceSpec
from robustff.case.fields import REQUIRED, Problems, Table, show
from robustff.case.schema import (
    DisturbanceInput,
    Event,
    FeedbackSpec,
    FeedforwardSpec,
    Signal,
    Signals,
)
from robustff.case.uncertainty_section import support
from robustff.plant.balance_kinds import BALANCE_KINDS, balance_kind_names
from robustff.plant.balance_plant import BalancePlant
from robustff.plant.models import SensorModel

__all__ = ["is_balance_process", "read_balance_process", "balance_feedback", "balance_signals",
           "balance_disturbances",
           "check_balance_case", "check_operating_range", "refuse_balance_keys",
           "BALANCE_EVENT_KINDS"]

#: Event kinds a balance plant runs (recorded traces are not yet simulated on balance plants).
BALANCE_EVENT_KINDS: tuple[str, ...] = ("disturbance-step", "disturbance-ramp",
                                        "disturbance-noise", "setpoint-step")
#: Tables a balance plant has no use for, and why.
_NOT_WITH_BALANCE = {
    "disturbance": "the disturbances of a balance plant are its own inputs: name them in "
                   "events (disturbance = \"NAME\") and list the measured ones in [process] "
                   "measured",
    "valve": "the controller output of a balance plant is the manipulated flow's setpoint (an "
             "ideal flow loop); a [valve] is not yet simulated on balance plants",
    "secondary": "the controller output of a balance plant is the manipulated flow's setpoint; "
                 "a [secondary] loop is not yet simulated on balance plants",
}


def is_balance_process(value: object) -> bool:
    """Whether a raw ``[process]`` table names a balance plant kind."""
    model = value.get("model") if isinstance(value, dict) else None
    return isinstance(model, str) and model in BALANCE_KINDS


def read_balance_process(problems: Problems, value: dict[str, Any]) -> BalanceSpec | None:
    """The balance plant of a ``[process]`` table (None with the problems recorded)."""
    table = Table(problems, "process", value)
    before = len(problems)
    kind = BALANCE_KINDS[value["model"]]
    names = kind.parameter_names()
    table.check_keys(("model", *names, "measured"), f"for model = {kind.KIND!r}")
    numbers: dict[str, float] = {}
    for parameter in kind.PARAMETERS:
        number = table.number(parameter.name, REQUIRED if parameter.required else 0.0,
                              what=f"{parameter.meaning}, {parameter.unit}")
        if number is None:
            continue
        why = parameter.violation(number)
        if why is not None:
            problems.add(f"process.{parameter.name}", f"{why} ({parameter.meaning})", number)
            continue
        numbers[parameter.name] = number
    measured = _read_measured(problems, table, kind)
    if len(problems) > before or measured is None:
        return None
    plant = kind(**numbers)
    if not _operating_point_problem(problems, plant, "process"):
        return None
    return BalanceSpec(plant, measured)


def _read_measured(problems: Problems, table: Table, kind: type[BalancePlant]
                   ) -> tuple[str, ...] | None:
    if not table.has("measured"):
        return kind.DISTURBANCES
    value = table.raw["measured"]
    names = ", ".join(repr(name) for name in kind.DISTURBANCES)
    if not isinstance(value, list) or not all(isinstance(item, str) for item in value):
        problems.add("process.measured", f"must be a list of the plant's inputs the feedforward "
                     f"sees (some of {names}; [] for none)", value)
        return None
    unknown = [item for item in value if item not in kind.DISTURBANCES]
    if unknown:
        problems.add("process.measured", f"a {kind.KIND} has the disturbance inputs {names}",
                     unknown[0])
        return None
    if len(set(value)) != len(value):
        problems.add("process.measured", "lists an input twice", value)
        return None
    return tuple(name for name in kind.DISTURBANCES if name in value)


def _operating_point_problem(problems: Problems, plant: BalancePlant, path: str,
                             where: str = "") -> bool:
    """Record a problem when the plant has no positive manipulated flow at its operating point
    (True when it has one)."""
    try:
        flow = plant.operating_inputs()[plant.MANIPULATED]
    except ZeroDivisionError:
        flow = math.nan
    if math.isfinite(flow) and flow > 0.0:
        return True
    setpoint = plant.SETPOINT
    problems.add(f"{path}.{setpoint}", f"no positive {plant.MANIPULATED} holds the "
                 f"{setpoint} at this value{where}: the balance gives {flow:g} "
                 f"({_reach_hint(plant)})", plant.setpoint())
    return False


def _reach_hint(plant: BalancePlant) -> str:
    if plant.KIND == "blending-tank":
        return ("the outlet composition must lie strictly between the wild stream's and the "
                "manipulated stream's")
    return "the outlet temperature must be above the inlet temperature"


def balance_feedback(problems: Problems, value: object, spec: BalanceSpec,
                     feedback: FeedbackSpec | None) -> FeedbackSpec | None:
    """The feedback settings with the output bias set to the steady manipulated flow.

    The controller output of a balance plant is the manipulated flow's setpoint in its flow
    unit: ``output_high`` (the largest flow) is required, ``output_low`` is at least 0 and the
    bias is the steady state, so it may not be given.
    """
    if feedback is None:
        return None
    raw = value if isinstance(value, dict) else {}
    plant = spec.plant
    flow = plant.operating_inputs()[plant.MANIPULATED]
    before = len(problems)
    if "output_bias" in raw:
        problems.add("feedback.output_bias", f"set by the operating point for a balance plant "
                     f"(the steady {plant.MANIPULATED}, {flow:.6g}); remove it", raw["output_bias"])
    if "output_high" not in raw:
        problems.add("feedback.output_high", f"missing key (for a balance plant the controller "
                     f"output is the {plant.MANIPULATED} setpoint: give the largest flow, in the "
                     "flow unit)")
    if feedback.output_low < 0.0:
        problems.add("feedback.output_low", "must be >= 0 (a flow setpoint)", feedback.output_low)
    if len(problems) == before and not feedback.output_low <= flow <= feedback.output_high:
        problems.add("feedback.output_high", f"the steady {plant.MANIPULATED} at the operating "
                     f"point ({flow:.6g}) must lie within output_low .. output_high "
                     f"({feedback.output_low:g} .. {feedback.output_high:g})",
                     feedback.output_high)
    if len(problems) > before:
        return None
    return replace(feedback, output_bias=flow)


def balance_signals(problems: Problems, value: object, spec: BalanceSpec,
                    signals: Signals | None, time_unit: str | None) -> Signals | None:
    """The signals with the plant's names and units where the case leaves them out.

    A unit that differs from the plant's is a problem: the balances fix them.
    """
    if signals is None or time_unit is None:
        return signals
    raw = value if isinstance(value, dict) else {}
    plant = spec.plant
    given = {
        "controlled": plant.OUTPUT, "output": plant.MANIPULATED,
        "disturbance": spec.feedforward_input,
    }
    result: dict[str, Signal] = {}
    for slot, signal_name in given.items():
        current: Signal = getattr(signals, slot)
        sub = raw.get(slot, {}) if isinstance(raw.get(slot, {}), dict) else {}
        unit = plant.signal_unit(signal_name, time_unit)
        name = current.name if "name" in sub else plant.SIGNAL_NAMES[signal_name]
        if "unit" in sub and current.unit != unit:
            problems.add(f"signals.{slot}.unit", f"the {plant.KIND} gives this signal in "
                         f"{unit!r}; remove the unit or write it so", current.unit)
        result[slot] = Signal(name, unit, current.range, current.band)
    return Signals(**result)


def check_balance_case(problems: Problems, raw: dict[str, Any], spec: BalanceSpec,
                       feedforward: FeedforwardSpec | None,
                       events: tuple[Event, ...] | None,
                       designs: tuple[Any, ...] | None = None) -> None:
    """What a balance plant cannot have: other path tables, a valve, transmitter noise, events
    without a plant input, a compensator delay."""
    for table, why in _NOT_WITH_BALANCE.items():
        if table in raw:
            problems.add(table, why, raw[table])
    sensor = raw.get("sensor")
    if isinstance(sensor, dict) and sensor.get("noise_std", 0.0) not in (0, 0.0):
        problems.add("sensor.noise_std", "transmitter noise is not yet simulated on balance "
                     "plants (the measured inputs have different units); remove it",
                     sensor["noise_std"])
    specs = [("feedforward", feedforward)] + [(f"design.{d.name}", d.feedforward)
                                              for d in designs or ()]
    for path, ff in specs:
        if ff is not None and ff.structure == "lead-lag-delay":
            problems.add(f"{path}.structure", "the paths of a balance plant share their dead "
                         "time (the pipe and the measurement), so the designed delay is zero: "
                         "use 'static' or 'lead-lag'", ff.structure)
    for index, event in enumerate(events or ()):
        _check_event(problems, index, event, spec.plant)


def _check_event(problems: Problems, index: int, event: Event, plant: BalancePlant) -> None:
    path = f"event[{index + 1}]"
    names = ", ".join(repr(name) for name in plant.DISTURBANCES)
    if event.kind not in BALANCE_EVENT_KINDS:
        problems.add(f"{path}.kind", "not yet simulated on balance plants (use "
                     f"{', '.join(repr(k) for k in BALANCE_EVENT_KINDS)})", event.kind)
    elif event.kind != "setpoint-step" and not event.disturbance:
        problems.add(f"{path}.disturbance", f"missing key (which input of the {plant.KIND} "
                     f"the event moves: one of {names})")
    elif event.disturbance and event.disturbance not in plant.DISTURBANCES:
        problems.add(f"{path}.disturbance", f"a {plant.KIND} has the disturbance inputs {names}",
                     event.disturbance)


def refuse_balance_keys(problems: Problems, feedforward: FeedforwardSpec | None,
                        designs: tuple[Any, ...] | None) -> None:
    """Keys that need a balance plant, in a case with transfer-function models."""
    kinds = ", ".join(repr(name) for name in balance_kind_names())
    specs = [("feedforward", feedforward)] + [(f"design.{d.name}", d.feedforward)
                                              for d in designs or ()]
    for path, spec in specs:
        if spec is not None and spec.law == "balance":
            problems.add(f"{path}.law", f"the balance law needs a plant built from balances "
                         f"([process] model = {kinds})", spec.law)


def balance_disturbances(spec: BalanceSpec, sensor: SensorModel,
                         time_unit: str | None) -> tuple[DisturbanceInput, ...]:
    """The plant's disturbance inputs as the case's disturbances: each with its path
    linearised at the nominal operating point, the one transmitter lag of ``[sensor]``,
    whether it is measured and its unit."""
    plant = spec.plant
    paths = spec.paths()
    return tuple(DisturbanceInput(name, paths[name], sensor, name in spec.measured, None,
                                  plant.signal_unit(name, time_unit or ""))
                 for name in plant.DISTURBANCES)


def check_operating_range(problems: Problems, spec: BalanceSpec,
                          uncertainty: tuple[Any, ...] | None,
                          events: tuple[Event, ...] | None,
                          feedback: FeedbackSpec | None = None) -> None:
    """Every sampled plant must have a steady state with a positive manipulated flow within
    the controller's output range, and its flows must stay positive through the events.

    The balances are monotonic in each parameter over the region where the steady state exists,
    so the corners of the uncertain parameters' ranges bound it.
    """
    if uncertainty is None:
        return
    plant = spec.plant
    ranges: dict[str, tuple[float, float]] = {}
    for parameter in uncertainty:
        if parameter.block != "process":
            continue
        low, high = support(parameter.distribution, plant.parameters()[parameter.parameter])
        if not (math.isfinite(low) and math.isfinite(high)):
            problems.add(f"uncertainty.{parameter.key}", "a balance plant's parameter needs a "
                         "bounded distribution (add clip = [low, high]): every sampled plant "
                         "must have a steady state")
            return
        ranges[parameter.parameter] = (low, high)
    for corner in itertools.product(*ranges.values()):
        values = dict(zip(ranges, corner, strict=True))
        sample = replace(plant, **values)
        where = " at " + ", ".join(f"{key} = {show(v)}" for key, v in values.items())
        if not _operating_point_problem(problems, sample, "uncertainty.process", where):
            return
        flow = sample.operating_inputs()[plant.MANIPULATED]
        if feedback is not None and not feedback.output_low <= flow <= feedback.output_high:
            problems.add("feedback.output_high", f"a sampled plant needs a steady "
                         f"{plant.MANIPULATED} of {flow:.6g}{where}, outside output_low .. "
                         f"output_high ({feedback.output_low:g} .. {feedback.output_high:g}): "
                         "widen the range or narrow the uncertainty", feedback.output_high)
            return
    _check_event_flows(problems, spec, ranges, events or ())


def _check_event_flows(problems: Problems, spec: BalanceSpec,
                       ranges: dict[str, tuple[float, float]], events: tuple[Event, ...]) -> None:
    """A flow input may not be stepped or ramped to zero or below, at any sampled value."""
    plant = spec.plant
    for name in plant.DISTURBANCES:
        if not plant.SIGNAL_UNITS[name].startswith("kg/"):
            continue
        lowest = ranges.get(name, (plant.parameters()[name],) * 2)[0]
        change = 0.0
        for index, event in sorted(enumerate(events), key=lambda item: item[1].at):
            if event.disturbance != name or event.kind == "disturbance-noise":
                continue
            change += event.size
            if lowest + change <= 0.0:
                problems.add(f"event[{index + 1}].size", f"takes the {name} to "
                             f"{lowest + change:g} (from its lowest sampled value {lowest:g}): "
                             "a flow must stay above zero", event.size)
                return
