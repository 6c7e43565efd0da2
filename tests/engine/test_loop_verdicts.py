"""The simulator's stability verdict and the start of filtered disturbance noise."""

from __future__ import annotations

import numpy as np
import pytest

from robustff.case import Case, Event, FeedbackSpec, FeedforwardSpec, SimulationSpec
from robustff.design.margins import loop_margins
from robustff.design.tuning import design_loop
from robustff.engine import build_scenario, nominal_batch, simulate
from robustff.plant.models import TransferModel as Model


def _case(events, feedback: FeedbackSpec, duration: float, step: float,
          disturbance: Model | None = None) -> Case:
    return Case("verdicts", "s", Model("fopdt", 1.0, 20.0, 0.0, 2.0),
                disturbance or Model("fopdt", 1.0, 20.0, 0.0, 2.0), feedback,
                FeedforwardSpec("none"), SimulationSpec(duration, step), tuple(events))


def test_a_stable_loop_with_a_very_long_integral_time_is_not_flagged_unstable():
    # 1 e^{-2s}/(20 s + 1) under PI Kc = 1, Ti = 50,000 s is stable: its gain margin is about
    # 16 (the continuous loop's margins, python-control-checked in tests/design). The error
    # recovers with a time constant of the order of Ti (1 + Kc K)/(Kc K) = 100,000 s, far
    # beyond the window: the loop "does not settle", it is not unstable.
    feedback = FeedbackSpec(tuning="manual", kc=1.0, ti=50_000.0, output_low=-1e6,
                            output_high=1e6, output_bias=0.0)
    case = _case([Event("disturbance-step", 10.0, 1.0)], feedback, 600.0, 0.5)
    design = design_loop(case)
    margins = loop_margins(nominal_batch(case), design.feedback)
    assert bool(margins.stable[0]) and margins.gain_margin[0] > 10.0
    result = simulate(nominal_batch(case), design, build_scenario(case, design))
    assert not result.unstable.any()
    assert np.isfinite(result.metrics["iae"]).all()


def test_a_loop_beyond_its_stability_limit_is_still_flagged():
    # Proportional gain above the ultimate gain of 1 e^{-2s}/(20 s + 1): Ku = 1/|G(j wu)| with
    # wu from the phase condition atan(20 wu) + 2 wu = pi (about 0.81 rad/s), Ku about 16.2
    # (the classical ultimate gain, e.g. Seborg et al., "Process Dynamics and Control", 2016,
    # ch. 14). Kc = 1.3 Ku with integral action is unstable.
    from scipy.optimize import brentq

    wu = brentq(lambda w: np.arctan(20.0 * w) + 2.0 * w - np.pi, 0.1, 1.5)
    ku = np.sqrt(1.0 + (20.0 * wu) ** 2)
    feedback = FeedbackSpec(tuning="manual", kc=1.3 * ku, ti=200.0, output_low=-1e9,
                            output_high=1e9, output_bias=0.0)
    case = _case([Event("disturbance-step", 10.0, 1.0)], feedback, 600.0, 0.05)
    design = design_loop(case)
    result = simulate(nominal_batch(case), design, build_scenario(case, design))
    assert result.unstable.all()


def test_filtered_disturbance_noise_starts_from_its_stationary_state():
    # A first-order filtered noise (an Ornstein-Uhlenbeck process) that is "already running"
    # has its stationary standard deviation from the first sample on (e.g. Gardiner,
    # "Stochastic Methods", 4th ed., 2009, sec. 3.8.4). Seen here through a pass-through
    # disturbance path (no lag, no dead time) with the controller idle, so the CV is the noise.
    std, tau = 0.5, 100.0
    feedback = FeedbackSpec(tuning="manual", kc=1e-12, ti=1e12, output_low=-1e6,
                            output_high=1e6, output_bias=0.0)
    case = _case([Event("disturbance-noise", 0.0, std, time_constant=tau)], feedback, 60.0, 1.0,
                 disturbance=Model("fopdt", 1.0, 0.0, 0.0, 0.0))
    design = design_loop(case)
    scenario = build_scenario(case, design, settling_band=0.01)
    n = 4000
    result = simulate(nominal_batch(case, n), design, scenario,
                      seeds=np.arange(n, dtype=np.uint64) + 11, keep=np.arange(n))
    cv = result.trajectories[:, 0, :]
    # Over the first half time constant (samples 1..50) every sample's spread is the
    # stationary one; the standard error of a standard deviation from n draws is std/sqrt(2n).
    spread = cv[:, 1:50].std(axis=0)
    assert spread == pytest.approx(np.full(spread.size, std), rel=6.0 / np.sqrt(2 * n))


def test_a_slow_integrating_loop_still_building_up_at_the_window_end_is_not_unstable():
    # K e^{-theta s}/s (K = 0.01 per s) under PI Kc = 0.5, Ti = 1e5 s: gain margin about 139
    # as sampled (the exact discrete loop, robustff.design.sampled_loop, checked against
    # python-control in tests/design), but in a 400 s window the load response is still
    # growing when the window ends, which the window test alone would call unstable.
    feedback = FeedbackSpec(tuning="manual", kc=0.5, ti=1e5, output_low=-1e6, output_high=1e6,
                            output_bias=0.0)
    case = Case("slow", "s", Model("ipdt", 0.01, 0.0, 0.0, 2.0), Model("ipdt", 0.01, 0.0, 0.0,
                2.0), feedback, FeedforwardSpec("none"), SimulationSpec(400.0, 0.5),
                (Event("disturbance-step", 10.0, 1.0),))
    design = design_loop(case)
    margins = loop_margins(nominal_batch(case), design.feedback, sample_time=0.5)
    assert bool(margins.stable[0]) and margins.gain_margin[0] > 100.0
    result = simulate(nominal_batch(case, 3), design, build_scenario(case, design, 0.01))
    assert not result.unstable.any() and not result.loop_unstable.any()
    assert np.isfinite(result.metrics["iae"]).all()
