"""The control valve between the controller output and the process: characteristic and stem.

The controller output's range ``[output_low, output_high]`` is the valve's travel, 0 to 100 %.
The process model's gain is the engineer's bump-test gain at the nominal position (the output
bias), so the valve changes only the incremental gain away from it: the process sees
``w = span (f(x) - f(x0)) / f'(x0)`` (output units, deviation from the bias) for a stem at
travel fraction ``x``, with ``f`` the flow fraction, ``x0`` the nominal position and ``span``
the output range. A linear valve is the identity.

Characteristics: ``"linear"`` (``f = x``); ``"equal-percentage"``, the inherent characteristic
``f = R^(x - 1)`` with rangeability ``R`` (ANSI/ISA-75.11.01, "Flow Equations for Sizing Control
Valves": inherent flow characteristic and rangeability); ``"installed"``, a table of stem
position (%) against flow fraction, interpolated linearly.

The stem (in this order, each optional): stiction as the two-parameter stick-slip model of
Choudhury, Thornhill and Shah ("Modelling valve stiction", Control Engineering Practice 13
(2005) 641-658), ``S`` (deadband plus stickband) and ``J`` (slip jump), both % of travel; or a
deadband (backlash) of ``deadband`` % of travel; both act on the controller output once per scan.
Then a rate limit (% of travel per time unit) and a first-order actuator lag (time units), at
the simulator's internal step.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = [
    "VALVE_CHARACTERISTICS",
    "VALVE_PARAMETERS",
    "VALVE_PARAMETER_UNITS",
    "ValveModel",
    "valve_code",
]

VALVE_CHARACTERISTICS: tuple[str, ...] = ("linear", "equal-percentage", "installed")
#: The valve's numeric parameters (case keys under ``[valve]``, uncertain as ``valve.NAME``).
VALVE_PARAMETERS: tuple[str, ...] = (
    "rangeability", "rate_limit", "deadband", "stiction_s", "stiction_j", "time_constant",
)
#: Unit of each parameter; ``{time}`` is the case's time unit.
VALVE_PARAMETER_UNITS: dict[str, str] = {
    "rangeability": "-", "rate_limit": "%/{time}", "deadband": "%", "stiction_s": "%",
    "stiction_j": "%", "time_constant": "{time}",
}


@dataclass(frozen=True)
class ValveModel:
    """A control valve; every number may also be uncertain (``valve.NAME``).

    Parameters
    ----------
    characteristic : {"linear", "equal-percentage", "installed"}
    rangeability : float
        ``R`` of the equal-percentage characteristic (> 1, dimensionless).
    installed : tuple of (float, float)
        For ``"installed"``: (stem position in % of travel, flow fraction 0..1) pairs,
        positions increasing from 0 to 100, flows non-decreasing.
    rate_limit : float
        Largest stem speed, % of travel per time unit (0: no limit).
    deadband : float
        Backlash, % of travel (0: none).
    stiction_s, stiction_j : float
        Choudhury's ``S`` (deadband plus stickband) and ``J`` (slip jump), % of travel.
    time_constant : float
        First-order actuator lag, time units (0: none).
    """

    characteristic: str = "linear"
    rangeability: float = 50.0
    installed: tuple[tuple[float, float], ...] = ()
    rate_limit: float = 0.0
    deadband: float = 0.0
    stiction_s: float = 0.0
    stiction_j: float = 0.0
    time_constant: float = 0.0

    def flow_fraction(self, position: np.ndarray | float) -> np.ndarray:
        """Flow fraction ``f`` at stem position(s) in % of travel (0..100)."""
        x = np.clip(np.asarray(position, dtype=float) / 100.0, 0.0, 1.0)
        if self.characteristic == "equal-percentage":
            return self.rangeability ** (x - 1.0)
        if self.characteristic == "installed":
            table = np.asarray(self.installed, dtype=float)
            return np.interp(100.0 * x, table[:, 0], table[:, 1])
        return x

    def slope(self, position: float) -> float:
        """``df/dx`` at a position (% of travel), per unit travel fraction (0..1)."""
        x = min(max(position / 100.0, 0.0), 1.0)
        if self.characteristic == "equal-percentage":
            return math.log(self.rangeability) * self.rangeability ** (x - 1.0)
        if self.characteristic == "installed":
            table = np.asarray(self.installed, dtype=float)
            p, f = table[:, 0] / 100.0, table[:, 1]
            segment = int(np.clip(np.searchsorted(p, x, side="right") - 1, 0, len(p) - 2))
            return float((f[segment + 1] - f[segment]) / (p[segment + 1] - p[segment]))
        return 1.0

    def table(self) -> np.ndarray:
        """The characteristic as the simulator reads it: (position fraction, flow fraction)
        rows (the installed table, else an empty (0, 2) array)."""
        if self.characteristic != "installed":
            return np.zeros((0, 2))
        table = np.asarray(self.installed, dtype=float)
        return np.ascontiguousarray(np.column_stack([table[:, 0] / 100.0, table[:, 1]]))


def valve_code(valve: ValveModel | None) -> int:
    """The simulator's code: 0 no valve (ideal actuator), 1 linear, 2 equal-percentage,
    3 installed table."""
    if valve is None:
        return 0
    return 1 + VALVE_CHARACTERISTICS.index(valve.characteristic)
