"""Studio edits of the controller form, the secondary (flow) loop and the valve's installed
characteristic table: which rows a case has, their text, and the case an edit makes.

The edited case is not validated here (:func:`robustff.tui.editing.edit_field` passes it to the
loader). Nothing here imports Textual.
"""

from __future__ import annotations

from dataclasses import replace

from robustff.case import Case, FeedbackSpec
from robustff.design.controller_forms import ideal_to_parallel, ideal_to_series
from robustff.design.tuning import tune_feedback, tune_secondary
from robustff.errors import CaseError
from robustff.plant.models import MODEL_PARAMETERS
from robustff.plant.valve import ValveModel
from robustff.tui.edit_values import EDIT_SOURCE, number_from_text

__all__ = [
    "LOOP_CHOICE_FIELDS",
    "LOOP_OPTIONAL_FIELDS",
    "INSTALLED_FIELD",
    "feedback_fields",
    "secondary_fields",
    "loop_field_text",
    "edited_loop_field",
    "installed_text",
    "manual_settings_in",
    "without_manual_settings",
]

#: Fields chosen from a few words.
LOOP_CHOICE_FIELDS: dict[str, tuple[str, ...]] = {
    "feedback.structure": ("ideal", "series", "parallel"),
    "secondary.tuning": ("simc", "manual"),
}
#: Numeric fields that may be left blank (not set: the rule, the other spelling or the default).
LOOP_OPTIONAL_FIELDS: frozenset[str] = frozenset({
    "feedback.proportional_band", "feedback.repeats", "feedback.ki", "feedback.kd",
    "feedback.derivative_filter", "secondary.closed_loop_time", "secondary.kc", "secondary.ti",
})
#: The installed characteristic's table, typed as ``position % : flow fraction`` pairs.
INSTALLED_FIELD = "valve.installed"

#: One setting written two ways: typing one clears the other (the loader takes only one).
_SPELLINGS = {"kc": "proportional_band", "proportional_band": "kc", "ti": "repeats",
              "repeats": "ti"}
_SECONDARY_CONTROLLER = ("tuning", "closed_loop_time", "kc", "ti", "scans_per_primary")


def feedback_fields(case: Case) -> tuple[str, ...]:
    """The feedback rows of a case: those of its form (PI/PID) and structure."""
    pid = case.feedback.form == "pid"
    parallel = case.feedback.structure == "parallel"
    names = ["form", "tuning", "structure", "closed_loop_time", "kc", "proportional_band"]
    names += ["ki"] if parallel else ["ti", "repeats"]
    if pid:
        names += ["kd"] if parallel else ["td"]
        names += ["derivative_filter"]
    names += ["setpoint_weight"] + (["derivative_setpoint_weight"] if pid else [])
    return tuple(f"feedback.{name}" for name in names)


def secondary_fields(case: Case) -> tuple[str, ...]:
    """The secondary loop's rows (its path model's numbers, then its controller); none
    without a secondary loop."""
    if case.secondary is None:
        return ()
    names = (*MODEL_PARAMETERS[case.secondary.model.kind], *_SECONDARY_CONTROLLER)
    return tuple(f"secondary.{name}" for name in names)


def installed_text(valve: ValveModel | None) -> str:
    """The installed table as typed: ``0:0, 50:0.2, 100:1`` (blank for another shape)."""
    if valve is None or valve.characteristic != "installed":
        return ""
    return ", ".join(f"{position:g}:{flow:g}" for position, flow in valve.installed)


def loop_field_text(case: Case, field: str) -> str | None:
    """The text of a field of this module (None: not one of them)."""
    if field == INSTALLED_FIELD:
        return installed_text(case.valve)
    section, name = field.split(".", 1)
    if section != "secondary":
        return None
    if case.secondary is None:
        return ""
    spec = case.secondary
    value = getattr(spec.model if name in MODEL_PARAMETERS[spec.model.kind] else spec, name)
    if value is None:
        return ""
    return value if isinstance(value, str) else f"{value:g}"


def edited_loop_field(case: Case, field: str, text: str) -> Case | None:
    """The case with one field of this module set (not yet validated); None when ``field``
    is handled elsewhere.

    Raises
    ------
    CaseError
        Text that is no number or no table, or a secondary field without a secondary loop.
    """
    if field == INSTALLED_FIELD:
        return _with_installed(case, text)
    section, name = field.split(".", 1)
    if section == "secondary":
        return _edited_secondary(case, name, text)
    if section == "feedback" and (name in _SPELLINGS or name == "structure"):
        return _edited_form(case, name, text)
    return None


