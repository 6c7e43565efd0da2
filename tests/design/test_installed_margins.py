"""Margins of the loop as installed: the valve's actuator lag and a secondary (flow) loop.

The loop is linearised at the nominal operating point (valve slope 1): the actuator lag
``1/(tau_a s + 1)`` is in the path and a secondary loop enters as its closed loop
``T = Cs Ps Va / (1 + Cs Ps Va)`` in series with the process. References: python-control 0.10
(``feedback``, ``pade``, ``sample_system`` ZOH, ``stability_margins``).
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest

from robustff.design.margins import loop_margins, model_margins
from robustff.design.tuning import FeedbackSettings
from robustff.errors import DesignError
from robustff.plant.models import PlantBatch, SensorModel, TransferModel
from robustff.plant.valve import ValveModel


def settings(kc: float, ti: float) -> FeedbackSettings:
    return FeedbackSettings("pi", kc, ti, 0.0, 0.0, ti, -1e9, 1e9, 0.0, math.nan, "test")


def continuous(model: TransferModel, actuator: float = 0.0):
    """``model`` (and the actuator lag) as a python-control transfer function, dead time by a
    10th-order Pade approximation (Source: python-control 0.10 ``pade``; the approximation's
    phase error at the crossovers here, w theta < 2, is far below 1e-6 rad)."""
    import control

    out = model.with_parameter("dead_time", 0.0).to_control()
    if model.dead_time > 0.0:
        out = out * control.tf(*control.pade(model.dead_time, 10))
    if actuator > 0.0:
        out = out * control.tf([1.0], [actuator, 1.0])
    return out


def pi_tf(fb: FeedbackSettings):
    import control

    return control.tf([fb.kc * fb.ti, fb.kc], [fb.ti, 0.0])


def python_control_margins(loop) -> tuple[float, float, float]:
    """Gain margin (smallest over all phase crossovers), phase margin (deg) and Ms; Source:
    python-control 0.10 ``stability_margins(..., returnall=True)``, Ms = 1/(stability margin)."""
    import control

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        gm, pm, sm, *_ = control.stability_margins(loop, returnall=True)
    return float(np.min(gm)), float(np.min(pm)), 1.0 / float(np.min(sm))


#: Primary process, secondary path, actuator lag, primary PI, secondary PI (fictional loops).
CASCADES = {
    "fopdt-fast-flow": (TransferModel("fopdt", 2.0, 10.0, 0.0, 2.0),
                        TransferModel("fopdt", 1.5, 1.0, 0.0, 0.2), 0.5,
                        settings(1.0, 10.0), settings(1.1, 1.0)),
    "sopdt-slow-flow": (TransferModel("sopdt", 0.8, 20.0, 5.0, 3.0),
                        TransferModel("fopdt", 4.0, 3.0, 0.0, 0.5), 1.5,
                        settings(2.5, 20.0), settings(0.4, 3.0)),
    "ipdt-level": (TransferModel("ipdt", 0.05, 0.0, 0.0, 4.0),
                   TransferModel("sopdt", 2.0, 2.0, 0.5, 0.3), 0.8,
                   settings(3.0, 60.0), settings(0.3, 2.0)),
}


@pytest.mark.parametrize("name", sorted(CASCADES))
def test_cascade_margins_match_python_control(name):
    # L = C T P with T = feedback(Cs Ps Va, 1): the primary controller drives the secondary
    # closed loop, whose flow drives the process (Source: python-control 0.10 ``feedback`` and
    # ``stability_margins``, dead times by 10th-order Pade).
    pytest.importorskip("control")
    import control

    process, path, tau_a, fb, fb_s = CASCADES[name]
    inner = control.feedback(pi_tf(fb_s) * continuous(path, tau_a), 1)
    gm, pm, ms = python_control_margins(pi_tf(fb) * inner * continuous(process))
    mine = model_margins(process, fb, valve=ValveModel(time_constant=tau_a), secondary=path,
                         secondary_feedback=fb_s)
    assert bool(mine.stable[0])
    assert mine.gain_margin[0] == pytest.approx(gm, rel=1e-5)
    assert mine.phase_margin[0] == pytest.approx(pm, rel=1e-5)
    assert mine.ms[0] == pytest.approx(ms, rel=1e-4)


@pytest.mark.parametrize("kind", ["fopdt", "ipdt"])
def test_actuator_lag_margins_match_python_control(kind):
    # Without a secondary loop the actuator lag is in series with the process (Source:
    # python-control 0.10, Pade order 10 for the dead time).
    pytest.importorskip("control")
    process = (TransferModel("fopdt", 1.0, 10.0, 0.0, 1.0) if kind == "fopdt"
               else TransferModel("ipdt", 0.1, 0.0, 0.0, 2.0))
    fb = settings(5.0, 8.0) if kind == "fopdt" else settings(1.5, 30.0)
    gm, pm, ms = python_control_margins(pi_tf(fb) * continuous(process, 2.0))
    mine = model_margins(process, fb, valve=ValveModel(time_constant=2.0))
    assert mine.gain_margin[0] == pytest.approx(gm, rel=1e-5)
    assert mine.phase_margin[0] == pytest.approx(pm, rel=1e-5)
    assert mine.ms[0] == pytest.approx(ms, rel=1e-4)


def discrete_loop(process: TransferModel, fb: FeedbackSettings, h: float, actuator: float):
    """Source: python-control 0.10 ``sample_system(..., 'zoh')`` of the delay-free process with
    the actuator lag, times ``z^-m`` for a dead time of ``m`` whole samples, times the simulated
    PI ``Kc (1 + (h/Ti)/(z - 1))`` (robustff.design.sampled_loop)."""
    import control

    m = round(process.dead_time / h)
    assert abs(m * h - process.dead_time) < 1e-12
    plant = control.sample_system(
        continuous(process.with_parameter("dead_time", 0.0), actuator), h, method="zoh")
    z = control.tf([1, 0], [1], h)
    return fb.kc * (1 + (h / fb.ti) / (z - 1)) * plant * z ** -m


def test_sampled_loop_with_an_actuator_lag_is_exact_for_one_lag():
    # A one-lag process takes the actuator lag as its second lag: the sampled loop is exact.
    pytest.importorskip("control")
    process, fb, h = TransferModel("fopdt", 1.0, 10.0, 0.0, 1.0), settings(5.0, 8.0), 0.25
    gm, pm, ms = python_control_margins(discrete_loop(process, fb, h, 2.0))
    mine = model_margins(process, fb, h, valve=ValveModel(time_constant=2.0))
    assert mine.gain_margin[0] == pytest.approx(gm, rel=1e-6)
    assert mine.phase_margin[0] == pytest.approx(pm, rel=1e-6)
    assert mine.ms[0] == pytest.approx(ms, rel=1e-5)


@pytest.mark.parametrize("tau_a", [0.1, 0.25, 1.0, 3.0])
def test_sampled_loop_approximation_of_a_third_lag(tau_a):
    # A two-lag process cannot take a third lag in the exact ZOH form: the actuator lag's
    # continuous response multiplies the sampled loop at the same frequency (the aliased
    # terms of the lag are neglected). Stated range: loops whose crossovers lie well below
    # pi/h (here about 20 times below) and actuator lags from under a scan to 12 scans; the
    # margins then agree with the exact ZOH loop (python-control) to 1e-4.
    pytest.importorskip("control")
    process, fb, h = TransferModel("sopdt", 1.0, 8.0, 2.0, 1.0), settings(2.0, 8.0), 0.25
    gm, pm, ms = python_control_margins(discrete_loop(process, fb, h, tau_a))
    mine = model_margins(process, fb, h, valve=ValveModel(time_constant=tau_a))
    assert mine.gain_margin[0] == pytest.approx(gm, rel=1e-4)
    assert mine.phase_margin[0] == pytest.approx(pm, rel=1e-4)
    assert mine.ms[0] == pytest.approx(ms, rel=1e-4)


def test_an_actuator_lag_can_make_a_stable_loop_unstable():
    # 1 e^{-s}/(10 s + 1) under PI Kc = 12, Ti = 8: gain margin about 1.3 with an ideal
    # actuator; a 2 s actuator lag adds phase lag at the phase crossover and the loop is
    # unstable (python-control: the gain margin of the loop with the lag is below 1).
    pytest.importorskip("control")
    process, fb = TransferModel("fopdt", 1.0, 10.0, 0.0, 1.0), settings(12.0, 8.0)
    gm_lag, _, _ = python_control_margins(pi_tf(fb) * continuous(process, 2.0))
    assert gm_lag < 1.0
    for h in (None, 0.1):
        ideal = model_margins(process, fb, h)
        lagged = model_margins(process, fb, h, valve=ValveModel(time_constant=2.0))
        assert bool(ideal.stable[0]) and ideal.gain_margin[0] > 1.1
        assert not bool(lagged.stable[0])


def test_an_unstable_secondary_loop_makes_the_sample_unstable():
    # Secondary PI gain far above the flow path's ultimate gain: the inner loop is unstable,
    # so the cascade is, whatever the primary controller.
    process, path = TransferModel("fopdt", 2.0, 10.0, 0.0, 2.0), TransferModel(
        "fopdt", 1.5, 1.0, 0.0, 0.2)
    batch = PlantBatch.from_nominal(process, process, SensorModel(), 2, ValveModel(), path)
    batch.values["secondary.gain"][1] = 30.0  # Kc_s K_s = 33, far beyond the ultimate ~ 9
    result = loop_margins(batch, settings(0.5, 10.0), secondary=settings(1.1, 1.0))
    assert bool(result.stable[0]) and not bool(result.stable[1])
    assert math.isnan(result.gain_margin[1]) and math.isinf(result.ms[1])


def test_a_secondary_loop_needs_its_settings():
    process, path = TransferModel("fopdt", 2.0, 10.0, 0.0, 2.0), TransferModel(
        "fopdt", 1.5, 1.0, 0.0, 0.2)
    batch = PlantBatch.from_nominal(process, process, SensorModel(), 1, None, path)
    with pytest.raises(DesignError, match="secondary"):
        loop_margins(batch, settings(1.0, 10.0))


def test_a_lag_free_secondary_path_is_handled_behind_a_lagged_process():
    # A lag-free flow path (pure dead time) and no actuator lag: T does not roll off, the
    # primary's lag does. Checked against python-control as above (Pade order 10).
    pytest.importorskip("control")
    import control

    process, path = TransferModel("fopdt", 2.0, 10.0, 0.0, 2.0), TransferModel(
        "fopdt", 1.0, 0.0, 0.0, 0.1)
    fb, fb_s = settings(1.0, 10.0), settings(0.3, 0.2)
    inner = control.feedback(pi_tf(fb_s) * continuous(path), 1)
    gm, pm, ms = python_control_margins(pi_tf(fb) * inner * continuous(process))
    mine = model_margins(process, fb, secondary=path, secondary_feedback=fb_s)
    assert mine.gain_margin[0] == pytest.approx(gm, rel=1e-4)
    assert mine.phase_margin[0] == pytest.approx(pm, rel=1e-4)
    lag_free = TransferModel("fopdt", 2.0, 0.0, 0.0, 2.0)
    with pytest.raises(DesignError, match="lag-free process behind a lag-free secondary"):
        model_margins(lag_free, fb, secondary=path, secondary_feedback=fb_s)
