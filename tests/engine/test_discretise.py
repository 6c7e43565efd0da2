"""Exact zero-order-hold discretisation of the plant paths, checked against analytic responses.

The update ``x[k+1] = Phi x[k] + G_new u[k-m] + G_old u[k-m-1]`` (see
:mod:`robustff.engine.discretise`) is stepped here by hand, independently of the kernel.
"""

import math

import numpy as np
import pytest
from path_stepping import step_path

from robustff.engine.discretise import delay_weights, split_delay


@pytest.mark.parametrize(("dead_time", "h"), [(2.37, 0.1), (0.05, 0.1), (3.0, 0.25), (0.0, 0.2)])
def test_fopdt_step_equals_analytic_with_fractional_dead_time(dead_time, h):
    # Source: analytic step response of K e^{-theta s}/(tau s + 1):
    # y(t) = K (1 - exp(-(t - theta)/tau)) for t >= theta, 0 before (any control textbook, e.g.
    # Seborg, Edgar, Mellichamp and Doyle, Process Dynamics and Control, chapter 5; from memory).
    gain, tau = 1.7, 4.3
    t = np.arange(400) * h
    y = step_path("fopdt", gain, tau, 0.0, dead_time, h, np.ones(t.size))
    expected = np.where(t >= dead_time, gain * (1.0 - np.exp(-(t - dead_time) / tau)), 0.0)
    np.testing.assert_allclose(y, expected, rtol=0, atol=1e-9)


@pytest.mark.parametrize(("tau1", "tau2"), [(6.0, 2.0), (2.0, 6.0), (3.0, 3.0), (5.0, 0.0)])
def test_sopdt_step_equals_two_lag_formula_and_scipy(tau1, tau2):
    # Source: analytic step response of two lags in series,
    # y = K (1 - (tau1 e^{-t/tau1} - tau2 e^{-t/tau2})/(tau1 - tau2)), and K (1 - (1 + t/tau)
    # e^{-t/tau}) for equal lags (Seborg et al., Process Dynamics and Control, chapter 6; from
    # memory); cross-checked with scipy.signal.step on the delay-free system.
    from scipy import signal

    gain, dead_time, h = -2.2, 1.33, 0.1
    t = np.arange(500) * h
    y = step_path("sopdt", gain, tau1, tau2, dead_time, h, np.ones(t.size))
    s = np.maximum(t - dead_time, 0.0)
    if tau2 == 0.0:
        formula = 1.0 - np.exp(-s / tau1)
    elif tau1 == tau2:
        formula = 1.0 - (1.0 + s / tau1) * np.exp(-s / tau1)
    else:
        formula = 1.0 - (tau1 * np.exp(-s / tau1) - tau2 * np.exp(-s / tau2)) / (tau1 - tau2)
    np.testing.assert_allclose(y, gain * formula, rtol=0, atol=1e-9)
    # scipy wants an evenly spaced grid from 0: 0.01 holds every t - theta of the samples.
    fine = np.arange(5001) * 0.01
    system = signal.lti([gain], np.polymul([tau1, 1.0], [tau2, 1.0]))
    _, y_scipy = system.step(T=fine)
    later = t >= dead_time
    index = np.round(s[later] / 0.01).astype(int)
    np.testing.assert_allclose(y[later], y_scipy[index], rtol=0, atol=1e-7)


def test_ipdt_step_is_a_delayed_ramp():
    # Source: analytic, K e^{-theta s}/s driven by a unit step: y = K (t - theta) for t >= theta.
    gain, dead_time, h = 0.35, 1.26, 0.1
    t = np.arange(300) * h
    y = step_path("ipdt", gain, 0.0, 0.0, dead_time, h, np.ones(t.size))
    np.testing.assert_allclose(y, gain * np.maximum(t - dead_time, 0.0), rtol=0, atol=1e-9)


