"""Feedback tuning and feedforward design against published rules and derivations."""

import math

import pytest

from robustff.case import FeedbackSpec, FeedforwardSpec
from robustff.design.tuning import design_feedforward, series_to_ideal, tune_feedback
from robustff.errors import DesignError
from robustff.plant.models import TransferModel


def test_simc_fopdt_pi_rule():
    # Source: Skogestad, "Simple analytic rules for model reduction and PID controller tuning",
    # J. Process Control 13 (2003) 291-309:
    # Kc = tau1/(k (tau_c + theta)), tau_I = min(tau1, 4(tau_c + theta)).
    settings, _ = tune_feedback(TransferModel("fopdt", 2.0, 10.0, 0.0, 3.0), FeedbackSpec(), 0.1)
    assert settings.kc == pytest.approx(10.0 / (2.0 * 6.0))
    assert settings.ti == pytest.approx(min(10.0, 24.0))
    lag_dominant, _ = tune_feedback(
        TransferModel("fopdt", 1.0, 100.0, 0.0, 1.0), FeedbackSpec(), 0.1
    )
    assert lag_dominant.ti == pytest.approx(8.0)  # 4 (tau_c + theta) caps tau_I


def test_simc_half_rule_example():
    # Source: Skogestad 2003 (from memory): 1/((s+1)(0.2s+1)(0.04s+1)(0.008s+1)) reduces to
    # FOPDT tau1 = 1.1, theta = 0.148 and PI Kc = 3.72, tau_I = 1.1 with tau_c = theta.
    model = TransferModel("fopdt", 1.0, 1.1, 0.0, 0.148)
    settings, _ = tune_feedback(model, FeedbackSpec(), 0.001)
    assert settings.kc == pytest.approx(3.72, abs=0.01)
    assert settings.ti == pytest.approx(1.1)


def test_simc_sopdt_pid_series_to_ideal_example():
    # Source: analytic (arithmetic): k = 1, tau1 = 6, tau2 = 2, theta = tau_c = 1:
    # series (Kc, tau_I, tau_D) = (3, 6, 2) -> ideal (4, 8, 1.5).
    assert series_to_ideal(3.0, 6.0, 2.0) == pytest.approx((4.0, 8.0, 1.5))
    settings, _ = tune_feedback(
        TransferModel("sopdt", 1.0, 6.0, 2.0, 1.0), FeedbackSpec(form="pid"), 0.01
    )
    assert (settings.kc, settings.ti, settings.td) == pytest.approx((4.0, 8.0, 1.5))


def test_simc_integrating_rule_and_negative_gain():
    # Source: Skogestad 2003 (from memory): Kc = 1/(k' (tau_c + theta)), tau_I = 4 (tau_c + theta).
    settings, _ = tune_feedback(TransferModel("ipdt", -0.05, 0.0, 0.0, 2.0), FeedbackSpec(), 0.1)
    assert settings.kc == pytest.approx(1.0 / (-0.05 * 4.0))
    assert settings.kc < 0  # reverse acting for a negative process gain
    assert settings.ti == pytest.approx(16.0)


def test_imc_pid_fopdt_matches_pade_derivation():
    # Derivation (Rivera, Morari and Skogestad 1986, first-order Pade of the delay): the IMC
    # controller is the series PID Kc' = tau/(k (tau_c + theta/2)), tau_I' = tau, tau_D' = theta/2.
    k, tau, theta, tau_c = 1.5, 8.0, 2.0, 3.0
    settings, _ = tune_feedback(
        TransferModel("fopdt", k, tau, 0.0, theta),
        FeedbackSpec(form="pid", tuning="imc", closed_loop_time=tau_c),
        0.1,
    )
    expected = series_to_ideal(tau / (k * (tau_c + theta / 2)), tau, theta / 2)
    assert (settings.kc, settings.ti, settings.td) == pytest.approx(expected)


def test_feedforward_structures_and_realizability():
    process = TransferModel("fopdt", 2.0, 10.0, 0.0, 3.0)
    slow = TransferModel("fopdt", 1.5, 5.0, 0.0, 4.0)
    fast = TransferModel("fopdt", 1.5, 5.0, 0.0, 1.0)
    static, _ = design_feedforward(process, slow, FeedforwardSpec("static", 0.8), 0.1)
    # Source: Seborg, Edgar, Mellichamp and Doyle, Process Dynamics and Control, feedforward
    # chapter (from memory): ideal Gff = -Gd/Gp, static part -Kd/Kp.
    assert static.gain == pytest.approx(-1.5 / 2.0 * 0.8)
    full, notes = design_feedforward(process, slow, FeedforwardSpec("lead-lag-delay"), 0.1)
    assert (full.lead, full.lag, full.delay) == pytest.approx((10.0, 5.0, 1.0)) and not notes
    dropped, notes = design_feedforward(process, fast, FeedforwardSpec("lead-lag-delay"), 0.1)
    assert dropped.delay == 0.0 and any("not realizable" in n for n in notes)
    with pytest.raises(DesignError):
        design_feedforward(
            TransferModel("ipdt", 1.0, 0, 0, 1.0), slow, FeedforwardSpec("static"), 0.1
        )
    assert math.isclose(
        design_feedforward(process, slow, FeedforwardSpec("lead-lag", lead=7.0), 0.1)[0].lead, 7.0
    )


def test_common_lags_cancel_before_the_lead_lag_reduction():
    # Algebra: -Gd/Gp = -(Kd/Kp) (20 s + 1) / ((20 s + 1)(4 s + 1)) = -(Kd/Kp) / (4 s + 1), so
    # the exact compensator has no lead and a 4 s lag (no first-moment approximation needed).
    process = TransferModel("fopdt", -0.12, 20.0, 0.0, 12.0)
    disturbance = TransferModel("sopdt", 0.15, 20.0, 4.0, 18.0)
    settings, _ = design_feedforward(process, disturbance, FeedforwardSpec("lead-lag-delay"), 0.5)
    assert (settings.lead, settings.lag, settings.delay) == pytest.approx((0.0, 4.0, 6.0))


def test_manual_gain_of_the_wrong_sign_is_refused():
    spec = FeedbackSpec(tuning="manual", kc=4.0, ti=10.0)
    with pytest.raises(DesignError, match="wrong direction"):
        tune_feedback(TransferModel("ipdt", -0.05, 0.0, 0.0, 0.3), spec, 0.02)


def test_explicit_delay_has_no_unrealizable_note():
    process = TransferModel("fopdt", 2.0, 10.0, 0.0, 3.0)
    fast = TransferModel("fopdt", 1.5, 5.0, 0.0, 1.0)
    settings, notes = design_feedforward(
        process, fast, FeedforwardSpec("lead-lag-delay", delay=0.6), 0.1
    )
    assert settings.delay == 0.6 and not any("not realizable" in n for n in notes)
