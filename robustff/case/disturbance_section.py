"""Reading named disturbances, ``[disturbance.NAME]``, and their ``[feedforward.NAME]`` overrides.

A case has either the single ``[disturbance]`` table (one measured disturbance, its transmitter
in ``[sensor]``) or one ``[disturbance.NAME]`` table per disturbance::

    [disturbance.feed_flow]
    model = "fopdt"
    gain = -0.8
    time_constant = 12.0
    unit = "m3/h"
    [disturbance.feed_flow.sensor]
    time_constant = 1.0
    noise_std = 0.05

    [disturbance.upstream_solids]
    model = "fopdt"
    gain = 0.3
    time_constant = 30.0
    measured = false          # no transmitter: feedback must handle it alone

``[feedforward]`` applies to every measured disturbance; ``[feedforward.NAME]`` overrides its keys
for one of them.
"""

from __future__ import annotations

import re
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

from robustff.case.fields import Problems, join
from robustff.case.schema import DISTURBANCE_NAME_CHARACTERS, DisturbanceInput, FeedforwardSpec
from robustff.plant.kinds import ALL_PARAMETERS
from robustff.plant.models import SensorModel, TransferModel

__all__ = ["NamedDisturbances", "is_named_form", "read_named_disturbances",
           "split_feedforward", "DISTURBANCE_KEYS"]

#: Keys of a ``[disturbance.NAME]`` table besides its model's.
DISTURBANCE_KEYS: tuple[str, ...] = ("measured", "unit", "sensor")
_NAME = re.compile(r"[A-Za-z][A-Za-z0-9_]{0,39}")
# Names that would read like a parameter key of the single-table form.
_RESERVED = frozenset({"model", "sensor", *ALL_PARAMETERS, *DISTURBANCE_KEYS})

ModelReader = Callable[[Problems, dict[str, Any], str], TransferModel | None]
SensorReader = Callable[[Problems, object, str], SensorModel | None]
FeedforwardReader = Callable[[Problems, object, str], FeedforwardSpec | None]


@dataclass(frozen=True)
class NamedDisturbances:
    """What :func:`read_named_disturbances` read: the inputs, and the names in file order."""

    inputs: tuple[DisturbanceInput, ...]

    @property
    def names(self) -> tuple[str, ...]:
        return tuple(item.name for item in self.inputs)


def is_named_form(value: object) -> bool:
    """True when ``[disturbance]`` holds ``[disturbance.NAME]`` tables rather than a model."""
    return (isinstance(value, dict) and bool(value) and "model" not in value
            and all(isinstance(sub, dict) for sub in value.values()))


def split_feedforward(value: object, names: tuple[str, ...]) -> tuple[object, dict[str, Any]]:
    """``[feedforward]`` without its ``[feedforward.NAME]`` tables, and those tables by name.

    Sub-tables whose key is not a disturbance name stay in the first part (the feedforward's
    own reader then reports them as unknown keys).
    """
    if not isinstance(value, dict):
        return value, {}
    base = {key: sub for key, sub in value.items()
            if not (isinstance(sub, dict) and key in names)}
    overrides = {key: sub for key, sub in value.items()
                 if isinstance(sub, dict) and key in names}
    return base, overrides


def read_named_disturbances(
    problems: Problems, raw: dict[str, Any], read_model: ModelReader, read_sensor: SensorReader,
    read_feedforward: FeedforwardReader, merge: Callable[[dict[str, Any], dict[str, Any]],
                                                         dict[str, Any]],
) -> NamedDisturbances | None:
    """The ``[disturbance.NAME]`` tables of ``raw`` (which :func:`is_named_form` accepted).

    Parameters
    ----------
    problems : Problems
    raw : dict
        The whole case as parsed TOML.
    read_model, read_sensor, read_feedforward
        The loader's readers of a model table, a transmitter table and a feedforward table,
        each called with the table's key path so that problems name it.
    merge
        ``merge(base, override)``: the ``[feedforward]`` keys a ``[feedforward.NAME]`` table
        inherits, with its own on top.

    Returns
    -------
    NamedDisturbances or None
        None when any problem was recorded.
    """
    before = len(problems)
    tables: dict[str, dict[str, Any]] = raw["disturbance"]
    if "sensor" in raw:
        problems.add("sensor", "with named disturbances give each its transmitter as "
                     "[disturbance.NAME.sensor]")
    base, overrides = split_feedforward(raw.get("feedforward", {}), tuple(tables))
    inputs = []
    for name, table in tables.items():
        path = f"disturbance.{name}"
        if not _NAME.fullmatch(name) or name in _RESERVED:
            problems.add(path, f"a disturbance name is 1 to 40 {DISTURBANCE_NAME_CHARACTERS}, "
                         "starting with a letter, and not a parameter name such as 'gain'", name)
            continue
        item = _read_one(problems, path, name, table, read_model, read_sensor)
        if item is None:
            continue
        if name in overrides:
            if not item.measured:
                problems.add(f"feedforward.{name}", "the disturbance is not measured "
                             "(measured = false): there is no feedforward from it")
                continue
            base_table = base if isinstance(base, dict) else {}
            spec = read_feedforward(problems, merge(dict(base_table), overrides[name]),
                                    f"feedforward.{name}")
            item = DisturbanceInput(item.name, item.model, item.sensor, item.measured, spec,
                                    item.unit)
        inputs.append(item)
    if len(problems) > before:
        return None
    return NamedDisturbances(tuple(inputs))


def _read_one(problems: Problems, path: str, name: str, table: dict[str, Any],
              read_model: ModelReader, read_sensor: SensorReader) -> DisturbanceInput | None:
    before = len(problems)
    model_table = {key: value for key, value in table.items() if key not in DISTURBANCE_KEYS}
    model = read_model(problems, {path: model_table}, path)
    measured = table.get("measured", True)
    if not isinstance(measured, bool):
        problems.add(join(path, "measured"), "must be true or false", measured)
    unit = table.get("unit", "")
    if not isinstance(unit, str):
        problems.add(join(path, "unit"), "must be text, e.g. \"m3/h\"", unit)
    sensor: SensorModel | None = SensorModel()
    if "sensor" in table:
        if measured is False:
            problems.add(join(path, "sensor"), "the disturbance is not measured "
                         "(measured = false): it has no transmitter")
        else:
            sensor = read_sensor(problems, table["sensor"], join(path, "sensor"))
    if len(problems) > before or model is None or sensor is None:
        return None
    return DisturbanceInput(name, model, sensor, bool(measured), None, str(unit))
