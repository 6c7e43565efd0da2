"""The feedforward design on the loop linearised at the nominal point: valve slope, actuator
lag and the closed secondary loop, checked against the simulator's valve, python-control and
the SIMC target response."""

from __future__ import annotations

import numpy as np
import pytest
from case_texts import MINIMAL

from robustff.case import parse_case
from robustff.design.linearised_actuation import (
    NOMINAL_VALVE_SLOPE,
    closed_loop_first_moment,
    half_rule_dead_time,
    linearised_actuation,
)
from robustff.design.margins import actuation_response
from robustff.design.tuning import design_loop
from robustff.engine import nominal_batch
from robustff.engine.kernel import _valve_at_rest, _valve_params, _valve_scan, _valve_step
from robustff.plant.models import TransferModel

SECONDARY = """
[secondary]
model = "fopdt"
gain = 8.0
time_constant = 2.0
dead_time = 0.2
"""


def _case(extra: str, process_dead_time: float = 2.0, disturbance_dead_time: float = 3.0,
          structure: str = "lead-lag"):
    text = (MINIMAL.replace("dead_time = 2.0", f"dead_time = {process_dead_time}")
            .replace("dead_time = 3.0", f"dead_time = {disturbance_dead_time}")
            + f'\n[feedforward]\nstructure = "{structure}"\n' + extra)
    return parse_case(text, source="test")


def _incremental_gain(kind: int, table: np.ndarray, at: float, rangeability: float = 30.0,
                      bias: float = 40.0, du: float = 1e-4) -> float:
    """Process input change per output change of the simulator's valve (no stem effects) for a
    small move around the output ``at`` (output units, range 0..100, nominal at ``bias``)."""
    plant = np.zeros((1, 14))  # the kernel's plant row: valve parameters in columns 4-9
    plant[0, 4] = rangeability
    vp = _valve_params(kind, plant, 0, 1.0, -bias, 100.0 - bias, table)

    def process_input(u: float) -> float:
        state = _valve_scan(_valve_at_rest(vp), u - bias, vp)
        return float(_valve_step(state, vp, table)[1])

    return (process_input(at + du) - process_input(at - du)) / (2.0 * du)


def test_the_simulated_valve_has_the_nominal_slope_at_the_nominal_position():
    # Source: ANSI/ISA-75.11.01, inherent equal-percentage characteristic f = R^(x - 1), whose
    # slope is ln(R) R^(x - 1) [memory]: normalised by the slope at x0, the incremental gain is
    # 1 at x0 and R^(x - x0) elsewhere. The installed table's is its segment slopes' ratio.
    assert _incremental_gain(2, np.zeros((0, 2)), 40.0) == pytest.approx(NOMINAL_VALVE_SLOPE,
                                                                            rel=1e-6)
    assert _incremental_gain(2, np.zeros((0, 2)), 60.0) == pytest.approx(30.0 ** 0.2, rel=1e-6)
    table = np.array([[0.0, 0.0], [0.5, 0.2], [1.0, 1.0]])  # fractions: slopes 0.4 and 1.6
    assert _incremental_gain(3, table, 40.0) == pytest.approx(NOMINAL_VALVE_SLOPE, rel=1e-9)
    assert _incremental_gain(3, table, 70.0) == pytest.approx(1.6 / 0.4, rel=1e-9)


def _python_control_closed_loop(kc: float, ti: float, path: TransferModel, tau_a: float):
    """T = feedback(Cs Ps Va, 1), the dead time by a 10th-order Pade approximation (Source:
    python-control 0.10 ``feedback``, ``pade``)."""
    import control

    ps = control.tf([path.gain], [path.time_constant, 1.0])
    ps = ps * control.tf(*control.pade(path.dead_time, 10))
    if tau_a > 0.0:
        ps = ps * control.tf([1.0], [tau_a, 1.0])
    return control.feedback(control.tf([kc * ti, kc], [ti, 0.0]) * ps, 1)


@pytest.mark.parametrize(("kc", "ti", "tau_a"), [(0.625, 1.6, 0.0), (0.2, 2.0, 0.5),
                                                 (0.05, 1.0, 1.5)])
