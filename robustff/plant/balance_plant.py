"""What every plant built from a material or energy balance has in common.

Both kinds here (:mod:`robustff.plant.blending_tank`, :mod:`robustff.plant.heated_tank`) are a
well-mixed hold-up of constant mass ``m`` whose one state ``y`` (a composition or a
temperature) obeys

    m dy/dt = S(u, d) - w(u, d) y

with ``w`` the outflow (kg per time unit) and ``S`` the inflow of the conserved quantity in the
same units times ``y``'s unit. The outflow then runs through a plug-flow pipe of hold-up
``rho V_pipe`` to the measurement, which adds its own fixed dead time. At an operating point
the steady state is ``y = S / w``, and the linearisation of every input path is first order
plus dead time:

    gain = (dS/du_i - y dw/du_i) / w,   time constant = m / w,
    dead time = rho V_pipe / w + measurement dead time.

The plain-python/numpy layer: no compiled code, no UI. The compiled simulation of the same
equations is :mod:`robustff.engine.balance_kernel`.
"""

from __future__ import annotations

from dataclasses import dataclass, fields, replace
from typing import ClassVar

import numpy as np

from robustff.plant.models import TransferModel

__all__ = ["BalanceParameter", "BalancePlant", "PATH_PROCESS"]

#: Name of the manipulated input's path (the controller output to the measured CV).
PATH_PROCESS = "process"


@dataclass(frozen=True)
class BalanceParameter:
    """One physical parameter or operating-point value of a balance plant.

    Parameters
    ----------
    name : str
        Key in the case's ``[process]`` table and in ``[uncertainty]`` (``process.NAME``).
    unit : str
        Unit, with ``{time}`` for the case's time unit (``"kg/{time}"``).
    meaning : str
        Plain-language meaning for messages and printouts.
    bound : str
        What values are physical: ``"positive"`` (> 0), ``"non-negative"`` (>= 0),
        ``"fraction"`` (0 .. 1) or ``"temperature"`` (above absolute zero, degC).
    required : bool
        False when the parameter has a default of 0 (pipe volume, measurement dead time).
    """

    name: str
    unit: str
    meaning: str
    bound: str = "positive"
    required: bool = True

    def unit_text(self, time_unit: str) -> str:
        """The unit with the case's time unit filled in."""
        return self.unit.format(time=time_unit)

    def violation(self, value: float) -> str | None:
        """Why ``value`` is not physical for this parameter, or None when it is."""
        if self.bound == "positive" and not value > 0.0:
            return "must be > 0"
        if self.bound == "non-negative" and not value >= 0.0:
            return "must be >= 0"
        if self.bound == "fraction" and not 0.0 <= value <= 1.0:
            return "must be a mass fraction between 0 and 1"
        if self.bound == "temperature" and not value > -273.15:
            return "must be above absolute zero (-273.15 degC)"
        return None


