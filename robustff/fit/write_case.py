"""Write fitted models and their uncertainty into a case file, starting from a template case.

The template is edited with tomlkit so that its comments, order and every other table survive:
only the chosen model block (``[process]`` or ``[disturbance]``) and that block's entries of
``[uncertainty]`` are replaced. The result is validated by the case loader before it is written
(atomically, with :func:`robustff.atomic.write_text_atomic`).
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

from robustff.atomic import write_text_atomic
from robustff.case import parse_case
from robustff.case.disturbance_section import is_named_form
from robustff.errors import CaseError, DataError
from robustff.fit.spread import Proposal
from robustff.plant.kinds import model_kind
from robustff.plant.models import MODEL_PARAMETERS, TransferModel

__all__ = ["SECONDS_PER_UNIT", "FIT_BLOCKS", "time_factor", "fitted_case_text", "write_fitted_case"]

SECONDS_PER_UNIT: dict[str, float] = {"s": 1.0, "min": 60.0, "h": 3600.0}
FIT_BLOCKS: tuple[str, ...] = ("process", "disturbance")
_ALL_MODEL_KEYS = ("gain", "time_constant", "time_constant_2", "dead_time")


def time_factor(data_unit: str, case_unit: str) -> float:
    """Multiplier turning a time in ``data_unit`` into ``case_unit`` (e.g. s -> min: 1/60)."""
    return SECONDS_PER_UNIT[data_unit] / SECONDS_PER_UNIT[case_unit]


def _converted(kind: str, proposals: dict[str, Proposal], factor: float) -> dict[str, Proposal]:
    """Proposals in the case's time unit: times scale by ``factor``, an IPDT slope gain by
    1/factor."""
    out = {}
    for name, proposal in proposals.items():
        if name == "gain":
            integrating = model_kind(kind).integrating
            out[name] = proposal.scaled(1.0 / factor) if integrating else proposal
        else:
            out[name] = proposal.scaled(factor)
    return out


def _inline(values: dict[str, Any]) -> Any:
    import tomlkit

    table = tomlkit.inline_table()
    table.update(values)
    return table


def fitted_case_text(
    template_text: str,
    block: str,
    model: TransferModel,
    proposals: dict[str, Proposal],
    data_time_unit: str | None,
    source: str = "<template>",
) -> tuple[str, list[str]]:
    """The template case with the fitted block and its uncertainty replaced.

    Parameters
    ----------
    template_text : str
        TOML text of a valid case.
    block : str
        ``"process"``, ``"disturbance"`` or, in a case that names its disturbances,
        ``"disturbance.NAME"``.
    model : TransferModel
        Nominal model, times in the data's time unit.
    proposals : dict of str to Proposal
        One per parameter of ``model.kind`` (from
        :func:`robustff.fit.spread.combine_fits`).
    data_time_unit : str or None
        "s", "min" or "h"; None means the data are in the case's time unit.

    Returns
    -------
    (text, notes) : tuple of str and list of str
        The new case text and notes for the user (unit conversion done or assumed).

    Raises
    ------
    CaseError
        The template is not valid TOML, or the result fails validation.
    """
    import tomlkit
    from tomlkit.exceptions import TOMLKitError

    named = block.startswith("disturbance.")
    if block not in FIT_BLOCKS and not named:
        raise DataError(f"--block must be one of {', '.join(FIT_BLOCKS)} or disturbance.NAME, "
                        f"got '{block}'")
    try:
        doc = tomlkit.parse(template_text)
    except TOMLKitError as exc:
        raise CaseError(f"{source}: not readable as TOML: {exc}") from None
    _check_named(doc, block, source)
    case_unit = str(doc.get("time_unit", "s"))
    notes: list[str] = []
    if data_time_unit is None:
        data_time_unit = case_unit
        notes.append(f"times taken to be in the case's time unit ({case_unit}); "
                     "use --time-unit if the data use another")
    elif case_unit not in SECONDS_PER_UNIT or data_time_unit not in SECONDS_PER_UNIT:
        raise CaseError(f"{source}: time_unit must be s, min or h to convert the fitted times")
    factor = time_factor(data_time_unit, case_unit) if case_unit in SECONDS_PER_UNIT else 1.0
    if factor != 1.0:
        notes.append(f"times converted from {data_time_unit} to {case_unit}")
    converted = _converted(model.kind, proposals, factor)
    _set_block(doc, block, model.kind, converted)
    _set_uncertainty(doc, block, converted)
    text = tomlkit.dumps(doc)
    _validate(text, source)
    return text, notes


def _check_named(doc: Any, block: str, source: str) -> None:
    """A template that names its disturbances takes ``disturbance.NAME``, one that does not
    takes ``disturbance``."""
    tables = doc.get("disturbance")
    names = list(tables) if is_named_form(tables) else []
    if block == "disturbance" and names:
        raise CaseError(f"{source}: the template names its disturbances "
                        f"({', '.join(names)}): give --block disturbance.NAME")
    if block.startswith("disturbance.") and block.split(".", 1)[1] not in names:
        have = f"names {', '.join(names)}" if names else "has one unnamed [disturbance]"
        raise CaseError(f"{source}: the template {have}; there is no {block}")


def _set_block(doc: Any, block: str, kind: str, proposals: dict[str, Proposal]) -> None:
    import tomlkit

    if block.startswith("disturbance."):
        table = doc["disturbance"][block.split(".", 1)[1]]
    else:
        if block not in doc:
            doc[block] = tomlkit.table()
        table = doc[block]
    table["model"] = kind
    for name in _ALL_MODEL_KEYS:
        if name in MODEL_PARAMETERS[kind]:
            table[name] = float(f"{proposals[name].value:.6g}")
        elif name in table:
            del table[name]


def _set_uncertainty(doc: Any, block: str, proposals: dict[str, Proposal]) -> None:
    import tomlkit

    if "uncertainty" not in doc:
        doc["uncertainty"] = tomlkit.table()
    section = doc["uncertainty"]
    for key in list(section.keys()):
        if key == block or key.startswith(f"{block}."):
            del section[key]
    for name, proposal in proposals.items():
        if not proposal.has_spread:
            continue  # no spread found: leave the parameter certain
        section[f"{block}.{name}"] = _inline(proposal.to_dict())


def _validate(text: str, source: str) -> None:
    try:
        parse_case(text, source=f"{source} (after fitting)")
    except CaseError as exc:
        raise CaseError(["the fitted case would not be valid:", *exc.problems]) from None


def write_fitted_case(
    template: str | Path,
    out: str | Path,
    block: str,
    model: TransferModel,
    proposals: dict[str, Proposal],
    data_time_unit: str | None,
) -> list[str]:
    """Write a new case from ``template`` with the fitted block (see :func:`fitted_case_text`).

    Returns
    -------
    list of str
        Notes for the user.
    """
    template = Path(template)
    try:
        template_text = template.read_text(encoding="utf-8")
    except OSError as exc:
        raise CaseError(
            f"{template}: cannot read the template case ({exc.strerror or exc})"
        ) from None
    text, notes = fitted_case_text(template_text, block, model, proposals, data_time_unit,
                                   source=str(template))
    out = Path(out)
    try:
        write_text_atomic(out, text)
    except OSError as exc:
        raise CaseError(f"{out}: cannot write the case ({exc.strerror or exc})") from None
    return notes