@pytest.mark.parametrize("kind", ["fopdt", "sopdt", "ipdt"])
def test_held_random_input_matches_scipy_lsim_with_exact_delay(kind):
    # Source: scipy.signal.lsim with zero-order-hold input interpolation (interp=False) is exact
    # for piecewise-constant inputs when its time grid contains every switching instant; the
    # delayed input switches at k h + theta, so the grid holds both sample and switching instants.
    from scipy import signal

    gain, tau1, tau2, dead_time, h = 1.3, 3.1, 1.2, 0.87, 0.2
    if kind == "fopdt":
        tau2 = 0.0
    rng = np.random.default_rng(5)
    u = rng.normal(size=120)
    y = step_path(kind, gain, tau1, tau2, dead_time, h, u)
    t_sample = np.arange(u.size) * h
    fine = 0.01  # divides both h and the dead time: the grid holds every switching instant
    grid = np.arange(int(round(t_sample[-1] / fine)) + 1) * fine
    index = np.floor((grid - dead_time) / h + 1e-9).astype(int)
    u_delayed = np.where(index >= 0, u[np.clip(index, 0, None)], 0.0)
    if kind == "ipdt":
        system = signal.lti([gain], [1.0, 0.0])
    else:
        system = signal.lti([gain], np.polymul([tau1, 1.0], [tau2, 1.0]))
    _, y_ref, _ = signal.lsim(system, u_delayed, grid, interp=False)
    at_samples = np.round(t_sample / fine).astype(int)
    np.testing.assert_allclose(y, y_ref[at_samples], rtol=0, atol=1e-8)


@pytest.mark.parametrize(("dead_time", "h", "expected"), [
    (2.37, 0.1, (23, 0.7)), (0.3, 0.1, (3, 0.0)), (0.0, 0.1, (0, 0.0)), (0.05, 0.1, (0, 0.5)),
])
def test_split_delay_whole_and_fractional_samples(dead_time, h, expected):
    # Arithmetic: dead_time = (m + f) h with 0 <= f < 1; 0.3/0.1 is 2.9999999999999996 in floats
    # and must still give three whole samples.
    m, f = split_delay(dead_time, h)
    assert m == expected[0]
    assert f == pytest.approx(expected[1], abs=1e-9)
    assert (m + f) * h == pytest.approx(dead_time, abs=1e-12)
    assert 0.0 <= f < 1.0 and not math.isnan(f)


@pytest.mark.parametrize(("delay", "h", "tau"), [(1.23, 0.1, 5.0), (0.35, 0.5, 2.0),
                                                 (2.0, 0.5, 4.0), (0.7, 0.2, 0.05)])
def test_delay_weights_reproduce_the_sampled_delayed_lag(delay, h, tau):
    # Source: the modified z-transform of a first-order lag behind a zero-order hold with a
    # fractional dead time (Astrom and Wittenmark, Computer-Controlled Systems, 3rd ed., 1997,
    # sec. 2.6): a unit step through z^-m (w_new + w_old z^-1) and the sampled undelayed lag
    # (1 - p) z^-1 / (1 - p z^-1) must equal the analytic 1 - exp(-(t - theta)/tau) at the
    # samples after the delay, and 0 before it.
    m, f = split_delay(delay, h)
    w_new, w_old = delay_weights(f, h, tau)
    n = 200
    step = np.ones(n)
    delayed = np.zeros(n)
    for k in range(n):
        newer = step[k - m] if k >= m else 0.0
        older = step[k - m - 1] if k >= m + 1 else 0.0
        delayed[k] = w_new * newer + w_old * older
    pole = math.exp(-h / tau)
    y = np.zeros(n)
    for k in range(1, n):
        y[k] = pole * y[k - 1] + (1.0 - pole) * delayed[k - 1]
    t = np.arange(n) * h
    expected = np.where(t >= delay, 1.0 - np.exp(-(t - delay) / tau), 0.0)
    np.testing.assert_allclose(y, expected, rtol=0, atol=1e-12)


def test_delay_weights_limits():
    # Analytic limits of the weights above: a lag much slower than the scan gives linear
    # interpolation (1 - f, f); no lag gives (1, 0); a whole-scan delay gives (1, 0); the
    # weights always add to 1 (unit steady-state gain).
    assert delay_weights(0.3, 0.1, 1e9) == pytest.approx((0.7, 0.3), abs=1e-8)
    assert delay_weights(0.3, 0.1, 0.0) == (1.0, 0.0)
    assert delay_weights(0.0, 0.1, 5.0) == (1.0, 0.0)
    for f in (0.1, 0.5, 0.9):
        w_new, w_old = delay_weights(f, 0.5, 3.0)
        assert w_new + w_old == pytest.approx(1.0, abs=1e-15)
        assert 1.0 - f < w_new < 1.0
