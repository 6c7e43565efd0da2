"""Unit text shared by every printout: one unit per another."""

from __future__ import annotations

__all__ = ["per_unit"]


def per_unit(numerator: str, denominator: str) -> str:
    """``"%/(m3/h)"``: a unit per another, the denominator bracketed when it is compound."""
    if any(mark in denominator for mark in "/* "):
        denominator = f"({denominator})"
    return f"{numerator}/{denominator}"
