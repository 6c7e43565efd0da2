"""Edits of a case from text typed in the studio, validated by the case loader itself.

Every edit builds a new :class:`~robustff.case.Case` with :func:`dataclasses.replace` and checks
it by a round trip through :func:`~robustff.case.case_to_toml` and
:func:`~robustff.case.parse_case`, so the reason shown for a refused edit is the loader's own
message (the same words ``robustff check`` prints). Nothing here imports Textual.
"""

from __future__ import annotations

import math
from dataclasses import replace

from robustff.case import (
    DISTRIBUTION_KINDS,
    Case,
    Distribution,
    UncertainParameter,
)
from robustff.errors import CaseError
from robustff.plant.models import MODEL_PARAMETERS, SENSOR_PARAMETERS
from robustff.plant.valve import VALVE_CHARACTERISTICS, ValveModel
from robustff.tui.edit_values import EDIT_SOURCE, number_from_text, validated
from robustff.tui.loop_fields import (
    INSTALLED_FIELD,
    LOOP_CHOICE_FIELDS,
    LOOP_OPTIONAL_FIELDS,
    edited_loop_field,
    loop_field_text,
    manual_settings_in,
    without_manual_settings,
)

__all__ = [
    "EDIT_SOURCE",
    "CHOICE_FIELDS",
    "VALVE_FIELDS",
    "OPTIONAL_FIELDS",
    "validated",
    "edit_field",
    "field_text",
    "edit_distribution",
    "convert_distribution",
    "add_uncertain",
    "remove_uncertain",
    "widen_to_nominal",
    "move_to_nominal",
    "uncertain_candidates",
    "params_text",
    "clip_text",
    "short_message",
]

#: Fields edited by choosing one of a few words.
CHOICE_FIELDS: dict[str, tuple[str, ...]] = {
    "feedback.form": ("pi", "pid"),
    "feedback.tuning": ("simc", "imc", "manual"),
    "feedforward.structure": ("none", "static", "lead-lag", "lead-lag-delay"),
    "valve.characteristic": ("none", *VALVE_CHARACTERISTICS),
    **LOOP_CHOICE_FIELDS,
}

#: The valve's fields the studio edits (``[valve]``; ``none``: an ideal actuator), the
#: installed characteristic's table as ``position % : flow fraction`` pairs.
VALVE_FIELDS: tuple[str, ...] = (
    "valve.characteristic", "valve.rangeability", INSTALLED_FIELD, "valve.stiction_s",
    "valve.stiction_j", "valve.deadband", "valve.rate_limit", "valve.time_constant",
)

#: Numeric fields that may be left blank (blank means "not set": the design rule decides).
OPTIONAL_FIELDS: frozenset[str] = frozenset({
    "feedback.closed_loop_time", "feedback.kc", "feedback.ti", "feedback.td",
    "feedforward.lead", "feedforward.lag", "feedforward.delay", *LOOP_OPTIONAL_FIELDS,
})

_UNCERTAIN_BLOCKS = ("process", "disturbance", "sensor")


def short_message(problem: str) -> str:
    """A loader message without the ``edit:`` source prefix."""
    prefix = f"{EDIT_SOURCE}: "
    return problem[len(prefix):] if problem.startswith(prefix) else problem


def field_text(case: Case, field: str) -> str:
    """The current value of ``field`` (e.g. ``"process.gain"``) as editable text."""
    loop_text = loop_field_text(case, field)
    if loop_text is not None:
        return loop_text
    block, item, parameter = case.split_key(field)
    if item is not None:  # a disturbance path or its transmitter
        owner = item.sensor if block == "sensor" else item.model
        return f"{getattr(owner, parameter):g}"
    section, name = field.split(".", 1)
    if section == "valve" and case.valve is None:  # an ideal actuator
        return "none" if name == "characteristic" else ""
    value = getattr(getattr(case, section), name)
    if value is None:
        return ""
    return value if isinstance(value, str) else f"{value:g}"


