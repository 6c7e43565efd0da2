"""The open-loop ISE lag rule: closed form against numerical integration and minimisation."""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest

from robustff.case import Case, Event, FeedbackSpec, FeedforwardSpec, SimulationSpec
from robustff.design.feedforward_rule import feedforward_rule, ise_optimal_lag, open_loop_ise
from robustff.plant.models import TransferModel


def numerical_ise(lag: float, kd: float, kp: float, tau_p: float, tau_d: float,
                  theta_p: float, theta_d: float) -> float:
    """ISE of the open-loop CV after a unit disturbance step, by simulation and quadrature.

    The two paths are simulated with scipy.signal (Source: scipy reference implementation of
    LTI step responses), the dead times applied as time shifts, the compensator
    -(kd/kp)(tau_p s + 1)/(lag s + 1) in series with the process; the squared sum is
    integrated with the trapezoid rule on a fine grid.
    """
    from scipy import integrate, signal

    t = np.linspace(0.0, theta_p + 40.0 * max(tau_d, lag, tau_p), 20001)
    disturbance = signal.lti([kd], [tau_d, 1.0])
    compensated = signal.lti(np.polymul([-kd / kp], [tau_p, 1.0]) * kp,
                             np.polymul([lag, 1.0], [tau_p, 1.0]))
    _, yd = signal.step(disturbance, T=t)
    _, yc = signal.step(compensated, T=t)
    y = np.interp(t - theta_d, t, yd, left=0.0) + np.interp(t - theta_p, t, yc, left=0.0)
    return float(integrate.trapezoid(y * y, t))


@pytest.mark.parametrize("tau_p, tau_d, theta_p, theta_d", [
    (45.0, 30.0, 8.0, 3.0),   # the wash-water heater demo
    (10.0, 4.0, 3.0, 1.0),
    (5.0, 12.0, 6.0, 0.5),
])
def test_closed_form_lag_equals_numerical_minimum(tau_p, tau_d, theta_p, theta_d):
    from scipy.optimize import minimize_scalar

    kd, kp = -1.8, 0.6
    found = minimize_scalar(
        lambda lag: numerical_ise(lag, kd, kp, tau_p, tau_d, theta_p, theta_d),
        bounds=(1e-3, 3.0 * tau_d), method="bounded", options={"xatol": 1e-4})
    expected = ise_optimal_lag(tau_d, theta_p - theta_d)
    assert expected == pytest.approx(found.x, abs=2e-3 * tau_d)
    for lag in (0.5 * expected, expected, 2.0 * expected):
        assert open_loop_ise(lag, tau_d, theta_p - theta_d, kd) == pytest.approx(
            numerical_ise(lag, kd, kp, tau_p, tau_d, theta_p, theta_d), rel=1e-3)


def test_lag_is_zero_beyond_the_threshold_and_equals_tau_d_without_shortfall():
    # Analytic: T* = tau_d (2 exp(-L/(2 tau_d)) - 1) is tau_d at L = 0 (the ideal lag) and
    # reaches 0 at L = 2 tau_d ln 2; beyond it the ISE increases with T for every T >= 0.
    assert ise_optimal_lag(7.0, 0.0) == pytest.approx(7.0)
    assert ise_optimal_lag(7.0, 14.0 * math.log(2.0)) == pytest.approx(0.0, abs=1e-12)
    assert ise_optimal_lag(7.0, 12.0) == 0.0
    values = [open_loop_ise(t, 7.0, 12.0) for t in (0.0, 0.5, 1.0, 3.0)]
    assert values == sorted(values)


def wash_case(**process) -> Case:
    return Case(
        "rule", "s",
        TransferModel(**{"kind": "fopdt", "gain": 0.6, "time_constant": 45.0, "dead_time": 8.0,
                         **process}),
        TransferModel("fopdt", -1.8, 30.0, 0.0, 3.0),
        FeedbackSpec(), FeedforwardSpec("lead-lag-delay"), SimulationSpec(600.0, 0.5),
        (Event("disturbance-step", 20.0, 2.0),),
    )


def test_rule_settings_and_when_it_does_not_apply():
    rule = feedforward_rule(wash_case())
    assert rule is not None
    assert rule.gain == pytest.approx(3.0) and rule.lead == 45.0 and rule.delay == 0.0
    assert rule.lag == pytest.approx(30.0 * (2.0 * math.exp(-5.0 / 60.0) - 1.0))
    assert feedforward_rule(wash_case(dead_time=2.0)) is None  # delay realizable
    integrating = replace(wash_case(), process=TransferModel("ipdt", 0.1, 0.0, 0.0, 8.0))
    assert feedforward_rule(integrating) is None
    # a long shortfall: T* = 0, the lag floor 0.1 tau_p keeps the compensator proper
    far = feedforward_rule(wash_case(dead_time=80.0))
    assert far is not None and far.lag == pytest.approx(4.5)


def test_sopdt_paths_are_reduced_by_the_half_rule():
    # Source: Skogestad, J. Process Control 13 (2003) 291-309, half rule [from memory]:
    # tau1 + tau2/2 and theta + tau2/2.
    case = replace(wash_case(), process=TransferModel("sopdt", 0.6, 40.0, 10.0, 8.0))
    rule = feedforward_rule(case)
    assert rule is not None and rule.lead == pytest.approx(45.0)
    assert rule.lag == pytest.approx(ise_optimal_lag(30.0, 13.0 - 3.0))
