"""Free text from a case file made safe to print or copy into a report."""

from __future__ import annotations

__all__ = ["printable_title", "control_characters"]


def _is_control(ch: str) -> bool:
    code = ord(ch)
    return code < 32 or 127 <= code < 160


def control_characters(text: str) -> list[str]:
    """The distinct control characters of ``text`` (NUL, escape, line breaks...), as ``U+XXXX``."""
    return sorted({f"U+{ord(ch):04X}" for ch in text if _is_control(ch)})


def printable_title(title: str) -> str:
    """``title`` with every control character replaced by a space and runs of spaces collapsed.

    A title is free text from the case file; a control character copied into a report or a
    terminal would corrupt it (a NUL ends the text for many tools, an escape code recolours the
    terminal, a line break splits a Markdown heading).
    """
    cleaned = "".join(" " if _is_control(ch) else ch for ch in title)
    return " ".join(cleaned.split())