def edit_field(case: Case, field: str, text: str) -> Case:
    """The case with one scalar field set from text.

    Parameters
    ----------
    case : Case
    field : str
        ``"section.name"``: ``process.*``, ``disturbance.*`` and ``sensor.*`` model parameters,
        ``feedback.*``, ``feedforward.*``, ``study.samples`` / ``study.seed``, the valve's
        :data:`VALVE_FIELDS` (``valve.characteristic = none`` removes the valve; a number
        typed without a valve adds a linear one).
    text : str
        As typed; a blank optional field means "not set".

    Returns
    -------
    Case
        Validated by the loader.

    Raises
    ------
    CaseError
        The loader's reason (or "must be a number") when the edit is refused.
    """
    loop_case = edited_loop_field(case, field, text)
    if loop_case is not None:
        return validated(loop_case)
    block, item, parameter = case.split_key(field)
    if item is not None:  # a disturbance path or its transmitter, named or not
        value = number_from_text(field, text, optional=False)
        if block == "sensor":
            item = replace(item, sensor=replace(item.sensor, **{parameter: value}))
        else:
            item = replace(item, model=replace(item.model, **{parameter: value}))
        return validated(case.with_disturbance_input(item.name, item))
    section, name = field.split(".", 1)
    if section == "valve":
        return validated(_edited_valve(case, field, text))
    owner = getattr(case, section)
    if field in CHOICE_FIELDS:
        value: object = text.strip()
    elif section == "study":
        number = number_from_text(field, text, optional=False)
        value = int(number) if number is not None and number == int(number) else number
    else:
        value = number_from_text(field, text, optional=field in OPTIONAL_FIELDS)
    changed = replace(case, **{section: replace(owner, **{name: value})})
    if field == "feedback.tuning" and value == "manual":
        changed = _with_manual_settings(changed)
    elif field == "feedback.tuning":  # back to a rule: the manual settings go (Ctrl+Z keeps them)
        changed = replace(changed, feedback=without_manual_settings(changed.feedback))
    return validated(changed)


def _edited_valve(case: Case, field: str, text: str) -> Case:
    """The case with one valve field set (not yet validated)."""
    name = field.split(".", 1)[1]
    valve = case.valve or ValveModel()
    if field not in VALVE_FIELDS:
        raise CaseError(f"{EDIT_SOURCE}: {field}: not a valve setting the studio edits")
    if name == "characteristic":
        choice = text.strip()
        if choice == "none":
            return replace(case, valve=None)
        if choice not in VALVE_CHARACTERISTICS:
            raise CaseError(f"{EDIT_SOURCE}: {field}: must be one of none, "
                            f"{', '.join(VALVE_CHARACTERISTICS)} (got {text!r})")
        if choice == "installed" and not valve.installed:
            raise CaseError(f"{EDIT_SOURCE}: {field}: an installed characteristic needs its "
                            "table of position % : flow fraction pairs; type it in the "
                            "'installed' row, e.g. 0:0, 50:0.2, 100:1")
        installed = valve.installed if choice == "installed" else ()
        return replace(case, valve=replace(valve, characteristic=choice, installed=installed))
    if name == "rangeability" and valve.characteristic != "equal-percentage":
        raise CaseError(f"{EDIT_SOURCE}: {field}: used only with characteristic = "
                        "'equal-percentage'")
    number = number_from_text(field, text, optional=False) or 0.0  # not optional: never None
    return replace(case, valve=replace(valve, **{name: number}))  # type: ignore[arg-type]


def _with_manual_settings(case: Case) -> Case:
    """Switching to manual tuning starts from the current rule's settings (not from blanks),
    written in the case's controller structure so that the controller stays the same."""
    fb = case.feedback
    if fb.kc is not None and (fb.ti is not None or fb.ki is not None):
        return case
    from robustff.design.tuning import design_loop

    try:
        settings = design_loop(replace(case, feedback=replace(fb, tuning="simc"))).feedback
    except (ValueError, ArithmeticError):
        return case  # the loader will name the missing settings
    return replace(case, feedback=manual_settings_in(fb, settings.kc, settings.ti, settings.td))


def _floats(path: str, text: str) -> tuple[float, ...]:
    parts = [part for part in text.replace(";", ",").replace("..", ",").split(",") if part.strip()]
    if not parts:
        raise CaseError(f"{EDIT_SOURCE}: {path}: needs numbers separated by commas (got {text!r})")
    return tuple(number_from_text(path, part, optional=False) or 0.0 for part in parts)


def params_text(distribution: Distribution) -> str:
    """Editable text of a distribution's numbers, e.g. ``"-2.6, -1"``."""
    return ", ".join(f"{value:g}" for value in distribution.params)


