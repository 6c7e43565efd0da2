"""Write a :class:`robustff.case.Case` back to TOML, keeping the user's comments where possible.

Without an original text the case is written in the canonical form of ``docs/case-format.md``.
With one, the original document is parsed with tomlkit and only the values that changed are
rewritten, so comments, key order and number formatting survive; keys that hold their default
value and were absent from the original stay absent. The result is always read back and
compared with the case; if that fails the canonical form is written instead (with a warning).
"""

from __future__ import annotations

import os
from dataclasses import asdict, fields, replace
from pathlib import Path
from typing import Any

import tomlkit
from tomlkit.exceptions import TOMLKitError
from tomlkit.items import AoT, InlineTable, Item, Table

from robustff.atomic import write_text_atomic
from robustff.case.disturbance_section import is_named_form
from robustff.case.loader import parse_case
from robustff.case.record_section import covering_duration, records_folder
from robustff.case.schema import (
    DISTRIBUTION_KINDS,
    Case,
    Distribution,
    FeedbackSpec,
    FeedforwardSpec,
    RecommendationSpec,
    SecondarySpec,
    Signals,
    StudySpec,
)
from robustff.errors import CaseError
from robustff.plant.models import MODEL_PARAMETERS, SensorModel
from robustff.plant.valve import ValveModel

__all__ = ["case_to_toml", "save_case"]

_HEADER = "robustff case file (format: docs/case-format.md); every time is in time_unit"


def case_to_toml(case: Case, original_text: str | None = None) -> str:
    """The case as TOML text.

    Parameters
    ----------
    case : Case
    original_text : str, optional
        The text the case was loaded from; its comments and layout are kept where possible.

    Returns
    -------
    str
        Text that :func:`robustff.case.loader.parse_case` reads back to an equal case
        (for a valid case).
    """
    return _render(case, original_text)[0]


def save_case(case: Case, path: str | Path, original_text: str | None = None) -> list[str]:
    """Write a case file atomically (temporary file in the same folder, fsync, rename).

    Parameters
    ----------
    case : Case
    path : str or Path
        Destination; replaced in one step, so a reader never sees a half-written file.
    original_text : str, optional
        The previous text of the file, whose comments are kept where possible.

    Returns
    -------
    list of str
        Warnings for the user (for example when comments could not be kept).

    Raises
    ------
    CaseError
        If the case is not valid (it would not load again) or the file cannot be written.
    """
    path = Path(path)
    case = _records_from(case, path.parent)
    text, warnings = _render(case, original_text)
    # refuses to write a case that would not load (record files are read from the case's folder)
    reread = parse_case(text, source=str(path), base_dir=_record_folder(case, path))
    if reread != case:
        raise CaseError(f"{path}: the case holds values that a case file cannot express "
                        "(e.g. a ramp duration on a step event); nothing was written")
    _atomic_write(path, text)
    return warnings


def _atomic_write(path: Path, text: str) -> None:
    try:
        write_text_atomic(path, text)
    except OSError as exc:
        raise CaseError(f"{path}: cannot write the case file ({exc.strerror or exc})") from None


def _render(case: Case, original_text: str | None) -> tuple[str, list[str]]:
    """Text and warnings; merged into ``original_text`` when that works."""
    fresh = tomlkit.dumps(_fresh_document(case))
    if original_text is None:
        return fresh, []
    try:
        document = tomlkit.parse(original_text)
        _merge_document(document, _plain(case))
        merged = tomlkit.dumps(document)
    except (TOMLKitError, ValueError, TypeError, KeyError):
        return fresh, ["the original file could not be updated in place; comments will be dropped"]
    if _reads_back(merged, case):
        return merged, []
    return fresh, ["the original layout could not be kept; comments will be dropped"]


def _record_folder(case: Case, path: Path | None = None) -> Path | None:
    """Folder the case's relative record files were read from (else its file's, or ``path``'s)."""
    folder = records_folder(case)
    return folder if folder is not None or path is None else path.parent


