"""Feedback tuning and feedforward design against published rules and derivations."""

import math

import pytest

from robustff.case import FeedbackSpec, FeedforwardSpec
from robustff.design.tuning import (
    design_feedforward,
    half_rule,
    series_to_ideal,
    tune_feedback,
)
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


def test_half_rule_moves_half_of_tau2_to_the_lag_and_half_to_the_delay():
    # Source: Skogestad, "Simple analytic rules for model reduction and PID controller tuning",
    # J. Process Control 13 (2003) 291-309, section 2 (half rule): the largest neglected time
    # constant tau2 goes half to the retained lag, half to the delay:
    # tau1_eff = tau1 + tau2/2 = 10 + 3 = 13, theta_eff = theta + tau2/2 = 2 + 3 = 5.
    reduced = half_rule(TransferModel("sopdt", 3.0, 10.0, 6.0, 2.0))
    assert reduced.kind == "fopdt" and reduced.gain == 3.0
    assert (reduced.time_constant, reduced.time_constant_2) == pytest.approx((13.0, 0.0))
    assert reduced.dead_time == pytest.approx(5.0)


def test_simc_sopdt_pi_uses_the_half_rule_paper_example():
    # Source: Skogestad 2003 (J. Process Control 13, 291-309), section 2 example, from memory:
    # 1/((s+1)(0.2s+1)(0.04s+1)(0.008s+1)); the half rule adds the two smallest lags fully to
    # the delay, so the SOPDT is k = 1, tau1 = 1, tau2 = 0.2, theta = 0.04 + 0.008 = 0.048.
    # Reducing it: tau1_eff = 1 + 0.1 = 1.1, theta_eff = 0.048 + 0.1 = 0.148. SIMC PI with
    # tau_c = theta_eff = 0.148: Kc = 1.1 / (1 (0.148 + 0.148)) = 1.1 / 0.296 = 3.7162,
    # tau_I = min(1.1, 4 (0.296) = 1.184) = 1.1 (the paper gives Kc = 3.72, tau_I = 1.1).
    settings, _ = tune_feedback(
        TransferModel("sopdt", 1.0, 1.0, 0.2, 0.048),
        FeedbackSpec(form="pi", closed_loop_time=0.148),
        0.001,
    )
    assert settings.kc == pytest.approx(3.7162, abs=1e-4)
    assert settings.ti == pytest.approx(1.1)
    assert settings.td == 0.0


def test_simc_sopdt_pi_half_rule_with_integral_time_cap():
    # Source: Skogestad 2003, section 2 (half rule) and Table 1 / SIMC PI rule, from memory for
    # the equation numbers: k = 2, tau1 = 20, tau2 = 4, theta = 1, tau_c = 2.
    # Half rule: tau1_eff = 20 + 2 = 22, theta_eff = 1 + 2 = 3.
    # Kc = 22 / (2 (2 + 3)) = 2.2; tau_I = min(22, 4 (2 + 3) = 20) = 20 (the cap is active).
    settings, _ = tune_feedback(
        TransferModel("sopdt", 2.0, 20.0, 4.0, 1.0),
        FeedbackSpec(form="pi", closed_loop_time=2.0),
        0.01,
    )
    assert (settings.kc, settings.ti, settings.td) == pytest.approx((2.2, 20.0, 0.0))
    # Same reduction, then the IMC (lambda) PI rule Kc = tau/(k (tau_c + theta)), tau_I = tau
    # (Rivera, Morari and Skogestad, Ind. Eng. Chem. Process Des. Dev. 25 (1986) 252-265,
    # Table 1 with a first-order Taylor delay, from memory): Kc = 22 / (2 * 5) = 2.2, tau_I = 22.
    imc, _ = tune_feedback(
        TransferModel("sopdt", 2.0, 20.0, 4.0, 1.0),
        FeedbackSpec(form="pi", tuning="imc", closed_loop_time=2.0),
        0.01,
    )
    assert (imc.kc, imc.ti) == pytest.approx((2.2, 22.0))


