"""A lead-lag feedforward rule for a disturbance path faster than the process path.

When the disturbance dead time is shorter than the process dead time, the ideal compensator
``-Gd/Gp`` needs a negative delay and cannot be built. This module implements a rule derived in
``docs/feedforward-rule.md`` (our own derivation, not a published rule):

* gain ``Kff = -Kd/Kp``; lead = the process time constant ``tau_p``; no delay;
* lag ``T`` chosen to minimise the open-loop integral of squared error (ISE) of the controlled
  variable after a unit step of the disturbance, with FOPDT paths and no feedback:

      T* = max(0, tau_d (2 exp(-L / (2 tau_d)) - 1)),   L = theta_p - theta_d > 0,

  ``tau_d`` the disturbance time constant. The ISE is convex in ``T``, so with a floor ``T_min``
  (the compensator must stay proper) the constrained optimum is ``max(T*, T_min)``.

SOPDT paths are first reduced to FOPDT by Skogestad's half rule (half of the second lag to the
first lag, half to the dead time; Skogestad, J. Process Control 13 (2003) 291-309). The process
path is the loop as installed, linearised at the nominal point
(:mod:`robustff.design.linearised_actuation`): the actuator lag, or the reduced closed secondary
loop's lag and dead time, are reduced with the process's own lags by the same rule.
"""

from __future__ import annotations

import math

from robustff.case import Case
from robustff.design.linearised_actuation import half_rule_dead_time
from robustff.design.tuning import FeedforwardSettings, case_actuation, half_rule, tune_secondary
from robustff.plant.kinds import FOPDT, model_kind
from robustff.plant.models import TransferModel

__all__ = [
    "ise_optimal_lag", "open_loop_ise", "feedforward_rule", "RULE_NAME", "LAG_FLOOR_FRACTION",
]

RULE_NAME = "open-loop ISE lag rule (docs/feedforward-rule.md)"
#: Smallest lag as a fraction of the lead (common practice, no source: keeps the high-frequency
#: gain of the compensator at most 10 times its static gain).
LAG_FLOOR_FRACTION = 0.1


def ise_optimal_lag(disturbance_time_constant: float, shortfall: float) -> float:
    """Lag minimising the open-loop ISE, before any floor.

    Parameters
    ----------
    disturbance_time_constant : float
        ``tau_d`` > 0, time units.
    shortfall : float
        ``L = theta_p - theta_d`` >= 0, time units.

    Returns
    -------
    float
        ``max(0, tau_d (2 exp(-L/(2 tau_d)) - 1))``, time units; zero once
        ``L >= 2 tau_d ln 2``.
    """
    if disturbance_time_constant <= 0.0:
        raise ValueError("the disturbance time constant must be > 0")
    if shortfall < 0.0:
        raise ValueError("the dead-time shortfall must be >= 0")
    tau_d = disturbance_time_constant
    return max(0.0, tau_d * (2.0 * math.exp(-shortfall / (2.0 * tau_d)) - 1.0))


def open_loop_ise(lag: float, disturbance_time_constant: float, shortfall: float,
                  disturbance_gain: float = 1.0) -> float:
    """Closed form of the open-loop ISE for a unit disturbance step (see the module docstring).

    Parameters
    ----------
    lag : float
        Compensator lag ``T`` >= 0, time units.
    disturbance_time_constant, shortfall : float
        ``tau_d`` > 0 and ``L`` >= 0, time units.
    disturbance_gain : float
        ``Kd``, CV units per disturbance unit.

    Returns
    -------
    float
        ISE, CV units squared x time units.
    """
    tau_d, big_l = disturbance_time_constant, shortfall
    c = math.exp(-big_l / tau_d)
    before = big_l - 2.0 * tau_d * (1.0 - c) + 0.5 * tau_d * (1.0 - c * c)
    after = 0.5 * lag - 2.0 * c * lag * tau_d / (lag + tau_d) + 0.5 * c * c * tau_d
    return disturbance_gain**2 * (before + after)


def _as_fopdt(model: TransferModel) -> TransferModel | None:
    # The rule is derived for one lag and a dead time: two lags are first reduced by the half
    # rule, an integrating path has no such form.
    kind = model_kind(model.kind)
    if kind.integrating:
        return None
    return half_rule(model) if len(kind.lag_parameters) == 2 else model


def _installed_process(case: Case) -> TransferModel | None:
    """The process path with the actuation linearised at the nominal point, as one FOPDT by the
    half rule (the largest lag kept, half the second to lag and dead time, smaller lags to the
    dead time); None for an integrating process."""
    if model_kind(case.process.kind).integrating:
        return None
    actuation = case_actuation(case, tune_secondary(case))
    if actuation is None:
        return _as_fopdt(case.process)
    lags = sorted((tau for tau in (*case.process.lags, *actuation.lags) if tau > 0.0),
                  reverse=True) or [0.0]
    second = lags[1] if len(lags) > 1 else 0.0
    dead_time = half_rule_dead_time(case.process.dead_time + actuation.dead_time, lags)
    return TransferModel(FOPDT.name, case.process.gain, lags[0] + 0.5 * second, 0.0, dead_time)


def feedforward_rule(case: Case) -> FeedforwardSettings | None:
    """The rule's compensator for a case, or None when it does not apply.

    Parameters
    ----------
    case : Case
        Uses the nominal process and disturbance models and the sample time.

    Returns
    -------
    FeedforwardSettings or None
        ``structure = "lead-lag"``, gain ``-Kd/Kp`` (gain factor 1), lead ``tau_p``, lag
        ``max(T*, 0.1 tau_p, sample time)``, delay 0, ``tau_p`` and the dead times those of the
        installed process path (see the module docstring). None when the disturbance dead time
        is at least the process dead time (with the closed secondary loop's: the ideal delay is
        realizable), when a path is not FOPDT/SOPDT, or when a reduced time constant is zero.
    """
    path = case.headline_input.model
    actuation = case_actuation(case, tune_secondary(case))
    added_delay = actuation.dead_time if actuation is not None else 0.0
    if path.dead_time >= case.process.dead_time + added_delay:
        return None
    process, disturbance = _installed_process(case), _as_fopdt(path)
    if process is None or disturbance is None:
        return None
    if process.time_constant <= 0.0 or disturbance.time_constant <= 0.0:
        return None
    shortfall = max(process.dead_time - disturbance.dead_time, 0.0)
    floor = max(LAG_FLOOR_FRACTION * process.time_constant, case.simulation.step)
    lag = max(ise_optimal_lag(disturbance.time_constant, shortfall), floor)
    gain = -disturbance.gain / process.gain
    return FeedforwardSettings("lead-lag", gain, process.time_constant, lag, 0.0, 1.0)