def _records_from(case: Case, folder: Path) -> Case:
    """The case with relative record files named from ``folder`` (where it is being saved).

    Saving a case into another folder keeps its records readable: a relative ``file`` that
    would not lead from there to the file read is rewritten relative to the new folder.
    """
    events = []
    for event in case.events:
        record = event.record
        if (record is not None and not Path(record.spec.file).is_absolute()
                and (folder / record.spec.file).resolve() != record.path.resolve()):
            file = Path(os.path.relpath(record.path.resolve(), folder.resolve())).as_posix()
            record = replace(record, spec=replace(record.spec, file=file), path=folder / file)
            event = replace(event, record=record)
        events.append(event)
    return replace(case, events=tuple(events))


def _reads_back(text: str, case: Case) -> bool:
    try:
        return parse_case(text, base_dir=_record_folder(case)) == case
    except CaseError:
        return False


# --- the case as plain data -------------------------------------------------------------------


def _plain(case: Case) -> dict[str, Any]:
    """Nested dicts/lists in canonical key order (``None`` fields left out)."""
    if case.balance is not None:
        return _plain_balance(case)
    return {
        "title": case.title,
        "time_unit": case.time_unit,
        "process": _model(case.process),
        "disturbance": _disturbances(case),
        "feedback": _feedback(case.feedback),
        "feedforward": _dataclass(case.feedforward) | {
            item.name: _override(case.feedforward, item.feedforward)
            for item in case.disturbances if item.feedforward is not None},
    } | ({} if case.disturbances else {"sensor": _dataclass(case.sensor)}) | {
        "signals": {name: _dataclass(signal) for name, signal in _items(case.signals)},
        "simulation": _simulation(case),
        "event": [_event(event) for event in case.events],
        "uncertainty": _uncertainty(case),
        "study": _dataclass(case.study),
        "recommendation": _dataclass(case.recommendation),
    } | ({"design": [{"name": design.name} | _design_keys(case, design.feedforward)
                     for design in case.designs]} if case.designs else {}) | (
        {"valve": _valve(case.valve)} if case.valve is not None else {}) | (
        {"secondary": _secondary(case.secondary)} if case.secondary is not None else {})


def _design_keys(case: Case, spec: FeedforwardSpec) -> dict[str, Any]:
    """A design's keys that differ from the case's ``[feedforward]`` (the rest it inherits);
    a linear design's trim is left out (it can only add)."""
    own = _dataclass(case.feedforward)
    keys = {key: value for key, value in _dataclass(spec).items() if own.get(key) != value}
    if spec.law == "linear" and spec.trim == "add":
        keys.pop("trim", None)
    return keys


def _balance_signals(case: Case) -> dict[str, Any]:
    """The signals a balance plant's case gives beyond the plant's own names and units."""
    assert case.balance is not None
    plant, spec = case.balance.plant, case.balance
    defaults = {"controlled": plant.OUTPUT, "output": plant.MANIPULATED,
                "disturbance": spec.feedforward_input}
    out: dict[str, Any] = {}
    for slot, signal_name in defaults.items():
        signal = getattr(case.signals, slot)
        entry = {key: value for key, value in _dataclass(signal).items()
                 if key not in ("name", "unit")}
        if signal.name != plant.SIGNAL_NAMES[signal_name]:
            entry["name"] = signal.name
        if entry:
            out[slot] = entry
    return out


def _plain_balance(case: Case) -> dict[str, Any]:
    """A plant built from balances: its physical ``[process]``, no ``[disturbance]``, the
    controller without the output bias (the steady state sets it)."""
    assert case.balance is not None
    # The plant's inputs are its disturbances: written as the plant, not as [disturbance.NAME].
    plain = {key: value for key, value in
             _plain(replace(case, balance=None, disturbances=())).items()
             if key != "disturbance"}
    plant = case.balance.plant
    plain["process"] = {"model": plant.KIND, **plant.parameters(),
                        "measured": list(case.balance.measured)}
    plain["feedback"] = {key: value for key, value in plain["feedback"].items()
                         if key != "output_bias"}
    signals = _balance_signals(case)
    if signals:
        plain["signals"] = signals
    else:
        plain.pop("signals")
    return plain


def _secondary(spec: SecondarySpec) -> dict[str, Any]:
    """The path model's keys, then the controller's (keys that do not apply left out)."""
    out = _model(spec.model) | {"tuning": spec.tuning}
    for name in ("closed_loop_time", "kc", "ti"):
        if getattr(spec, name) is not None:
            out[name] = getattr(spec, name)
    return out | {"output_low": spec.output_low, "output_high": spec.output_high,
                  "output_bias": spec.output_bias, "scans_per_primary": spec.scans_per_primary}