def _edited_form(case: Case, name: str, text: str) -> Case:
    fb = case.feedback
    if name == "structure":
        choice = text.strip()
        if fb.tuning != "manual" or choice == fb.structure:
            return replace(case, feedback=replace(fb, structure=choice))
        # Manual settings are read in the structure: rewrite them so the controller stays.
        try:
            ideal, _ = tune_feedback(case.process, fb, case.simulation.step, case.signals)
        except (ValueError, ArithmeticError):  # the loader names what is wrong
            return replace(case, feedback=replace(fb, structure=choice))
        return replace(case, feedback=manual_settings_in(replace(fb, structure=choice),
                                                         ideal.kc, ideal.ti, ideal.td))
    value = number_from_text(f"feedback.{name}", text, optional=True)
    other = _SPELLINGS[name] if value is not None else name
    return replace(case, feedback=replace(fb, **{name: value, other: None}))  # type: ignore[arg-type]


def manual_settings_in(fb: FeedbackSpec, kc: float, ti: float, td: float) -> FeedbackSpec:
    """Manual settings written in ``fb.structure`` for the ideal-form ``kc, ti, td`` (the
    gain as ``kc``, the integral as ``ti`` or ``ki``); an ideal PID with no series form
    (``Ti < 4 Td``) stays ideal."""
    pid = fb.form == "pid"
    td = td if pid else 0.0
    fb = replace(fb, proportional_band=None, repeats=None)
    if fb.structure == "parallel":
        gain, ki, kd = ideal_to_parallel(kc, ti, td)
        return replace(fb, kc=gain, ki=ki, kd=kd if pid else None, ti=None, td=None)
    if fb.structure == "series":
        series = ideal_to_series(kc, ti, td)
        if series is None:
            fb = replace(fb, structure="ideal")
        else:
            kc, ti, td = series
    return replace(fb, kc=kc, ti=ti, td=td if pid else None, ki=None, kd=None)


def without_manual_settings(fb: FeedbackSpec) -> FeedbackSpec:
    """The controller handed back to a tuning rule: no manual settings left."""
    return replace(fb, kc=None, ti=None, td=None, proportional_band=None, repeats=None,
                   ki=None, kd=None)


def _edited_secondary(case: Case, name: str, text: str) -> Case:
    spec = case.secondary
    if spec is None:
        raise CaseError(f"{EDIT_SOURCE}: secondary.{name}: the case has no secondary loop; add "
                        "[secondary] in the case file")
    if name == "tuning":
        choice = text.strip()
        if choice == "manual" and spec.tuning != "manual":
            # Start from the rule's PI, not from blanks: the loop stays the same.
            try:
                inner = tune_secondary(case)
            except (ValueError, ArithmeticError):
                inner = None
            if inner is not None:
                spec = replace(spec, kc=inner.kc, ti=inner.ti, closed_loop_time=None)
        elif choice != "manual":
            spec = replace(spec, kc=None, ti=None)
        return replace(case, secondary=replace(spec, tuning=choice))
    field = f"secondary.{name}"
    if name in MODEL_PARAMETERS[spec.model.kind]:
        number = number_from_text(field, text, optional=False)
        return replace(case, secondary=replace(spec, model=spec.model.with_parameter(
            name, number if number is not None else 0.0)))
    value = number_from_text(field, text, optional=field in LOOP_OPTIONAL_FIELDS)
    if name == "scans_per_primary" and value is not None and value == int(value):
        value = int(value)
    return replace(case, secondary=replace(spec, **{name: value}))  # type: ignore[arg-type]


def _with_installed(case: Case, text: str) -> Case:
    """An installed characteristic from ``position:flow`` pairs; a table typed for another
    characteristic makes it installed (a valve is added when there is none)."""
    valve = case.valve or ValveModel()
    if not text.strip():
        if valve.characteristic == "installed":
            raise CaseError(f"{EDIT_SOURCE}: {INSTALLED_FIELD}: an installed characteristic "
                            "needs its table; choose another characteristic to drop it")
        return case
    pairs = []
    for part in text.replace(";", ",").split(","):
        if not part.strip():
            continue
        bits = part.split(":")
        if len(bits) != 2:
            raise CaseError(f"{EDIT_SOURCE}: {INSTALLED_FIELD}: write position % : flow "
                            f"fraction pairs separated by commas, e.g. 0:0, 50:0.2, 100:1 "
                            f"(got {part.strip()!r})")
        position, flow = (number_from_text(INSTALLED_FIELD, bit, optional=False) for bit in bits)
        pairs.append((position or 0.0, flow or 0.0))
    return replace(case, valve=replace(valve, characteristic="installed", installed=tuple(pairs)))
