"""Argument types shared by the sub-commands (argparse calls them; errors become usage errors).

The bounds are the case file's own (:mod:`robustff.case.loader`), so a number refused in a case
file is refused on the command line with the same limits.
"""

from __future__ import annotations

import argparse

from robustff.case.loader import MAX_SAMPLES, MAX_SEED, MIN_SAMPLES

__all__ = ["positive_int", "non_negative_int", "sample_count", "seed_value", "whole_number"]


def whole_number(text: str, low: int, high: int | None = None) -> int:
    """A whole number in ``[low, high]`` (``high`` None: no upper bound)."""
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a whole number, got {text!r}") from None
    if value < low or (high is not None and value > high):
        span = f">= {low:,}" if high is None else f"from {low:,} to {high:,}"
        raise argparse.ArgumentTypeError(f"expected a whole number {span}, got {text!r}")
    return value


def non_negative_int(text: str) -> int:
    """A whole number >= 0."""
    return whole_number(text, 0)


def positive_int(text: str) -> int:
    """A whole number >= 1."""
    return whole_number(text, 1)


def sample_count(text: str) -> int:
    """A number of perturbed plants within the case file's limits."""
    return whole_number(text, MIN_SAMPLES, MAX_SAMPLES)


def seed_value(text: str) -> int:
    """A random seed within the case file's limits (0 to 2**63 - 1)."""
    return whole_number(text, 0, MAX_SEED)
