"""The simulator's valve stem: stiction, deadband, rate limit and actuator lag, element alone.

The element functions of the compiled kernel are driven directly with a controller output
sequence (deviation from a bias in the middle of a 0..100 % output range, so % of travel).
"""

from __future__ import annotations

import numpy as np
import pytest

from robustff.engine.kernel import _valve_at_rest, _valve_params, _valve_scan, _valve_step

NO_TABLE = np.zeros((0, 2))


def _drive(command: np.ndarray, *, rate=0.0, deadband=0.0, s=0.0, j=0.0, lag=0.0,
           step=1.0, substeps=1) -> tuple[np.ndarray, np.ndarray]:
    """Held position (after stiction/deadband) at each scan and stem position per internal
    step, both in % of travel."""
    plant = np.zeros((1, 14))  # the kernel's plant row: process, valve (columns 4-9), secondary
    plant[0, 4:10] = (50.0, rate, deadband, s, j, lag)
    vp = _valve_params(1, plant, 0, step / substeps, -50.0, 50.0, NO_TABLE)
    state = _valve_at_rest(vp)
    held, stem = [], []
    for u in command:
        state = _valve_scan(state, float(u), vp)
        held.append(state.held)
        for _ in range(substeps):
            state, _w = _valve_step(state, vp, NO_TABLE)
            stem.append(state.position)
    return np.array(held) - 50.0, np.array(stem) - 50.0


def test_a_rate_limited_stem_never_moves_faster_than_its_limit():
    command = np.r_[np.zeros(5), np.full(40, 20.0), np.full(40, -10.0)]
    _, stem = _drive(command, rate=2.0, step=1.0, substeps=4)
    assert np.max(np.abs(np.diff(np.r_[0.0, stem]))) <= 2.0 * 0.25 + 1e-12
    assert stem[5 * 4 + 39] == pytest.approx(20.0)  # it gets there: 20 % at 2 %/s is 10 s


def test_deadband_lag_and_reversal():
    # Backlash of width b: the stem never lags the command by more than b, and after a
    # reversal it does not move until the command has travelled b back (the definition of
    # backlash, e.g. Gelb and Vander Velde, "Multiple-Input Describing Functions and Nonlinear
    # System Design", 1968, ch. 2).
    b = 2.0
    up = np.linspace(0.0, 10.0, 51)
    down = np.linspace(10.0, 0.0, 51)[1:]
    held, _ = _drive(np.r_[up, down], deadband=b)
    command = np.r_[up, down]
    assert np.max(np.abs(command - held)) <= b + 1e-12
    top = held[50]
    still = held[51:][command[51:] > 10.0 - b + 1e-9]
    assert np.all(still == top)
    moved = held[51:][command[51:] < 10.0 - b - 1e-9]
    assert np.all(moved < top)


@pytest.mark.parametrize(("s", "j"), [(4.0, 0.0), (4.0, 2.0), (4.0, 4.0)],
                         ids=["deadband and stickband, no slip", "stickband with slip",
                              "pure stick-slip"])
def test_stiction_reproduces_the_stick_slip_of_the_two_parameter_model(s, j):
    # Choudhury, Thornhill and Shah, "Modelling valve stiction", Control Engineering Practice
    # 13 (2005) 641-658, the two-parameter model and its sinusoidal test: after a reversal the
    # stem stays where it stuck until the controller output has moved S from the sticking
    # point; it then jumps by J and follows the output S - J/2 ... offset (S - J)/2 behind it.
    t = np.arange(400)
    command = 10.0 * np.sin(2.0 * np.pi * t / 200.0)
    held, _ = _drive(command, s=s, j=j)
    moving = np.diff(held) != 0.0
    # While moving in one direction the stem trails the command by (S - J)/2.
    rising = (np.diff(command) > 0) & moving & np.r_[False, moving[:-1]]
    np.testing.assert_allclose(held[1:][rising], command[1:][rising] - (s - j) / 2.0,
                               atol=1e-12)
    # At the top reversal (t = 50) the stem sticks; it slips once the output is S below the
    # sticking point, with a jump of J (plus the output's own move over that sample).
    stuck_at = command[50]
    after = np.arange(51, 150)
    slip = after[np.argmax(command[after] < stuck_at - s)]
    assert np.all(held[51:slip] == held[50])
    jump = held[slip - 1] - held[slip]
    step_move = command[slip - 1] - command[slip]
    assert jump == pytest.approx(j + (stuck_at - s - command[slip]) + 0.0, abs=step_move + 1e-9)


def test_actuator_lag_is_first_order():
    _, stem = _drive(np.r_[np.zeros(2), np.full(60, 10.0)], lag=5.0, step=1.0)
    # Stepped exactly with its input held: 10 (1 - e^{-k h / tau}) after k steps.
    k = np.arange(1, 61)
    np.testing.assert_allclose(stem[2:], 10.0 * (1.0 - np.exp(-k / 5.0)), rtol=1e-12)


@pytest.mark.parametrize("kind", [1, 2])
def test_the_kernels_valve_input_is_the_characteristic_of_the_stem_position_at_every_step(
        kind: int) -> None:
    # The kernel reuses the input a stuck stem gave instead of evaluating the characteristic
    # again; at every step it must equal the characteristic evaluated afresh (the element's
    # own _valve_step), through stuck stretches, slips and rate-limited travel alike.
    from robustff.engine.kernel import PathCoefficients, SecondaryParams, _actuate, _valve_input

    plant = np.zeros((1, 14))
    plant[0, 4:10] = (30.0, 4.0, 0.0, 3.0, 1.0, 0.0)  # rangeability 30, 4 %/s, S 3 %, J 1 %
    vp = _valve_params(kind, plant, 0, 0.25, -50.0, 50.0, NO_TABLE)
    path = PathCoefficients(0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, False)
    no_secondary = SecondaryParams(False, 0.0, 0.0, 0.0, -np.inf, np.inf, 1)
    rng = np.random.default_rng(4)
    command = np.cumsum(rng.normal(0.0, 1.5, 300))
    state = reference = _valve_at_rest(vp)
    stuck_steps = 0
    for u in command:
        state = _valve_scan(state, float(u), vp)
        reference = _valve_scan(reference, float(u), vp)
        for _ in range(4):
            before = state.position
            drive, position, _, state, _ = _actuate(float(u), state, (0.0, 0.0), (0.0, 0.0),
                                                    path, vp, 1, no_secondary, False)
            reference, expected = _valve_step(reference, vp, NO_TABLE)
            stuck_steps += position == before
            assert position == reference.position
            assert drive == expected == _valve_input(vp, position)
    assert 100 < stuck_steps < 1100  # both stuck and moving stretches were exercised
