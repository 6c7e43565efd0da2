"""Several disturbances edited in the studio: add, remove, rename, measured or not, unit.

Every function here is a pure function of a :class:`~robustff.case.Case`: it returns the new
case, validated by the loader (:func:`robustff.tui.editing.validated`), and the notes the
engineer should read about what else changed. Nothing here imports Textual.

A case with the single ``[disturbance]`` table has one unnamed disturbance. Adding a second one
converts the case to the named form first (:func:`named_form`): the first disturbance is named
after ``[signals.disturbance] name`` (slugified), else ``disturbance_1``, and its uncertainty
keys, correlations and events follow the name.

Removing a disturbance also removes what names it (its events, its uncertainty rows and the
correlations naming them; its ``[feedforward.NAME]`` override goes with the table) and says so;
it is refused, with the reason, when it would leave the case without a disturbance or without
an event.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, replace

from robustff.case import Case, Correlation, DisturbanceInput, UncertainParameter
from robustff.case.schema import DISTURBANCE_NAME_CHARACTERS
from robustff.errors import CaseError
from robustff.plant.kinds import ALL_PARAMETERS
from robustff.plant.models import SensorModel, TransferModel
from robustff.tui.editing import EDIT_SOURCE, validated

__all__ = [
    "DisturbanceEdit",
    "SETTINGS",
    "FIRST_NAME",
    "slug_name",
    "named_form",
    "add_disturbance",
    "remove_disturbance",
    "removal_effects",
    "rename_disturbance",
    "set_measured",
    "set_unit",
    "is_setting",
    "setting_text",
    "edit_setting",
]

#: The per-disturbance settings the studio edits besides the model's numbers, as the last part
#: of a field name ``disturbance.NAME.<setting>`` (no model parameter has these names).
SETTINGS: tuple[str, ...] = ("name", "unit", "measured")
#: Name of the first disturbance when the case converts to the named form and
#: ``[signals.disturbance] name`` gives no usable name.
FIRST_NAME = "disturbance_1"

_NAME = re.compile(r"[A-Za-z][A-Za-z0-9_]{0,39}")
# names the loader refuses (they would read like a key of the single-table form)
_RESERVED = frozenset({"model", "sensor", "measured", "unit", *ALL_PARAMETERS})


@dataclass(frozen=True)
class DisturbanceEdit:
    """A changed case and what the engineer should be told about it.

    Attributes
    ----------
    case : Case
        Validated by the loader.
    notes : tuple of str
        What else changed (rows removed, the case converted to named disturbances...).
    """

    case: Case
    notes: tuple[str, ...] = ()


def _refused(path: str, reason: str) -> CaseError:
    return CaseError(f"{EDIT_SOURCE}: {path}: {reason}")


def slug_name(text: str) -> str:
    """A disturbance name made from free text (``"cold-water flow"`` -> ``"cold_water_flow"``).

    Returns ``""`` when nothing usable is left (no letter to start with, or a reserved word).
    """
    slug = re.sub(r"[^a-z0-9]+", "_", text.strip().lower()).strip("_")
    slug = re.sub(r"^[^a-z]+", "", slug)[:40].rstrip("_")
    return slug if _NAME.fullmatch(slug) and slug not in _RESERVED else ""


def _check_name(case: Case, name: str, path: str, own: str | None = None) -> None:
    if not _NAME.fullmatch(name) or name in _RESERVED:
        raise _refused(path, f"a disturbance name is 1 to 40 {DISTURBANCE_NAME_CHARACTERS}, "
                             f"starting with a letter, and not a parameter name such as 'gain' "
                             f"(got {name!r})")
    if name != own and name in {item.name for item in case.disturbances}:
        raise _refused(path, f"the case already has a disturbance called {name!r}")


def _renamed_key(key: str, old_prefixes: tuple[str, str], new_prefixes: tuple[str, str]) -> str:
    """An uncertainty key moved from one disturbance's prefixes to another's (sensor first:
    ``disturbance.NAME.sensor.x`` also starts with ``disturbance.NAME.``)."""
    for old, new in zip(old_prefixes, new_prefixes, strict=True):
        if key.startswith(old + "."):
            return new + key[len(old):]
    return key


def _with_keys_renamed(case: Case, old: DisturbanceInput, new: DisturbanceInput) -> Case:
    """Uncertainty rows and correlations of ``old`` keyed as ``new``'s."""
    olds = (old.sensor_prefix, old.key_prefix)
    news = (new.sensor_prefix, new.key_prefix)
    rows = tuple(UncertainParameter(_renamed_key(row.key, olds, news), row.distribution)
                 for row in case.uncertainty)
    correlations = tuple(Correlation(_renamed_key(c.first, olds, news),
                                     _renamed_key(c.second, olds, news), c.rank_correlation)
                         for c in case.correlations)
    return replace(case, uncertainty=rows, correlations=correlations)


