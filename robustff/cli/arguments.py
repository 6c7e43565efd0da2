"""Argument types shared by the sub-commands (argparse calls them; errors become usage errors)."""

from __future__ import annotations

import argparse

__all__ = ["positive_int", "non_negative_int"]


def non_negative_int(text: str) -> int:
    """A whole number >= 0."""
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a whole number, got {text!r}") from None
    if value < 0:
        raise argparse.ArgumentTypeError(f"expected a number >= 0, got {text!r}")
    return value


def positive_int(text: str) -> int:
    """A whole number >= 1."""
    value = non_negative_int(text)
    if value < 1:
        raise argparse.ArgumentTypeError(f"expected a number >= 1, got {text!r}")
    return value
