"""What every studio edit shares: the loader as the judge of a value, numbers read from text.

Every edit builds a new :class:`~robustff.case.Case` and checks it by a round trip through
:func:`~robustff.case.case_to_toml` and :func:`~robustff.case.parse_case`, so the reason shown
for a refused edit is the loader's own message (the words ``robustff check`` prints). Nothing
here imports Textual.
"""

from __future__ import annotations

import math
from dataclasses import replace

from robustff.case import Case, case_to_toml, parse_case
from robustff.case.record_section import records_folder
from robustff.errors import CaseError

__all__ = ["EDIT_SOURCE", "validated", "number_from_text"]

#: Source name given to the loader for edits; stripped from messages shown inline.
EDIT_SOURCE = "edit"


def validated(case: Case) -> Case:
    """The case as the loader reads it back from its own TOML text.

    Raises
    ------
    CaseError
        With the loader's messages (source ``edit``) when the case would not load.
    """
    try:
        text = case_to_toml(case)
    except (TypeError, ValueError) as exc:  # a value the writer cannot express
        raise CaseError(f"{EDIT_SOURCE}: {exc}") from None
    # the record files are found where the case's records were read from
    return replace(parse_case(text, source=EDIT_SOURCE, base_dir=records_folder(case)),
                   source_path=case.source_path)


def number_from_text(field: str, text: str, optional: bool) -> float | None:
    """The number typed in ``field``; None for a blank optional field.

    Raises
    ------
    CaseError
        "must be a number" / "must be a finite number", naming the field and the text.
    """
    stripped = text.strip()
    if not stripped and optional:
        return None
    try:
        value = float(stripped)
    except ValueError:
        raise CaseError(f"{EDIT_SOURCE}: {field}: must be a number (got {text!r})") from None
    if not math.isfinite(value):
        raise CaseError(f"{EDIT_SOURCE}: {field}: must be a finite number (got {text!r})")
    return value
