"""The feedforward input filter in the simulation: the documented digital first-order filter,
and no change at all without it."""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
from case_texts import MINIMAL

from robustff.case import parse_case
from robustff.design.tuning import design_loop
from robustff.engine import build_scenario, nominal_batch, simulate

H = 0.5
STEP_AT = 10  # the disturbance step of MINIMAL at 5 s, in samples of 0.5 s


def _static_case(input_filter: float | None):
    # Process dead time 40 s: for 80 samples after the step only the feedforward moves the
    # valve (the CV, and so the feedback, cannot respond yet; the disturbance path is slower).
    text = (MINIMAL.replace("dead_time = 2.0", "dead_time = 40.0")
            .replace("dead_time = 3.0", "dead_time = 60.0")
            + "\n[feedforward]\nstructure = 'static'\n")
    if input_filter is not None:
        text += f"input_filter = {input_filter}\n"
    return parse_case(text)


def _valve_fbff(case) -> np.ndarray:
    design = design_loop(case)
    result = simulate(nominal_batch(case), design, build_scenario(case, design),
                      keep=np.array([0]))
    assert result.trajectories is not None
    return result.trajectories[0, 3]  # controller output with feedforward, deviation


def test_filtered_static_feedforward_follows_the_digital_filter_by_hand() -> None:
    # y_k = a y_(k-1) + (1 - a) x_k with a = exp(-h / tau_f) (docs/case-format.md): after a
    # step of x to Kff * size at sample k0, y_k = Kff size (1 - a^(k - k0 + 1)).
    tau_f = 4.0
    case = _static_case(tau_f)
    design = design_loop(case)
    gain = design.feedforward.gain
    assert gain == pytest.approx(-0.5) and design.feedforward.input_filter == tau_f
    u = _valve_fbff(case)
    a = math.exp(-H / tau_f)
    k = np.arange(STEP_AT, STEP_AT + 60)
    expected = gain * 1.0 * (1.0 - a ** (k - STEP_AT + 1))
    np.testing.assert_allclose(u[k], expected, rtol=1e-9, atol=1e-12)
    assert np.all(u[:STEP_AT] == 0.0)


def test_no_filter_passes_the_step_at_once_and_zero_is_the_same() -> None:
    plain = _valve_fbff(_static_case(None))
    assert plain[STEP_AT] == pytest.approx(-0.5)
    zero = _valve_fbff(_static_case(0.0))
    assert np.array_equal(plain, zero)


def test_filter_reduces_the_valve_travel_from_transmitter_noise() -> None:
    case = _static_case(None)
    noisy = dataclasses.replace(case, sensor=dataclasses.replace(case.sensor, noise_std=0.1))
    filtered = dataclasses.replace(noisy, feedforward=dataclasses.replace(
        noisy.feedforward, input_filter=5.0))
    travel = [float(np.sum(np.abs(np.diff(_valve_fbff(c))))) for c in (noisy, filtered)]
    assert travel[1] < 0.5 * travel[0]