def test_the_closed_secondary_loop_moment_matches_python_control(kc, ti, tau_a):
    # The reduction keeps T(0) = 1 and the first moment -T'(0) of T = Cs Ps Va/(1 + Cs Ps Va);
    # here both from python-control's closed loop, T'(0) from its polynomials (quotient rule),
    # and the first moment once more as the integral of 1 - y(t) of its step response.
    pytest.importorskip("control")
    import control

    path = TransferModel("fopdt", 8.0, 2.0, 0.0, 0.2)
    t = _python_control_closed_loop(kc, ti, path, tau_a)
    num, den = np.poly1d(t.num[0][0]), np.poly1d(t.den[0][0])
    assert num(0.0) / den(0.0) == pytest.approx(1.0, rel=1e-12)
    derivative = (num.deriv()(0.0) * den(0.0) - num(0.0) * den.deriv()(0.0)) / den(0.0) ** 2
    assert closed_loop_first_moment(kc, ti, path.gain) == pytest.approx(-derivative, rel=1e-9)
    time = np.linspace(0.0, 400.0 * max(ti, tau_a, 2.0), 400_001)
    _, y = control.step_response(t, time)
    area = float(np.sum(0.5 * ((1.0 - y[1:]) + (1.0 - y[:-1])) * np.diff(time)))
    assert area == pytest.approx(-derivative, rel=2e-3)


def test_the_actuation_response_is_python_controls_closed_loop():
    # The factor the margins and the frequency view put in series with the process.
    pytest.importorskip("control")
    import control

    case = _case(SECONDARY + "\n[valve]\ntime_constant = 0.5\n")
    design = design_loop(case)
    inner = design.secondary
    assert inner is not None
    t = _python_control_closed_loop(inner.kc, inner.ti, case.secondary.model, 0.5)
    omega = np.geomspace(1e-3, 5.0, 40)  # w theta <= 1: Pade(10) exact to far below 1e-6
    reference = np.array([complex(control.evalfr(t, 1j * w)) for w in omega])
    mine = actuation_response(nominal_batch(case), inner, omega)
    assert mine is not None
    np.testing.assert_allclose(mine[0], reference, rtol=1e-7)


def test_a_simc_flow_loop_reduces_to_the_simc_target():
    # SIMC with Ti = tau aims at T = exp(-theta s)/(tau_c s + 1) (Skogestad, "Simple analytic
    # rules for model reduction and PID controller tuning", J. Process Control 13 (2003)
    # 291-309): first moment tau_c + theta, the lag tau_c and the path's dead time theta.
    case = _case(SECONDARY + "closed_loop_time = 1.0\n")
    design = design_loop(case)
    assert design.secondary is not None and design.secondary.ti == pytest.approx(2.0)
    actuation = linearised_actuation(case, design.secondary.kc, design.secondary.ti)
    assert actuation is not None
    assert actuation.secondary_first_moment == pytest.approx(1.2, rel=1e-12)
    assert actuation.lags == pytest.approx((1.0,))
    assert actuation.dead_time == pytest.approx(0.2)


@pytest.mark.parametrize(("tau_c", "tau_a"), [(0.2, 0.0), (1.0, 0.5), (3.0, 1.0), (0.2, 0.5)])
def test_the_reduced_closed_loop_follows_the_closed_loop_at_low_frequency(tau_c, tau_a):
    # The reduced exp(-theta_T s)/(tau_T s + 1) against the exact closed loop T (python-control).
    # The reduction keeps T(0) and T'(0), so its error grows as (w M)^2, M the first moment; up
    # to w M = 0.1 (the primary loop's frequencies when the flow loop is ten times faster) it
    # is within 3 % of |T(0)| = 1, even for the flow loop tuned without the actuator lag
    # (0.2, 0.5), whose resonant T no first-order form follows at higher frequencies.
    pytest.importorskip("control")
    import control

    case = _case(SECONDARY + f"closed_loop_time = {tau_c}\n\n[valve]\ntime_constant = {tau_a}\n")
    inner = design_loop(case).secondary
    assert inner is not None
    actuation = linearised_actuation(case, inner.kc, inner.ti)
    assert actuation is not None and actuation.secondary_first_moment is not None
    t = _python_control_closed_loop(inner.kc, inner.ti, case.secondary.model, tau_a)
    lag = sum(actuation.lags)  # none when the first moment is all dead time
    for w in np.geomspace(1e-3, 0.1 / actuation.secondary_first_moment, 30):
        exact = complex(control.evalfr(t, 1j * w))
        reduced = np.exp(-1j * w * actuation.dead_time) / (1j * w * lag + 1.0)
        assert abs(reduced - exact) < 0.03