def _with_inputs(case: Case, inputs: tuple[DisturbanceInput, ...]) -> Case:
    """The case holding ``inputs`` as its named disturbances (``disturbance`` and ``sensor``
    follow the first, as the loader sets them)."""
    return replace(case, disturbances=inputs, disturbance=inputs[0].model,
                   sensor=inputs[0].sensor)


def named_form(case: Case) -> DisturbanceEdit:
    """The case with its single ``[disturbance]`` table as one ``[disturbance.NAME]`` table.

    The name is ``[signals.disturbance] name`` slugified, else :data:`FIRST_NAME`; its unit is
    ``[signals.disturbance] unit``; the transmitter ``[sensor]`` becomes its own. Uncertainty
    keys (``disturbance.gain`` -> ``disturbance.NAME.gain``, ``sensor.noise_std`` ->
    ``disturbance.NAME.sensor.noise_std``), correlations and events follow. A case already in
    the named form is returned as it is.
    """
    if case.disturbances:
        return DisturbanceEdit(case)
    single = case.disturbance_inputs[0]
    signal = case.signals.disturbance
    name = slug_name(signal.name) if signal.name != "measured disturbance" else ""
    item = replace(single, name=name or FIRST_NAME, unit=signal.unit)
    converted = _with_keys_renamed(case, single, item)
    events = tuple(event if event.kind == "setpoint-step" else replace(event,
                   disturbance=item.name) for event in converted.events)
    converted = replace(_with_inputs(converted, (item,)), events=events)
    note = (f"the case now names its disturbances: the first is {item.name!r} "
            f"([disturbance.{item.name}]; its uncertainty keys and events follow)")
    return DisturbanceEdit(validated(converted), (note,))


def _unique_name(case: Case) -> str:
    taken = {item.name for item in case.disturbances}
    number = len(taken) + 1
    while f"disturbance_{number}" in taken:
        number += 1
    return f"disturbance_{number}"


def _default_model(case: Case) -> TransferModel:
    """A starting FOPDT: gain 1 CV unit per disturbance unit, with the first disturbance's lag
    and dead time (its dynamics are the likeliest guess for a neighbouring disturbance)."""
    first = case.disturbance_inputs[0].model
    lag = sum(first.lags) if not first.integrating else case.process.time_constant
    if lag <= 0.0:
        lag = 10.0 * case.simulation.step  # some lag: an instantaneous path is rarely right
    return TransferModel("fopdt", 1.0, float(lag), 0.0, float(first.dead_time))


