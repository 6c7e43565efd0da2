"""Reading primitives for case files: typed fields with one clear message per problem.

Private helpers of :mod:`robustff.case.loader`. A :class:`Problems` collects every problem found
in a file (the loader raises one :class:`~robustff.errors.CaseError` at the end, never at the
first problem); a :class:`Table` reads typed values out of one TOML table and records what is
wrong with each, naming the key path and the offending value.
"""

from __future__ import annotations

import datetime
import difflib
import math
from collections.abc import Iterable, Mapping, Sequence
from typing import Any

__all__ = ["REQUIRED", "Problems", "Table", "show", "join", "as_table"]


class _Required:
    def __repr__(self) -> str:
        return "REQUIRED"


#: Marks a key without a default (missing it is a problem).
REQUIRED: Any = _Required()
_NO_VALUE = object()
_SHOW_LIMIT = 60


def show(value: object) -> str:
    """A short TOML-like rendering of a value for messages (strings quoted, tables named)."""
    if isinstance(value, bool):
        text = "true" if value else "false"
    elif isinstance(value, str):
        text = '"' + value.replace("\\", "\\\\").replace('"', '\\"') + '"'
    elif isinstance(value, float):
        text = repr(value)
    elif isinstance(value, Mapping):
        text = "a table {" + ", ".join(str(key) for key in value) + "}"
    elif isinstance(value, list | tuple):
        text = "[" + ", ".join(show(item) for item in value) + "]"
    elif isinstance(value, datetime.date | datetime.time):
        text = f"the date/time {value.isoformat()}"
    else:
        text = str(value)
    text = text.replace("\n", "\\n")
    return text if len(text) <= _SHOW_LIMIT else text[: _SHOW_LIMIT - 3] + "..."


def join(path: str, key: object) -> str:
    """Key path of ``key`` inside the table at ``path``."""
    key_text = str(key)
    if key_text == "" or any(c in key_text for c in ' ."[]=#'):
        key_text = show(key_text)
    return f"{path}.{key_text}" if path else key_text


class Problems:
    """Collects problem lines ``"FILE: key.path: what is wrong (got VALUE)"``."""

    def __init__(self, source: str) -> None:
        self.source = source
        self.lines: list[str] = []

    def add(self, path: str, what: str, value: object = _NO_VALUE) -> None:
        got = "" if value is _NO_VALUE else f" (got {show(value)})"
        where = f"{path}: " if path else ""
        self.lines.append(f"{self.source}: {where}{what}{got}")

    def __len__(self) -> int:
        return len(self.lines)


def as_table(problems: Problems, path: str, value: object, form: str = "") -> dict[str, Any] | None:
    """``value`` as a table, or ``None`` with a problem recorded."""
    if isinstance(value, dict):
        return value
    hint = f", written {form}" if form else ""
    problems.add(path, f"must be a table{hint}", value)
    return None


def _is_number(value: object) -> bool:
    # bool is a subclass of int in Python, but "true" is not a number in a case file.
    return isinstance(value, int | float) and not isinstance(value, bool)


class Table:
    """One TOML table being read; every getter records a problem instead of raising.

    Getters return ``None`` when the value is missing-and-required or bad; callers compare the
    problem count before and after to know whether the section can be built.
    """

    def __init__(self, problems: Problems, path: str, raw: Mapping[str, Any]) -> None:
        self.problems = problems
        self.path = path
        self.raw = raw

    def has(self, key: str) -> bool:
        return key in self.raw

    def check_keys(self, allowed: Sequence[str], context: str = "") -> None:
        """Record every key that is not in ``allowed`` (with a "did you mean" hint)."""
        for key, value in self.raw.items():
            if key in allowed:
                continue
            close = difflib.get_close_matches(str(key), list(allowed), n=1)
            hint = f"; did you mean {close[0]!r}?" if close else ""
            where = f" {context}" if context else ""
            self.problems.add(
                join(self.path, key),
                f"unknown key{where} (allowed: {', '.join(allowed)}){hint}",
                value,
            )

    def forbid(self, key: str, reason: str) -> None:
        """Record ``key`` as not applicable here, if present."""
        if key in self.raw:
            self.problems.add(join(self.path, key), reason, self.raw[key])

    def _missing(self, key: str, default: Any, what: str) -> bool:
        if key in self.raw:
            return False
        if default is REQUIRED:
            self.problems.add(join(self.path, key), f"missing key ({what})")
        return True

    def number(
        self,
        key: str,
        default: Any = REQUIRED,
        *,
        minimum: float | None = None,
        positive: bool = False,
        nonzero: bool = False,
        what: str = "a number",
    ) -> float | None:
        """A finite float; ``minimum`` is inclusive, ``positive`` means > 0."""
        if self._missing(key, default, what):
            return None if default is REQUIRED else default
        return check_number(
            self.problems, join(self.path, key), self.raw[key],
            minimum=minimum, positive=positive, nonzero=nonzero,
        )

    def integer(self, key: str, default: Any, low: int, high: int) -> int | None:
        """An integer in ``[low, high]``."""
        if self._missing(key, default, "a whole number"):
            return None if default is REQUIRED else default
        value, path = self.raw[key], join(self.path, key)
        if isinstance(value, bool) or not isinstance(value, int):
            self.problems.add(path, "must be a whole number", value)
            return None
        if not low <= value <= high:
            self.problems.add(path, f"must be between {low:,} and {high:,}", value)
            return None
        return value

    def text(
        self, key: str, default: Any = REQUIRED, choices: Iterable[str] | None = None
    ) -> str | None:
        """A string, optionally one of ``choices``."""
        options = tuple(choices) if choices is not None else None
        what = "one of " + ", ".join(repr(c) for c in options) if options else "a text"
        if self._missing(key, default, what):
            return None if default is REQUIRED else default
        value, path = self.raw[key], join(self.path, key)
        if not isinstance(value, str):
            self.problems.add(path, f"must be {what}", value)
            return None
        if options is not None and value not in options:
            self.problems.add(path, f"must be {what}", value)
            return None
        return value

    def numbers(self, key: str, count: int, names: str) -> tuple[float, ...] | None:
        """A list of exactly ``count`` finite numbers, e.g. ``[low, high]``."""
        value, path = self.raw[key], join(self.path, key)
        if not isinstance(value, list) or len(value) != count:
            self.problems.add(path, f"must be a list {names} of {count} numbers", value)
            return None
        result = [check_number(self.problems, path, item) for item in value]
        if any(item is None for item in result):
            return None
        return tuple(float(item) for item in result if item is not None)


def check_number(
    problems: Problems,
    path: str,
    value: object,
    *,
    minimum: float | None = None,
    positive: bool = False,
    nonzero: bool = False,
) -> float | None:
    """``value`` as a finite float meeting the bounds, or ``None`` with a problem recorded."""
    if not _is_number(value):
        problems.add(path, "must be a number", value)
        return None
    try:
        number = float(value)  # type: ignore[arg-type]
    except OverflowError:  # an integer with hundreds of digits
        number = math.inf
    if not math.isfinite(number):
        problems.add(path, "must be a finite number", value)
        return None
    if positive and number <= 0.0:
        problems.add(path, "must be > 0", value)
        return None
    if minimum is not None and number < minimum:
        problems.add(path, f"must be >= {minimum:g}", value)
        return None
    if nonzero and number == 0.0:
        problems.add(path, "must not be zero", value)
        return None
    return number