def test_simc_sopdt_pid_with_integral_time_cap_and_negative_gain():
    # Source: Skogestad 2003, SIMC PID for SOPDT (series form): Kc' = tau1/(k (tau_c + theta)),
    # tau_I' = min(tau1, 4 (tau_c + theta)), tau_D' = tau2; series -> ideal conversion
    # Kc = Kc' (1 + tau_D'/tau_I'), tau_I = tau_I' + tau_D', tau_D = tau_I' tau_D'/(tau_I' + tau_D')
    # (same paper, from memory). k = -0.5, tau1 = 40, tau2 = 5, theta = 2, tau_c = 3:
    # Kc' = 40 / (-0.5 * 5) = -16; tau_I' = min(40, 20) = 20; tau_D' = 5
    # -> Kc = -16 * 1.25 = -20, tau_I = 25, tau_D = 100 / 25 = 4. No half rule with a PID.
    settings, notes = tune_feedback(
        TransferModel("sopdt", -0.5, 40.0, 5.0, 2.0),
        FeedbackSpec(form="pid", closed_loop_time=3.0),
        0.01,
    )
    assert (settings.kc, settings.ti, settings.td) == pytest.approx((-20.0, 25.0, 4.0))
    assert not notes


def test_imc_integrating_pi_rule():
    # Source: Chien and Fruehauf, "Consider IMC tuning to improve controller performance",
    # Chem. Eng. Progress 86(10) (1990) 33-41, from memory: for k e^{-theta s}/s,
    # Kc = (2 tau_c + theta) / (k (tau_c + theta)^2), tau_I = 2 tau_c + theta.
    # Derivation check: IMC filter (gamma s + 1)/(tau_c s + 1)^2 and e^{-theta s} ~ 1 - theta s;
    # 1 - G q = ((tau_c^2 + theta gamma) s^2 + (2 tau_c + theta - gamma) s)/(tau_c s + 1)^2 needs
    # gamma = 2 tau_c + theta, which leaves C = (gamma s + 1)/(k (tau_c + theta)^2 s).
    # k = 0.05, theta = 2, tau_c = 4: Kc = 10 / (0.05 * 36) = 5.5556, tau_I = 10.
    settings, _ = tune_feedback(
        TransferModel("ipdt", 0.05, 0.0, 0.0, 2.0),
        FeedbackSpec(tuning="imc", closed_loop_time=4.0),
        0.1,
    )
    assert settings.kc == pytest.approx(5.5556, abs=1e-4)
    assert settings.ti == pytest.approx(10.0)
    # A reverse-acting process (k = -0.05) flips the sign only; a PID request has no Td.
    reverse, notes = tune_feedback(
        TransferModel("ipdt", -0.05, 0.0, 0.0, 2.0),
        FeedbackSpec(form="pid", tuning="imc", closed_loop_time=4.0),
        0.1,
    )
    assert (reverse.kc, reverse.ti, reverse.td) == pytest.approx((-5.5556, 10.0, 0.0), abs=1e-4)
    assert any("no derivative action" in note for note in notes)


def test_imc_sopdt_pid_rule():
    # Source: Rivera, Morari and Skogestad, "Internal model control. 4. PID controller design",
    # Ind. Eng. Chem. Process Des. Dev. 25 (1986) 252-265, Table 1, from memory: for
    # k/((tau1 s + 1)(tau2 s + 1)) the ideal PID Kc = (tau1 + tau2)/(k tau_c),
    # tau_I = tau1 + tau2, tau_D = tau1 tau2/(tau1 + tau2). A delay, by a first-order Taylor
    # approximation, replaces tau_c by tau_c + theta (series Kc' = tau1/(k (tau_c + theta)),
    # tau_I' = tau1, tau_D' = tau2).
    # k = 2, tau1 = 10, tau2 = 4, theta = 1, tau_c = 1.5:
    # Kc = 14 / (2 * 2.5) = 2.8, tau_I = 14, tau_D = 40 / 14 = 2.857143.
    settings, _ = tune_feedback(
        TransferModel("sopdt", 2.0, 10.0, 4.0, 1.0),
        FeedbackSpec(form="pid", tuning="imc", closed_loop_time=1.5),
        0.01,
    )
    assert (settings.kc, settings.ti, settings.td) == pytest.approx((2.8, 14.0, 2.857143))
    # Without delay the table entry itself: Kc = 14 / (2 * 1.5) = 4.666667.
    no_delay, _ = tune_feedback(
        TransferModel("sopdt", 2.0, 10.0, 4.0, 0.0),
        FeedbackSpec(form="pid", tuning="imc", closed_loop_time=1.5),
        0.01,
    )
    assert (no_delay.kc, no_delay.ti, no_delay.td) == pytest.approx((4.666667, 14.0, 2.857143))


def test_every_registered_kind_has_a_rule_for_every_method():
    """Adding a model kind without its tuning rules fails here, not in a user's run."""
    from robustff.design.tuning import TUNING_RULES
    from robustff.plant.kinds import kind_names

    for method, rules in TUNING_RULES.items():
        assert set(rules) == set(kind_names()), method