def clip_text(distribution: Distribution) -> str:
    """Editable text of the clip bounds (blank when not clipped)."""
    return "" if distribution.clip is None else ", ".join(f"{v:g}" for v in distribution.clip)


def _replace_parameter(case: Case, key: str, distribution: Distribution) -> Case:
    rows = tuple(
        UncertainParameter(key, distribution) if row.key == key else row for row in case.uncertainty
    )
    return validated(replace(case, uncertainty=rows))


def edit_distribution(case: Case, key: str, kind: str, params: str, clip: str) -> Case:
    """The case with the distribution of uncertain parameter ``key`` set from text.

    Parameters
    ----------
    key : str
        An uncertain parameter already in the case, e.g. ``"disturbance.gain"``.
    kind : str
        One of :data:`robustff.case.DISTRIBUTION_KINDS`.
    params, clip : str
        Numbers separated by commas (``clip`` may be blank), in the parameter's unit.
    """
    path = f"uncertainty.{key}.{kind}"
    values = _floats(path, params)
    if kind == "relative" and len(values) != 1:
        raise CaseError(f"{EDIT_SOURCE}: {path}: must be one number r (got {params!r})")
    bounds = _floats(f"uncertainty.{key}.clip", clip) if clip.strip() else None
    if bounds is not None and len(bounds) != 2:
        raise CaseError(
            f"{EDIT_SOURCE}: uncertainty.{key}.clip: must be [low, high] (got {clip!r})")
    clip_pair = None if bounds is None else (bounds[0], bounds[1])
    return _replace_parameter(case, key, Distribution(kind, values, clip_pair))


def convert_distribution(case: Case, key: str, kind: str) -> Distribution:
    """A distribution of another kind covering about the same range as the current one.

    Used when the kind is changed in the table, so the row keeps sensible numbers.
    """
    from robustff.case.sampling import distribution_bounds

    if kind not in DISTRIBUTION_KINDS:
        raise CaseError(f"{EDIT_SOURCE}: uncertainty.{key}: unknown distribution {kind!r}")
    row = next(row for row in case.uncertainty if row.key == key)
    nominal = case.nominal_value(key)
    low, high = (_round(v) for v in distribution_bounds(row, nominal))
    middle = nominal if low <= nominal <= high else 0.5 * (low + high)
    if kind == "uniform":
        return Distribution(kind, (low, high))
    if kind == "relative":
        scale = abs(nominal) or 1.0
        return Distribution(kind, (_round(max(high - middle, middle - low) / scale),))
    if kind == "triangular":
        return Distribution(kind, (low, middle, high))
    if kind == "normal":
        return Distribution(kind, (middle, _round((high - low) / 6.0)), (low, high))
    factor = math.sqrt(high / low) if low > 0 else 1.5  # lognormal needs positive values
    spread = _round(max(factor, 1.01) ** (1 / 2.576))
    return Distribution(kind, (middle, spread), (low, high) if low > 0 else None)


def _round(value: float) -> float:
    """Four significant digits: what a person would type."""
    return float(f"{value:.4g}")


def uncertain_candidates(case: Case) -> list[str]:
    """Plant parameters of the case that are not yet uncertain, in model order."""
    taken = {row.key for row in case.uncertainty}
    keys = [f"process.{name}" for name in MODEL_PARAMETERS[case.process.kind]]
    for item in case.disturbance_inputs:
        keys += [f"{item.key_prefix}.{name}" for name in MODEL_PARAMETERS[item.model.kind]]
        if item.measured:
            keys += [f"{item.sensor_prefix}.{name}" for name in SENSOR_PARAMETERS]
    return [key for key in keys if key not in taken]


def add_uncertain(case: Case, key: str) -> Case:
    """The case with ``key`` made uncertain: nominal +- 20 %, or 0 .. 1 when the nominal is 0."""
    if key.split(".", 1)[0] not in _UNCERTAIN_BLOCKS or key in {r.key for r in case.uncertainty}:
        raise CaseError(
            f"{EDIT_SOURCE}: uncertainty.{key}: not a plant parameter that can be added")
    nominal = case.nominal_value(key)
    distribution = (Distribution("relative", (0.2,)) if nominal != 0.0
                    else Distribution("uniform", (0.0, 1.0)))
    row = UncertainParameter(key, distribution)
    return validated(replace(case, uncertainty=(*case.uncertainty, row)))


