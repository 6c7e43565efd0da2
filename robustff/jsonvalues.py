"""Numbers made fit for JSON: NaN and infinities become None (JSON has neither).

One home for the conversion, so that every JSON file and printout (``summary.json``, the tune and
fit ``--json`` output) writes a missing or unbounded number the same way, as ``null``.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["json_float", "json_safe"]


def json_float(x: float) -> float | None:
    """Return ``x`` as a Python float, or None where it is NaN or +-inf.

    Parameters
    ----------
    x : float
        Any real number (Python or numpy scalar); the unit is the caller's.

    Returns
    -------
    float or None
    """
    x = float(x)
    return x if math.isfinite(x) else None


def json_safe(value: object) -> object:
    """A copy with every float passed through :func:`json_float` and numpy scalars made plain.

    Dicts, lists and tuples are copied recursively (tuples become lists, as JSON has no tuple);
    numpy integers and booleans become ``int`` and ``bool``; anything else is returned as is.
    """
    if isinstance(value, dict):
        return {key: json_safe(item) for key, item in value.items()}
    if isinstance(value, (list, tuple)):
        return [json_safe(item) for item in value]
    if isinstance(value, (float, np.floating)):
        return json_float(value)
    if isinstance(value, np.integer):
        return int(value)
    if isinstance(value, np.bool_):
        return bool(value)
    return value