def test_half_rule_dead_time():
    # Skogestad (2003), the half rule: half the second-largest lag and all smaller lags go to
    # the dead time; e.g. lags 1, 0.2, 0.04, 0.008 and no dead time give 0.1 + 0.048 = 0.148
    # (the paper's example, from memory).
    assert half_rule_dead_time(0.0, [1.0, 0.2, 0.04, 0.008]) == pytest.approx(0.148)
    assert half_rule_dead_time(0.3, [2.0]) == pytest.approx(0.3)


def test_the_design_adds_the_actuation_to_lead_and_dead_time():
    # lead-lag: the actuation's lags join the process lags in the lead (the first moment of
    # -Gd/(Gp A)); lead-lag-delay: its dead time joins the process dead time.
    plain = design_loop(_case("", 2.0, 5.0, "lead-lag-delay")).feedforward
    lagged = design_loop(_case("\n[valve]\ntime_constant = 1.5\n", 2.0, 5.0,
                               "lead-lag-delay")).feedforward
    assert lagged.lead == pytest.approx(plain.lead + 1.5)
    assert lagged.delay == pytest.approx(plain.delay)
    case = _case(SECONDARY, 2.0, 5.0, "lead-lag-delay")
    design = design_loop(case)
    inner = design.secondary
    assert inner is not None
    actuation = linearised_actuation(case, inner.kc, inner.ti)
    assert actuation is not None
    assert design.feedforward.lead == pytest.approx(plain.lead + sum(actuation.lags))
    assert design.feedforward.delay == pytest.approx(plain.delay - actuation.dead_time)
    assert any("linearised at the nominal point" in note for note in design.notes)


def test_an_ideal_actuator_adds_nothing():
    case = _case("")
    assert linearised_actuation(case) is None
    assert not any("linearised" in note for note in design_loop(case).notes)


def test_an_integrating_flow_path_is_left_out_with_a_note():
    case = _case(SECONDARY.replace('"fopdt"', '"ipdt"').replace("time_constant = 2.0\n", ""))
    inner = design_loop(case).secondary
    assert inner is not None
    actuation = linearised_actuation(case, inner.kc, inner.ti)
    assert actuation is not None and actuation.lags == () and actuation.dead_time == 0.0
    assert "not reduced" in actuation.note


def test_a_pi_in_the_wrong_direction_is_refused():
    with pytest.raises(ValueError, match="negative feedback"):
        closed_loop_first_moment(-1.0, 2.0, 8.0)
    with pytest.raises(ValueError, match="Ti > 0"):
        closed_loop_first_moment(1.0, 0.0, 8.0)


def test_the_lag_rule_takes_the_installed_process_path():
    # The rule of docs/feedforward-rule.md on the process path with the closed flow loop: the
    # lags 40 s and tau_T reduced by the half rule (Skogestad 2003), the dead time 6 s + theta_T
    # + tau_T / 2, and the ISE-optimal lag T* = tau_d (2 exp(-L / (2 tau_d)) - 1).
    from pathlib import Path

    from robustff.case import load_case
    from robustff.design.feedforward_rule import feedforward_rule

    case = load_case(Path(__file__).resolve().parents[2] / "cases"
                     / "steam-heater-sticky-valve.toml")
    inner = design_loop(case).secondary
    assert inner is not None
    actuation = linearised_actuation(case, inner.kc, inner.ti)
    assert actuation is not None
    tau_t = sum(actuation.lags)
    rule = feedforward_rule(case)
    assert rule is not None
    assert rule.lead == pytest.approx(40.0 + tau_t / 2)
    shortfall = 6.0 + actuation.dead_time + tau_t / 2 - 4.0
    expected = max(30.0 * (2.0 * np.exp(-shortfall / 60.0) - 1.0), 0.1 * rule.lead, 0.5)
    assert rule.lag == pytest.approx(expected)
