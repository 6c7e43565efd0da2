"""A steam-heated stirred tank: the energy balance of a well-mixed liquid hold-up.

The process stream ``w`` enters at ``T_in`` and leaves at the tank temperature ``T``; steam
``w_s`` condenses in a coil or jacket and gives up its latent heat ``lambda`` (the condensate
leaves saturated; heat losses and the coil's own heat capacity are neglected):

    m c_p dT/dt = w c_p (T_in - T) + w_s lambda

(the stirred-tank heater of Seborg, Edgar and Mellichamp, Process Dynamics and Control,
chapter 2, with the heat input ``Q = w_s lambda``). At steady state
``T = T_in + w_s lambda / (w c_p)``, and the steam flow that holds the outlet at ``T_sp`` is

    w_s = w c_p (T_sp - T_in) / lambda.

Linearised at the operating point: ``dT/dw_s = lambda / (w c_p)``, ``dT/dw = -(T - T_in) / w``
and ``dT/dT_in = 1``, all with the time constant ``m / w`` (the heater's gain falls as the flow
rises); the temperature element sits after a plug-flow outlet pipe (dead time
``rho V_pipe / w``) and has its own dead time.

Units: mass flows in kg per time unit of the case, temperatures degC, c_p kJ/(kg K), lambda
kJ/kg, density kg/m3, volumes m3.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import ClassVar

from robustff.plant.balance_plant import BalanceParameter, BalancePlant

__all__ = ["HeatedTank"]


@dataclass(frozen=True)
class HeatedTank(BalancePlant):
    """The heated tank's physical parameters and operating point.

    Parameters
    ----------
    density : float
        Liquid density, kg/m3.
    volume : float
        Liquid volume in the tank, m3.
    heat_capacity : float
        Liquid specific heat capacity ``c_p``, kJ/(kg K).
    latent_heat : float
        Heat given up per kg of steam condensed, kJ/kg.
    process_flow : float
        Process stream's mass flow at the operating point, kg per time unit.
    inlet_temperature : float
        Process stream's inlet temperature at the operating point, degC.
    outlet_temperature : float
        Outlet temperature at the operating point: the setpoint, degC (above the inlet's, so
        that the steam flow is positive).
    pipe_volume : float
        Volume of the outlet pipe from the tank to the temperature element, m3 (plug flow).
    sensor_dead_time : float
        The temperature measurement's own dead time, time units.
    flow_loop_time_constant : float
        Lag of the steam flow loop (the steam flow follows the controller's setpoint as a
        first-order lag), time units; 0 for an ideal flow loop.
    """

    density: float
    volume: float
    heat_capacity: float
    latent_heat: float
    process_flow: float
    inlet_temperature: float
    outlet_temperature: float
    pipe_volume: float = 0.0
    sensor_dead_time: float = 0.0
    flow_loop_time_constant: float = 0.0

    KIND: ClassVar[str] = "heated-tank"
    CODE: ClassVar[int] = 1
    MANIPULATED: ClassVar[str] = "steam_flow"
    DISTURBANCES: ClassVar[tuple[str, ...]] = ("process_flow", "inlet_temperature")
    LAW_TEXT: ClassVar[str] = "w_s = w c_p (T_sp - T_in) / lambda"
    OUTPUT: ClassVar[str] = "outlet_temperature"
    SETPOINT: ClassVar[str] = "outlet_temperature"
    PARAMETERS: ClassVar[tuple[BalanceParameter, ...]] = (
        BalanceParameter("density", "kg/m3", "liquid density"),
        BalanceParameter("volume", "m3", "liquid volume in the tank"),
        BalanceParameter("heat_capacity", "kJ/(kg K)", "liquid specific heat capacity"),
        BalanceParameter("latent_heat", "kJ/kg", "heat given up per kg of steam"),
        BalanceParameter("process_flow", "kg/{time}",
                         "process stream's flow at the operating point"),
        BalanceParameter("inlet_temperature", "degC",
                         "process stream's inlet temperature at the operating point",
                         "temperature"),
        BalanceParameter("outlet_temperature", "degC",
                         "outlet temperature at the operating point, the setpoint",
                         "temperature"),
        BalanceParameter("pipe_volume", "m3", "outlet pipe volume, tank to temperature element",
                         "non-negative", False),
        BalanceParameter("sensor_dead_time", "{time}",
                         "the temperature measurement's own dead time", "non-negative", False),
        BalanceParameter("flow_loop_time_constant", "{time}", "lag of the steam flow loop",
                         "non-negative", False),
    )
    SIGNAL_UNITS: ClassVar[dict[str, str]] = {
        "steam_flow": "kg/{time}", "process_flow": "kg/{time}", "inlet_temperature": "degC",
        "outlet_temperature": "degC",
    }
    SIGNAL_NAMES: ClassVar[dict[str, str]] = {
        "steam_flow": "steam flow", "process_flow": "process stream flow",
        "inlet_temperature": "inlet temperature", "outlet_temperature": "outlet temperature",
    }

    def holdup(self) -> float:
        """Tank hold-up ``rho V``, kg."""
        return self.density * self.volume

    def pipe_holdup(self) -> float:
        """Outlet pipe hold-up ``rho V_pipe``, kg."""
        return self.density * self.pipe_volume

    def measurement_dead_time(self) -> float:
        """The temperature measurement's dead time, time units."""
        return self.sensor_dead_time

    def rates(self, inputs: dict[str, float]) -> tuple[float, float]:
        """Outflow ``w`` (kg per time unit) and ``w T_in + w_s lambda / c_p`` (kg degC per
        time unit: the energy inflow over ``c_p``)."""
        w = inputs["process_flow"]
        return w, (w * inputs["inlet_temperature"]
                   + inputs["steam_flow"] * self.latent_heat / self.heat_capacity)

    def balance_manipulated(self, setpoint: float, inputs: dict[str, float]) -> float:
        """``w_s = w c_p (T_sp - T_in) / lambda``, kg per time unit."""
        return (inputs["process_flow"] * self.heat_capacity
                * (setpoint - inputs["inlet_temperature"]) / self.latent_heat)

    def gains(self) -> dict[str, float]:
        """``dT/dw_s = lambda/(w c_p)`` and ``dT/dw = -(T - T_in)/w`` (degC per kg per time
        unit), ``dT/dT_in = 1``."""
        w = self.process_flow
        return {
            "steam_flow": self.latent_heat / (w * self.heat_capacity),
            "process_flow": -(self.outlet_temperature - self.inlet_temperature) / w,
            "inlet_temperature": 1.0,
        }

    def kernel_constant(self) -> float:
        """``lambda / c_p``, K per (kg steam per kg liquid)."""
        return self.latent_heat / self.heat_capacity