def add_disturbance(case: Case) -> DisturbanceEdit:
    """The case with one more, measured, disturbance: a default FOPDT (see
    :func:`_default_model`), a unique name ``disturbance_N`` and a transmitter without lag or
    noise. A case with the single ``[disturbance]`` table is converted first
    (:func:`named_form`). No event moves the new disturbance yet."""
    converted = named_form(case)
    base = converted.case
    name = _unique_name(base)
    item = DisturbanceInput(name, _default_model(base))
    added = validated(_with_inputs(base, (*base.disturbances, item)))
    model = item.model
    note = (f"added {name!r}: FOPDT, gain {model.gain:g} "
            f"{added.parameter_unit(f'disturbance.{name}.gain')}, lag "
            f"{model.time_constant:g} {case.time_unit}, dead time {model.dead_time:g} "
            f"{case.time_unit}, measured; set its model from a bump test. No event moves it "
            "yet (events are edited in the case file)")
    return DisturbanceEdit(added, (*converted.notes, note))


def _item(case: Case, name: str) -> DisturbanceInput:
    for item in case.disturbances:
        if item.name == name:
            return item
    raise _refused(f"disturbance.{name}", "no disturbance of that name (the case has "
                   f"{', '.join(item.name for item in case.disturbance_inputs)})")


def _names_it(item: DisturbanceInput, key: str) -> bool:
    return key.startswith(item.key_prefix + ".")


def removal_effects(case: Case, name: str) -> tuple[str, ...]:
    """What removing disturbance ``name`` also removes, in words (empty: nothing else)."""
    item = _item(case, name)
    events = [index + 1 for index, event in enumerate(case.events)
              if event.kind != "setpoint-step" and event.disturbance == name]
    rows = [row.key for row in case.uncertainty if _names_it(item, row.key)]
    effects = []
    if events:
        effects.append(f"event{'s' if len(events) > 1 else ''} "
                       f"{', '.join(map(str, events))} (it moves {name})")
    if rows:
        effects.append(f"uncertain {', '.join(rows)}")
    pairs = [f"{c.first} ~ {c.second}" for c in case.correlations
             if _names_it(item, c.first) or _names_it(item, c.second)]
    if pairs:
        effects.append(f"the correlation{'s' if len(pairs) > 1 else ''} {', '.join(pairs)}")
    if item.feedforward is not None:
        effects.append(f"its [feedforward.{name}] override")
    return tuple(effects)


def remove_disturbance(case: Case, name: str) -> DisturbanceEdit:
    """The case without disturbance ``name``, its events, uncertainty rows, correlations naming
    them and its feedforward override.

    Raises
    ------
    CaseError
        When it is the case's last disturbance, or its events are the case's only events (a
        case needs at least one event).
    """
    path = f"disturbance.{name}"
    if not case.disturbances:
        raise _refused("disturbance", "the case has one disturbance; it cannot be removed "
                                      "(feedforward needs a disturbance to act on)")
    item = _item(case, name)
    if len(case.disturbances) == 1:
        raise _refused(path, "the case's last disturbance cannot be removed")
    events = tuple(event for event in case.events
                   if event.kind == "setpoint-step" or event.disturbance != name)
    if not events:
        raise _refused(path, "every event of the case moves it, and a case needs an event: "
                             "give another disturbance an event in the case file first")
    effects = removal_effects(case, name)
    rows = tuple(row for row in case.uncertainty if not _names_it(item, row.key))
    correlations = tuple(c for c in case.correlations
                         if not (_names_it(item, c.first) or _names_it(item, c.second)))
    inputs = tuple(other for other in case.disturbances if other.name != name)
    removed = replace(_with_inputs(case, inputs), events=events, uncertainty=rows,
                      correlations=correlations)
    notes = (f"removed {name!r}" + (f" with {', '.join(effects)}" if effects else "")
             + "; Ctrl+Z brings it back",)
    return DisturbanceEdit(validated(removed), notes)


def rename_disturbance(case: Case, name: str, new_name: str) -> DisturbanceEdit:
    """The case with disturbance ``name`` called ``new_name``; its events, uncertainty keys,
    correlations and feedforward override follow."""
    new_name = new_name.strip()
    item = _item(case, name)
    _check_name(case, new_name, f"disturbance.{name}.name", own=name)
    if new_name == name:
        return DisturbanceEdit(case)
    renamed = replace(item, name=new_name)
    changed = _with_keys_renamed(case, item, renamed)
    events = tuple(replace(event, disturbance=new_name) if event.disturbance == name else event
                   for event in changed.events)
    inputs = tuple(renamed if other.name == name else other for other in changed.disturbances)
    changed = replace(_with_inputs(changed, inputs), events=events)
    return DisturbanceEdit(validated(changed), (f"renamed {name!r} to {new_name!r}",))


