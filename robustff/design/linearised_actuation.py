"""The path from the controller output to the process input, linearised at the nominal point.

The feedforward is designed on the loop as installed, linearised at the nominal operating point
(the margins, :mod:`robustff.design.margins`, take the same linearisation):

* the valve's incremental slope at the nominal position is 1 (output units per output unit):
  the simulator feeds the process ``w = span (f(x) - f(x0)) / f'(x0)``, whose derivative at the
  nominal position ``x0`` is 1, because the process model's gain is the bump-test gain taken
  there; only the actuator lag ``Va = 1/(tau_a s + 1)`` stays;
* with a secondary (flow) loop the feedforward moves the flow setpoint, and the flow follows
  through the closed secondary loop ``T = Cs Ps Va / (1 + Cs Ps Va)`` (its PI ``Cs``, its path
  ``Ps``, the actuator lag).

For the lead-lag design ``T`` is reduced to ``exp(-theta_T s) / (tau_T s + 1)``:

* ``T(0) = 1`` (integral action in ``Cs``);
* its first moment (mean delay) is exact: with ``Ls = Cs Ps Va ~ k_i / s`` at low frequency,
  ``k_i = Kc K / Ti``, one has ``T = 1 - s / k_i + O(s^2)``, so
  ``-T'(0) = Ti / (Kc K)``, the integral of the secondary error after a unit setpoint step
  (the final-value argument of Astrom and Hagglund, Advanced PID Control, ISA 2006, for the
  integrated error of a PI loop);
* ``theta_T`` is the secondary path's effective dead time by Skogestad's half rule (its dead
  time, half of the second-largest of its lags and the actuator lag, all smaller lags whole;
  Skogestad, "Simple analytic rules for model reduction and PID controller tuning",
  J. Process Control 13 (2003) 291-309, section 3), the dead time the SIMC rule of that paper
  leaves in its target response ``exp(-theta s) / (tau_c s + 1)``; ``tau_T`` is the rest of the
  first moment, so a SIMC-tuned flow loop with ``Ti = tau`` gets ``tau_T = tau_c``.

The reduction keeps ``T(0)`` and ``T'(0)``, so its error grows as ``(w M)^2`` with ``M`` the
first moment: within 3 % of ``|T(0)|`` up to ``w M = 0.1`` (the primary loop's frequencies when
the flow loop is ten times faster; tested against python-control), not beyond for an
aggressive, resonant flow loop. It keeps the first moment as the lead-lag design keeps that of
``-Gd / Gp`` (:func:`robustff.design.tuning.design_feedforward`). An integrating secondary path
has a first moment of zero (two integrators in ``Ls``); its closed loop is not reduced (left
out of the design, with a note). Nothing here imports the UI, python-control or scipy.
"""

from __future__ import annotations

from dataclasses import dataclass

from robustff.case import Case
from robustff.plant.models import TransferModel

__all__ = [
    "LinearisedActuation",
    "closed_loop_first_moment",
    "half_rule_dead_time",
    "linearised_actuation",
    "NOMINAL_VALVE_SLOPE",
]

#: The valve's incremental gain at the nominal position, output units per output unit: the
#: simulator normalises the characteristic there (robustff.engine.kernel._valve_step).
NOMINAL_VALVE_SLOPE = 1.0


@dataclass(frozen=True)
class LinearisedActuation:
    """Controller output -> process input at the nominal point: gain 1, lags and a dead time.

    Parameters
    ----------
    lags : tuple of float
        Lags in series, time units: the actuator lag without a secondary loop, the reduced
        closed secondary loop's lag ``tau_T`` with one (empty when none is above 0).
    dead_time : float
        Dead time of the reduced closed secondary loop ``theta_T``, time units (0 without).
    actuator_lag : float
        The valve's actuator lag ``tau_a``, time units (0: none).
    secondary_first_moment : float or None
        ``Ti / (Kc K)`` of the closed secondary loop, time units; None without a secondary
        loop or when it is not reduced.
    note : str
        What the design took, in words with units.
    """

    lags: tuple[float, ...]
    dead_time: float
    actuator_lag: float
    secondary_first_moment: float | None
    note: str

    @property
    def first_moment(self) -> float:
        """Mean delay the actuation adds, time units."""
        return float(sum(self.lags)) + self.dead_time