def _valve(valve: ValveModel) -> dict[str, Any]:
    """Only the keys that apply to the characteristic, and the stem effects that are set."""
    out: dict[str, Any] = {"characteristic": valve.characteristic}
    if valve.characteristic == "equal-percentage":
        out["rangeability"] = valve.rangeability
    if valve.characteristic == "installed":
        out["installed"] = [[position, flow] for position, flow in valve.installed]
    for name in ("rate_limit", "deadband", "stiction_s", "stiction_j", "time_constant"):
        if getattr(valve, name):
            out[name] = getattr(valve, name)
    return out


def _items(instance: Any) -> list[tuple[str, Any]]:
    return [(f.name, getattr(instance, f.name)) for f in fields(instance)]


def _dataclass(instance: Any) -> dict[str, Any]:
    return {name: list(value) if isinstance(value, tuple) else value
            for name, value in _items(instance) if value is not None}


#: ``[feedback]`` keys written only when they differ from the default: a file without them
#: means the controller of earlier versions (ideal form, b = 1, derivative on the measurement),
#: and a PI controller refuses a derivative setpoint weight.
_FEEDBACK_QUIET = ("structure", "setpoint_weight", "derivative_setpoint_weight")


def _feedback(spec: FeedbackSpec) -> dict[str, Any]:
    default = FeedbackSpec()
    return {name: value for name, value in _dataclass(spec).items()
            if name not in _FEEDBACK_QUIET or value != getattr(default, name)}


def _simulation(case: Case) -> dict[str, Any]:
    """``[simulation]``; ``duration`` left out when it is the window the records set."""
    table = _dataclass(case.simulation)
    if case.simulation.duration == covering_duration(case.events, case.simulation.step):
        del table["duration"]
    return table


def _disturbances(case: Case) -> dict[str, Any]:
    """``[disturbance]``, or one ``[disturbance.NAME]`` table per named disturbance (its
    transmitter as a sub-table, keys at their defaults left out)."""
    if not case.disturbances:
        return _model(case.disturbance)
    tables: dict[str, Any] = {}
    for item in case.disturbances:
        table = _model(item.model)
        if item.unit:
            table["unit"] = item.unit
        if not item.measured:
            table["measured"] = False
        elif item.sensor != SensorModel():
            table["sensor"] = {key: value for key, value in _dataclass(item.sensor).items()
                               if value != getattr(SensorModel(), key)}
        tables[item.name] = table
    return tables


def _override(base: FeedforwardSpec, spec: FeedforwardSpec) -> dict[str, Any]:
    """The keys of a ``[feedforward.NAME]`` table: those that differ from ``[feedforward]``
    (so that a later change of ``[feedforward]`` still reaches the keys it does not set)."""
    own = asdict(spec)
    return {key: value for key, value in own.items()
            if value is not None and value != getattr(base, key)} or {
        "structure": spec.structure}


def _model(model: Any) -> dict[str, Any]:
    return {"model": model.kind} | {
        name: float(getattr(model, name)) for name in MODEL_PARAMETERS[model.kind]
    }


def _event(event: Any) -> dict[str, Any]:
    if event.record is not None:  # the trace itself stays in its file
        spec = event.record.spec
        keys = {"kind": event.kind} | ({"at": event.at} if event.at else {}) | {
            "file": spec.file, "time_column": spec.time_column,
            "value_column": spec.value_column}
        # baseline and gaps only where they differ from the defaults the loader fills in
        return keys | ({"time_unit": spec.time_unit} if spec.time_unit else {}) | (
            {"baseline": spec.baseline} if spec.baseline != "first" else {}) | (
            {"gaps": spec.gaps} if spec.gaps != "interpolate" else {}) | (
            {"disturbance": event.disturbance} if event.disturbance else {})
    result = {"kind": event.kind, "at": event.at, "size": event.size}
    if event.disturbance:
        result["disturbance"] = event.disturbance
    if event.kind == "disturbance-ramp":
        result["duration"] = event.duration
    if event.kind == "disturbance-noise":
        result["time_constant"] = event.time_constant
    return result