def set_measured(case: Case, name: str, measured: bool) -> DisturbanceEdit:
    """The case with disturbance ``name`` measured or not.

    An unmeasured disturbance loses its transmitter (lag and noise), its transmitter's
    uncertainty rows (and correlations naming them) and its ``[feedforward.NAME]`` override:
    no feedforward comes from it. A disturbance made measured starts with a transmitter
    without lag or noise.
    """
    item = _item(case, name)
    if item.measured == measured:
        return DisturbanceEdit(case)
    if measured:
        changed = case.with_disturbance_input(name, replace(item, measured=True))
        return DisturbanceEdit(validated(changed), (
            f"{name!r} is measured: its transmitter starts without lag or noise",))
    dropped = [row.key for row in case.uncertainty if row.key.startswith(item.sensor_prefix)]
    rows = tuple(row for row in case.uncertainty if row.key not in dropped)
    correlations = tuple(c for c in case.correlations
                         if c.first not in dropped and c.second not in dropped)
    plain = replace(item, measured=False, sensor=SensorModel(), feedforward=None)
    changed = replace(case.with_disturbance_input(name, plain), uncertainty=rows,
                      correlations=correlations)
    gone = ["its transmitter"] + (["its [feedforward] override"] if item.feedforward else [])
    gone += [f"uncertain {key}" for key in dropped]
    gone += [f"the correlation {c.first} ~ {c.second}" for c in case.correlations
             if c not in correlations]
    return DisturbanceEdit(validated(changed), (
        f"{name!r} is not measured: feedback alone handles it; removed {', '.join(gone)}",))


def set_unit(case: Case, name: str, unit: str) -> DisturbanceEdit:
    """The case with the engineering unit of disturbance ``name`` set (free text)."""
    item = _item(case, name)
    unit = unit.strip()
    if '"' in unit or "\n" in unit:
        raise _refused(f"disturbance.{name}.unit", f"a unit is plain text (got {unit!r})")
    return DisturbanceEdit(validated(case.with_disturbance_input(name, replace(item, unit=unit))))


def _split_setting(case: Case, field: str) -> tuple[str, str] | None:
    parts = field.split(".")
    if (len(parts) == 3 and parts[0] == "disturbance" and parts[2] in SETTINGS
            and parts[1] in {item.name for item in case.disturbances}):
        return parts[1], parts[2]
    return None


def is_setting(case: Case, field: str) -> bool:
    """True for a field ``disturbance.NAME.name``, ``.unit`` or ``.measured`` of the case."""
    return _split_setting(case, field) is not None


def setting_text(case: Case, field: str) -> str:
    """The value of a setting field as the studio shows it (``measured``: ``yes`` or ``no``)."""
    found = _split_setting(case, field)
    if found is None:
        raise KeyError(field)
    name, setting = found
    item = _item(case, name)
    if setting == "measured":
        return "yes" if item.measured else "no"
    return item.name if setting == "name" else item.unit


def edit_setting(case: Case, field: str, text: str) -> DisturbanceEdit:
    """A setting field set from what was typed or chosen (see :func:`is_setting`)."""
    found = _split_setting(case, field)
    if found is None:
        raise _refused(field, "not a disturbance setting the studio edits")
    name, setting = found
    if setting == "name":
        return rename_disturbance(case, name, text)
    if setting == "unit":
        return set_unit(case, name, text)
    choice = text.strip().lower()
    if choice not in ("yes", "no"):
        raise _refused(field, f"must be yes or no (got {text!r})")
    return set_measured(case, name, choice == "yes")