@dataclass(frozen=True)
class BalancePlant:
    """Base of the balance plant kinds; subclasses are frozen dataclasses of their parameters.

    Class attributes name the plant's signals: ``KIND`` (the case file's ``model``),
    ``MANIPULATED`` (the manipulated input), ``DISTURBANCES`` (the other inputs, in the order
    the simulation keeps them), ``OUTPUT`` (the measured state), with their units.
    """

    KIND: ClassVar[str] = ""
    CODE: ClassVar[int] = -1
    MANIPULATED: ClassVar[str] = ""
    DISTURBANCES: ClassVar[tuple[str, ...]] = ()
    OUTPUT: ClassVar[str] = ""
    #: The balance law solved for the manipulated input, as printed.
    LAW_TEXT: ClassVar[str] = ""
    #: The operating-point parameter that is the controlled variable's value (the setpoint).
    SETPOINT: ClassVar[str] = ""
    PARAMETERS: ClassVar[tuple[BalanceParameter, ...]] = ()
    #: Unit of each input and of the output, ``{time}`` for the case's time unit.
    SIGNAL_UNITS: ClassVar[dict[str, str]] = {}
    SIGNAL_NAMES: ClassVar[dict[str, str]] = {}

    # -- to be provided by each kind -------------------------------------------------------

    def holdup(self) -> float:
        """Mass in the well-mixed hold-up, kg."""
        raise NotImplementedError

    def pipe_holdup(self) -> float:
        """Mass in the plug-flow pipe from the hold-up to the measurement, kg."""
        raise NotImplementedError

    def measurement_dead_time(self) -> float:
        """Fixed dead time of the measurement itself, time units."""
        raise NotImplementedError

    def rates(self, inputs: dict[str, float]) -> tuple[float, float]:
        """Outflow ``w`` (kg per time unit) and inflow ``S`` of the balanced quantity.

        ``inputs`` maps :attr:`MANIPULATED` and every name of :attr:`DISTURBANCES` to its value
        (in :attr:`SIGNAL_UNITS`). ``S`` is in kg per time unit times the output's unit.
        """
        raise NotImplementedError

    def balance_manipulated(self, setpoint: float, inputs: dict[str, float]) -> float:
        """The manipulated input that holds the output at ``setpoint`` at steady state."""
        raise NotImplementedError

    # -- shared ----------------------------------------------------------------------------

    @classmethod
    def parameter_names(cls) -> tuple[str, ...]:
        """Names of the kind's parameters, in the order of the case-file documentation."""
        return tuple(p.name for p in cls.PARAMETERS)

    @classmethod
    def parameter(cls, name: str) -> BalanceParameter:
        """The description of parameter ``name``."""
        for parameter in cls.PARAMETERS:
            if parameter.name == name:
                return parameter
        raise KeyError(f"a {cls.KIND} has no parameter {name!r}")

    @classmethod
    def signal_unit(cls, signal: str, time_unit: str) -> str:
        """Unit of an input or of the output, with the time unit filled in."""
        return cls.SIGNAL_UNITS[signal].format(time=time_unit)

    def with_parameter(self, name: str, value: float) -> BalancePlant:
        """A copy with one parameter changed."""
        self.parameter(name)
        return replace(self, **{name: float(value)})

    def parameters(self) -> dict[str, float]:
        """Every parameter by name."""
        return {f.name: float(getattr(self, f.name)) for f in fields(self)}

    def operating_inputs(self) -> dict[str, float]:
        """Every input at the operating point: the disturbances as given, the manipulated
        input from the balance at the operating setpoint."""
        inputs = {name: float(getattr(self, name)) for name in self.DISTURBANCES}
        inputs[self.MANIPULATED] = self.balance_manipulated(self.setpoint(), inputs)
        return inputs

    def setpoint(self) -> float:
        """The controlled variable at the operating point (output unit)."""
        return float(getattr(self, self.SETPOINT))

    def steady_output(self, inputs: dict[str, float]) -> float:
        """The steady-state output for held inputs, ``S / w`` (output unit)."""
        outflow, inflow = self.rates(inputs)
        return inflow / outflow

    def time_constant(self, inputs: dict[str, float] | None = None) -> float:
        """``m / w`` at ``inputs`` (default: the operating point), time units."""
        outflow, _ = self.rates(inputs or self.operating_inputs())
        return self.holdup() / outflow

    def dead_time(self, inputs: dict[str, float] | None = None) -> float:
        """Pipe transport delay at the outflow of ``inputs`` plus the measurement's dead
        time, time units."""
        outflow, _ = self.rates(inputs or self.operating_inputs())
        return self.pipe_holdup() / outflow + self.measurement_dead_time()

    def derivative(self, output: float, inputs: dict[str, float]) -> float:
        """``dy/dt = (S - w y) / m``, output unit per time unit."""
        outflow, inflow = self.rates(inputs)
        return (inflow - outflow * output) / self.holdup()

    def gains(self) -> dict[str, float]:
        """Steady-state gain of the output to every input at the operating point, output
        unit per input unit (analytic; see each kind)."""
        raise NotImplementedError

    def flow_lag(self) -> float:
        """Lag of the manipulated stream's flow loop, time units (0: ideal)."""
        return float(getattr(self, "flow_loop_time_constant", 0.0))

    def linear_paths(self) -> dict[str, TransferModel]:
        """The linearisation at the operating point: ``"process"`` (the manipulated input's
        flow setpoint: FOPDT, or SOPDT with the flow loop's lag) and one FOPDT per
        disturbance, gains in output unit per input unit."""
        tau, theta = self.time_constant(), self.dead_time()
        gains = self.gains()
        lag = self.flow_lag()
        process = (TransferModel("sopdt", gains[self.MANIPULATED], tau, lag, theta) if lag > 0.0
                   else TransferModel("fopdt", gains[self.MANIPULATED], tau, 0.0, theta))
        paths = {PATH_PROCESS: process}
        for name in self.DISTURBANCES:
            paths[name] = TransferModel("fopdt", gains[name], tau, 0.0, theta)
        return paths

    def numeric_gains(self, relative_step: float = 1e-6) -> dict[str, float]:
        """Central finite differences of :meth:`steady_output` (a check of :meth:`gains`)."""
        base = self.operating_inputs()
        result = {}
        for name, value in base.items():
            step = relative_step * max(abs(value), 1.0)
            high, low = dict(base), dict(base)
            high[name], low[name] = value + step, value - step
            result[name] = (self.steady_output(high) - self.steady_output(low)) / (2.0 * step)
        return result

    def kernel_row(self) -> np.ndarray:
        """The numbers the compiled simulation reads for this plant (see
        :mod:`robustff.engine.balance_kernel`): hold-up kg, pipe hold-up kg, measurement dead
        time, the kind's constant, the manipulated input and the disturbances at the
        operating point, the steady output, the flow loop's lag (time units)."""
        inputs = self.operating_inputs()
        return np.array([self.holdup(), self.pipe_holdup(), self.measurement_dead_time(),
                         self.kernel_constant(), inputs[self.MANIPULATED],
                         *(inputs[name] for name in self.DISTURBANCES), self.setpoint(),
                         self.flow_lag()])

    def kernel_constant(self) -> float:
        """The kind's one constant in the compiled balance (see each kind)."""
        raise NotImplementedError