def _distribution(distribution: Distribution) -> dict[str, Any]:
    params = list(distribution.params)
    result: dict[str, Any] = {
        distribution.kind: params[0] if distribution.kind == "relative" else params
    }
    if distribution.clip is not None:
        result["clip"] = list(distribution.clip)
    return result


def _uncertainty(case: Case) -> dict[str, Any]:
    result: dict[str, Any] = {p.key: _distribution(p.distribution) for p in case.uncertainty}
    if case.correlations:
        result["correlation"] = [asdict(c) for c in case.correlations]
    return result


def _defaults() -> dict[str, Any]:
    """Values a file may leave out (the loader fills them in)."""
    return {
        "feedback": _feedback(FeedbackSpec()),
        "feedforward": _dataclass(FeedforwardSpec()),
        "sensor": _dataclass(SensorModel()),
        "signals": {name: _dataclass(signal) for name, signal in _items(Signals())},
        "uncertainty": {},
        "study": _dataclass(StudySpec()),
        "recommendation": _dataclass(RecommendationSpec()),
        "simulation": {"substeps": 1},
        "valve": {"characteristic": "linear"},
        "secondary": {"tuning": "simc", "output_low": 0.0, "output_high": 100.0,
                      "output_bias": 50.0, "scans_per_primary": 1},
    }


_DEFAULTS = _defaults()


# --- fresh document ---------------------------------------------------------------------------


def _fresh_document(case: Case) -> tomlkit.TOMLDocument:
    plain = _plain(case)
    document = tomlkit.document()
    document.add(tomlkit.comment(_HEADER))
    for key, value in plain.items():
        if key == "uncertainty" and not value:
            continue
        document.add(key, _item(value, inline=False))
    return document


def _item(value: Any, inline: bool = True) -> Any:
    """A tomlkit item: sections as tables, distributions inline, lists of dicts as [[...]]."""
    if isinstance(value, dict) and inline:
        inline_table = tomlkit.inline_table()
        inline_table.update({key: _item(sub) for key, sub in value.items()})
        return inline_table
    if isinstance(value, dict):
        only_tables = bool(value) and all(
            isinstance(sub, dict) and not _is_distribution(sub) for sub in value.values()
        )
        table = tomlkit.table(is_super_table=only_tables)
        for key, sub in value.items():
            table.add(key, _item(sub, inline=_is_distribution(sub)))
        return table
    if _is_tables(value):
        array = tomlkit.aot()
        for entry in value:
            array.append(_item(entry, inline=False))
        return array
    return value


def _is_tables(value: Any) -> bool:
    return isinstance(value, list) and bool(value) and all(isinstance(v, dict) for v in value)


def _is_distribution(value: Any) -> bool:
    return isinstance(value, dict) and any(key in DISTRIBUTION_KINDS for key in value)


# --- merging into an existing document ---------------------------------------------------------


def _merge_document(document: tomlkit.TOMLDocument, plain: dict[str, Any]) -> None:
    uncertainty = plain.pop("uncertainty")
    _follow_renames(document, plain)
    _merge_table(document, plain, _DEFAULTS, keep=("uncertainty",))
    _merge_uncertainty(document, uncertainty)


def _follow_renames(document: tomlkit.TOMLDocument, plain: dict[str, Any]) -> None:
    """Renamed ``[disturbance.NAME]`` tables keep their place and comments.

    When the document's named disturbances and the case's first ones differ only by new names
    at the same positions (more may follow: added ones), each old table (and its
    ``[feedforward.NAME]`` override) is moved under its new name; otherwise the merge would drop
    the old table and append the new one at the end, changing the disturbances' order.
    """
    current, want = document.get("disturbance"), plain.get("disturbance")
    if not (isinstance(current, Table) and is_named_form(current.unwrap())
            and isinstance(want, dict) and is_named_form(want)):
        return
    old, new = list(current), list(want)
    renames = {before: after for before, after in zip(old, new, strict=False) if before != after}
    if (len(new) < len(old) or not renames or set(renames) & set(new)
            or set(renames.values()) & set(old)):
        return  # nothing renamed, or tables removed or reordered: the merge handles it
    current.update({renames.get(name, name): current[name] for name in old})
    for name in renames:
        del current[name]
    _reorder(current, [renames.get(name, name) for name in old])
    overrides = document.get("feedforward")
    if isinstance(overrides, Table):
        for before, after in renames.items():
            if before in overrides:
                overrides[after] = overrides[before]
                del overrides[before]