def closed_loop_first_moment(kc: float, ti: float, path_gain: float) -> float:
    """First moment ``-T'(0) = Ti / (Kc K)`` of a PI loop's setpoint response, time units.

    Parameters
    ----------
    kc : float
        Controller gain, controller output units per measured unit.
    ti : float
        Integral time, time units, > 0.
    path_gain : float
        Gain of the (self-regulating) path the PI drives, measured units per output unit.
    """
    loop_gain = kc * path_gain
    if not (ti > 0.0 and loop_gain > 0.0):
        raise ValueError("a PI loop needs Ti > 0 and Kc K > 0 (negative feedback)")
    return ti / loop_gain


def half_rule_dead_time(dead_time: float, lags: list[float]) -> float:
    """Effective dead time of a path by Skogestad's half rule (FOPDT reduction), time units.

    The largest lag is kept, half of the second-largest and all smaller ones go to the dead
    time (Skogestad, J. Process Control 13 (2003) 291-309, section 3).
    """
    ordered = sorted((tau for tau in lags if tau > 0.0), reverse=True)
    if len(ordered) < 2:
        return dead_time
    return dead_time + 0.5 * ordered[1] + float(sum(ordered[2:]))


def linearised_actuation(case: Case, secondary_kc: float | None = None,
                         secondary_ti: float | None = None) -> LinearisedActuation | None:
    """The actuation path of a case at its nominal point, None for an ideal actuator.

    Parameters
    ----------
    case : Case
        Its ``[valve]`` (actuator lag) and ``[secondary]`` (path model).
    secondary_kc, secondary_ti : float, optional
        The designed secondary PI (ideal form; % per flow unit and time units); required with a
        secondary loop.

    Returns
    -------
    LinearisedActuation or None
        None without a valve lag and without a secondary loop (nothing to add).
    """
    unit = case.time_unit
    actuator = case.valve.time_constant if case.valve is not None else 0.0
    slope = (f"the valve's slope at the nominal position is {NOMINAL_VALVE_SLOPE:g} (the "
             "process gain is the bump-test gain there)" if case.valve is not None else "")
    if case.secondary is None:
        if actuator <= 0.0:
            return None
        note = (f"feedforward designed on the loop linearised at the nominal point: {slope}; "
                f"the actuator lag {actuator:.4g} {unit} is added to the lead")
        return LinearisedActuation((actuator,), 0.0, actuator, None, note)
    if secondary_kc is None or secondary_ti is None:
        raise ValueError("a secondary loop needs its designed PI settings")
    return _closed_secondary(case.secondary.model, actuator, secondary_kc, secondary_ti, unit,
                             slope)


def _closed_secondary(path: TransferModel, actuator: float, kc: float, ti: float, unit: str,
                      slope: str) -> LinearisedActuation:
    """The closed secondary loop reduced to ``exp(-theta_T s) / (tau_T s + 1)``."""
    prefix = "feedforward designed on the loop linearised at the nominal point: " + (
        f"{slope}; " if slope else "")
    if path.integrating:
        return LinearisedActuation((), 0.0, actuator, None, prefix + (
            "the closed secondary loop of an integrating flow path is not reduced (its first "
            "moment is zero); the design leaves it out"))
    moment = closed_loop_first_moment(kc, ti, path.gain)
    lags = [tau for tau in (*path.lags, actuator) if tau > 0.0]
    dead_time = min(half_rule_dead_time(path.dead_time, lags), moment)
    lag = moment - dead_time
    # why: a lag of zero would be a lead of zero in the sum (no information); keep it out
    kept = (lag,) if lag > 0.0 else ()
    with_actuator = f" with the actuator lag {actuator:.4g} {unit}" if actuator > 0.0 else ""
    return LinearisedActuation(kept, dead_time, actuator, moment, prefix + (
        f"the closed secondary loop{with_actuator} (first moment Ti/(Kc K) = "
        f"{moment:.4g} {unit}) reduced to a lag {lag:.4g} {unit} (added to the lead) and a "
        f"dead time {dead_time:.4g} {unit} (added to the process dead time)"))