def remove_uncertain(case: Case, key: str) -> Case:
    """The case without uncertain parameter ``key`` (and without correlations naming it)."""
    rows = tuple(row for row in case.uncertainty if row.key != key)
    correlations = tuple(c for c in case.correlations if key not in (c.first, c.second))
    return validated(replace(case, uncertainty=rows, correlations=correlations))



#: Standard normal quantile of 0.995: normal and lognormal ranges are P0.5 .. P99.5 (as
#: :func:`robustff.case.sampling.distribution_bounds`).
_Z995 = 2.5758293035489004


def _row_of(case: Case, key: str) -> UncertainParameter:
    for row in case.uncertainty:
        if row.key == key:
            return row
    raise CaseError(f"{EDIT_SOURCE}: uncertainty.{key}: not an uncertain parameter of the case")


def _outward(value: float, up: bool) -> float:
    """``value`` to four significant digits, rounded away from the range's inside."""
    rounded = _round(value)
    if up and rounded < value or not up and rounded > value:
        step = 10 ** (math.floor(math.log10(abs(value))) - 3) if value else 0.0
        rounded = _round(rounded + step if up else rounded - step)
    return rounded


def _clip_with(clip: tuple[float, float] | None, nominal: float) -> tuple[float, float] | None:
    if clip is None:
        return None
    return (min(clip[0], nominal), max(clip[1], nominal))


def widen_to_nominal(case: Case, key: str) -> Case:
    """The case with the range of uncertain parameter ``key`` widened to hold its nominal value.

    The same kind of distribution is kept: a uniform or triangular range is extended to the
    nominal (the mode stays), a normal spread or a lognormal factor grows until the
    P0.5 .. P99.5 range reaches the nominal, and clip bounds are moved out to it.
    """
    row = _row_of(case, key)
    nominal = case.nominal_value(key)
    d = row.distribution
    kind, params = d.kind, d.params
    if kind == "uniform":
        params = (min(params[0], nominal), max(params[1], nominal))
    elif kind == "triangular":
        params = (min(params[0], nominal), params[1], max(params[2], nominal))
    elif kind == "normal":
        params = (params[0], max(params[1], _outward(abs(nominal - params[0]) / _Z995, True)))
    elif kind == "lognormal":
        if nominal <= 0.0:
            raise CaseError(f"{EDIT_SOURCE}: uncertainty.{key}: a lognormal range cannot hold "
                            f"the nominal value {nominal:g} (not positive)")
        ratio = max(nominal / params[0], params[0] / nominal)
        params = (params[0], max(params[1], _outward(ratio ** (1 / _Z995), True)))
    return _replace_parameter(case, key, Distribution(kind, params, _clip_with(d.clip, nominal)))


def move_to_nominal(case: Case, key: str) -> Case:
    """The case with the range of uncertain parameter ``key`` moved to centre on its nominal.

    A uniform range keeps its width around the nominal, a triangular one puts its mode there,
    a normal mean or lognormal median becomes the nominal; clip bounds move (or scale, for a
    lognormal) with the range.
    """
    row = _row_of(case, key)
    nominal = case.nominal_value(key)
    d = row.distribution
    kind, params, clip = d.kind, d.params, d.clip
    if kind == "uniform":
        shift = nominal - 0.5 * (params[0] + params[1])
    elif kind == "triangular":
        shift = nominal - params[1]
    elif kind == "normal":
        shift = nominal - params[0]
    else:
        shift = 0.0
    if kind == "lognormal":
        if nominal <= 0.0:
            raise CaseError(f"{EDIT_SOURCE}: uncertainty.{key}: a lognormal range cannot be "
                            f"centred on {nominal:g} (not positive)")
        scale = nominal / params[0]
        params = (nominal, params[1])
        clip = None if clip is None else (_round(clip[0] * scale), _round(clip[1] * scale))
    elif kind != "relative":  # relative is centred on the nominal already
        moved = [_round(value + shift) for value in params]
        params = tuple(moved) if kind != "normal" else (nominal, params[1])
        clip = None if clip is None else (_round(clip[0] + shift), _round(clip[1] + shift))
    distribution = Distribution(kind, tuple(params), _clip_with(clip, nominal))
    return _replace_parameter(case, key, distribution)