def _reorder(table: Table, order: list[str]) -> None:
    """Put the sub-tables of ``table`` in ``order`` (tomlkit appends renamed keys last)."""
    items = [(name, table[name]) for name in order]
    for name in order:
        del table[name]
    for name, item in items:
        table.add(name, item)


def _merge_table(
    target: Any, want: dict[str, Any], defaults: dict[str, Any] | None, keep: tuple[str, ...] = ()
) -> None:
    """Make ``target`` (a tomlkit container) hold ``want``, touching only what differs."""
    for key in [k for k in target if k not in want and k not in keep]:
        del target[key]
    for key, value in want.items():
        sub_defaults = (defaults or {}).get(key)
        if key not in target:
            if defaults is not None and key in defaults and value == sub_defaults:
                continue  # a default the original left out stays out
            inline = isinstance(target, InlineTable) or _is_distribution(value)
            item = _item(value, inline=inline)
            if isinstance(item, Table) and not item.is_super_table():
                item.add(tomlkit.nl())  # a blank line before whatever table follows it
            target[key] = item
            continue
        _merge_value(target, key, value, sub_defaults if isinstance(sub_defaults, dict) else None)


def _merge_value(target: Any, key: str, value: Any, defaults: dict[str, Any] | None) -> None:
    current = target[key]
    if isinstance(value, dict) and isinstance(current, Table | InlineTable):
        _merge_table(current, value, defaults)
    elif _is_tables(value) and isinstance(current, AoT):
        _merge_array(current, value)
    elif not _same(current, value):
        target[key] = _item(value, inline=True)


def _merge_array(current: AoT, want: list[dict[str, Any]]) -> None:
    for index, entry in enumerate(want[: len(current)]):
        _merge_table(current[index], entry, None)
    while len(current) > len(want):
        del current[len(current) - 1]
    for entry in want[len(current):]:
        current.append(_item(entry, inline=False))


def _same(current: Any, value: Any) -> bool:
    plain = current.unwrap() if isinstance(current, Item) else current
    if isinstance(plain, bool) or isinstance(value, bool):
        return type(plain) is type(value) and plain == value
    if isinstance(plain, list) and isinstance(value, list):
        pairs = zip(plain, value, strict=False)
        return len(plain) == len(value) and all(_same(a, b) for a, b in pairs)
    return type(plain) is type(value) and plain == value or (
        isinstance(plain, int | float) and isinstance(value, float) and float(plain) == value
    )


def _merge_uncertainty(document: Any, want: dict[str, Any]) -> None:
    """Update distributions wherever the original wrote them (quoted key or nested table)."""
    if "uncertainty" not in document:
        if want:
            document["uncertainty"] = _item(want, inline=False)
        return
    if not want:
        del document["uncertainty"]
        return
    section = document["uncertainty"]
    if not isinstance(section, Table | InlineTable):
        document["uncertainty"] = _item(want, inline=False)
        return
    placed: set[str] = set()
    for block in [k for k in section if "." not in k and k != "correlation"]:
        nested = section[block]
        if not isinstance(nested, Table | InlineTable):
            continue
        for name in list(nested):
            key = f"{block}.{name}"
            if key in want:
                _merge_value(nested, name, want[key], None)
                placed.add(key)
            else:
                del nested[name]
        if not len(nested):
            del section[block]
    rest = {k: v for k, v in want.items() if k not in placed}
    for key in [k for k in section if "." in k or k == "correlation"]:
        if key not in rest:
            del section[key]
    for key, value in rest.items():
        if key in section:
            _merge_value(section, key, value, None)
        else:
            section[key] = _item(value, inline=True)
    quoted = [key for key in section if "." in key]
    if not placed and quoted != list(rest):  # a renamed key was appended: back to its place
        items = [(key, section[key]) for key in rest]
        for key in rest:
            del section[key]
        for key, item in items:
            section.add(key, item)
