"""A stirred blending tank: a manipulated stream and a wild stream of different compositions.

Component balance of the well-mixed tank (constant hold-up ``m = rho V``: the level is held by
an overflow or a level loop), with the wild stream ``w1`` of mass fraction ``x1`` and the
manipulated stream ``w2`` of mass fraction ``x2``:

    m dx/dt = w1 x1 + w2 x2 - (w1 + w2) x

(Seborg, Edgar and Mellichamp, Process Dynamics and Control, chapter 2, the stirred blending
tank). At steady state ``x = (w1 x1 + w2 x2) / (w1 + w2)``, and the manipulated flow that
holds the outlet at ``x_sp`` is the balance solved for ``w2``:

    w2 = w1 (x_sp - x1) / (x2 - x_sp).

Linearised at the operating point (``w = w1 + w2``): ``dx/dw2 = (x2 - x) / w``,
``dx/dw1 = (x1 - x) / w``, ``dx/dx1 = w1 / w``, all with the time constant ``m / w``; the
analyzer sits after a plug-flow sample pipe of volume ``V_pipe`` (dead time ``rho V_pipe / w``)
and adds its own dead time.

Units: mass flows in kg per time unit of the case, compositions as mass fractions, density
kg/m3, volumes m3.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import ClassVar

from robustff.plant.balance_plant import BalanceParameter, BalancePlant

__all__ = ["BlendingTank"]


@dataclass(frozen=True)
class BlendingTank(BalancePlant):
    """The blending tank's physical parameters and operating point.

    Parameters
    ----------
    density : float
        Liquid density, kg/m3 (taken equal for both streams and the blend).
    volume : float
        Liquid volume in the tank, m3.
    wild_flow : float
        Wild stream's mass flow at the operating point, kg per time unit.
    wild_composition : float
        Wild stream's mass fraction at the operating point.
    manipulated_composition : float
        Manipulated stream's mass fraction.
    outlet_composition : float
        Outlet mass fraction at the operating point: the setpoint. Must lie strictly between
        the two streams' compositions (else no positive manipulated flow reaches it).
    pipe_volume : float
        Volume of the sample pipe from the tank to the analyzer, m3 (plug flow).
    analyzer_dead_time : float
        The analyzer's own dead time, time units.
    flow_loop_time_constant : float
        Lag of the manipulated stream's flow loop (its flow follows the controller's setpoint
        as a first-order lag), time units; 0 for an ideal flow loop.
    """

    density: float
    volume: float
    wild_flow: float
    wild_composition: float
    manipulated_composition: float
    outlet_composition: float
    pipe_volume: float = 0.0
    analyzer_dead_time: float = 0.0
    flow_loop_time_constant: float = 0.0

    KIND: ClassVar[str] = "blending-tank"
    CODE: ClassVar[int] = 0
    MANIPULATED: ClassVar[str] = "manipulated_flow"
    DISTURBANCES: ClassVar[tuple[str, ...]] = ("wild_flow", "wild_composition")
    LAW_TEXT: ClassVar[str] = "w2 = w1 (x_sp - x1) / (x2 - x_sp)"
    OUTPUT: ClassVar[str] = "outlet_composition"
    SETPOINT: ClassVar[str] = "outlet_composition"
    PARAMETERS: ClassVar[tuple[BalanceParameter, ...]] = (
        BalanceParameter("density", "kg/m3", "liquid density"),
        BalanceParameter("volume", "m3", "liquid volume in the tank"),
        BalanceParameter("wild_flow", "kg/{time}", "wild stream's flow at the operating point"),
        BalanceParameter("wild_composition", "mass fraction",
                         "wild stream's composition at the operating point", "fraction"),
        BalanceParameter("manipulated_composition", "mass fraction",
                         "manipulated stream's composition", "fraction"),
        BalanceParameter("outlet_composition", "mass fraction",
                         "outlet composition at the operating point, the setpoint", "fraction"),
        BalanceParameter("pipe_volume", "m3", "sample pipe volume, tank to analyzer",
                         "non-negative", False),
        BalanceParameter("analyzer_dead_time", "{time}", "the analyzer's own dead time",
                         "non-negative", False),
        BalanceParameter("flow_loop_time_constant", "{time}",
                         "lag of the manipulated stream's flow loop", "non-negative", False),
    )
    SIGNAL_UNITS: ClassVar[dict[str, str]] = {
        "manipulated_flow": "kg/{time}", "wild_flow": "kg/{time}",
        "wild_composition": "mass fraction", "outlet_composition": "mass fraction",
    }
    SIGNAL_NAMES: ClassVar[dict[str, str]] = {
        "manipulated_flow": "manipulated stream flow", "wild_flow": "wild stream flow",
        "wild_composition": "wild stream composition",
        "outlet_composition": "outlet composition (analyzer)",
    }

    def holdup(self) -> float:
        """Tank hold-up ``rho V``, kg."""
        return self.density * self.volume

    def pipe_holdup(self) -> float:
        """Sample pipe hold-up ``rho V_pipe``, kg."""
        return self.density * self.pipe_volume

    def measurement_dead_time(self) -> float:
        """The analyzer's dead time, time units."""
        return self.analyzer_dead_time

    def rates(self, inputs: dict[str, float]) -> tuple[float, float]:
        """Outflow ``w1 + w2`` (kg per time unit) and component inflow ``w1 x1 + w2 x2``."""
        w1, w2 = inputs["wild_flow"], inputs["manipulated_flow"]
        return w1 + w2, w1 * inputs["wild_composition"] + w2 * self.manipulated_composition

    def balance_manipulated(self, setpoint: float, inputs: dict[str, float]) -> float:
        """``w2 = w1 (x_sp - x1) / (x2 - x_sp)``, kg per time unit."""
        return (inputs["wild_flow"] * (setpoint - inputs["wild_composition"])
                / (self.manipulated_composition - setpoint))

    def gains(self) -> dict[str, float]:
        """``dx/dw2 = (x2 - x)/w``, ``dx/dw1 = (x1 - x)/w`` per kg per time unit, and
        ``dx/dx1 = w1/w`` (mass fraction per mass fraction)."""
        inputs = self.operating_inputs()
        outflow, _ = self.rates(inputs)
        x = self.outlet_composition
        return {
            "manipulated_flow": (self.manipulated_composition - x) / outflow,
            "wild_flow": (self.wild_composition - x) / outflow,
            "wild_composition": self.wild_flow / outflow,
        }

    def kernel_constant(self) -> float:
        """The manipulated stream's composition ``x2``."""
        return self.manipulated_composition
