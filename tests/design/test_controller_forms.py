"""Controller forms: series, parallel and ideal settings, proportional band and repeats, and the
setpoint weights, checked by conversion against the published formulas and by simulation."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from robustff.case import Signal, Signals, parse_case
from robustff.design.controller_forms import (
    band_from_gain,
    ideal_to_parallel,
    ideal_to_series,
    parallel_to_ideal,
    percent_gain_factor,
    series_to_ideal,
    written_tuning,
)
from robustff.design.tuning import design_loop
from robustff.engine import build_scenario, nominal_batch, simulate
from robustff.errors import DesignError

# A FOPDT loop in minutes, CV in degC (transmitter 0 .. 200 degC), output in % (0 .. 100 %).
LOOP = """\
title = "Fictional reboiler outlet temperature"
time_unit = "min"

[process]
model = "fopdt"
gain = 0.8
time_constant = 12.0
dead_time = 1.5

[disturbance]
model = "fopdt"
gain = -1.2
time_constant = 6.0
dead_time = 1.0

[signals.controlled]
name = "outlet temperature"
unit = "degC"
range = [0.0, 200.0]

[signals.output]
name = "steam valve"
unit = "%"

[simulation]
duration = 120.0
step = 0.05

[study]
samples = 10
"""

EVENTS = {
    "disturbance": '\n[[event]]\nkind = "disturbance-step"\nat = 5.0\nsize = 2.0\n',
    "setpoint": '\n[[event]]\nkind = "setpoint-step"\nat = 5.0\nsize = 3.0\n',
}


def run(feedback: str, events: str = "disturbance", samples: int = 6) -> dict[str, np.ndarray]:
    """Metrics and trajectories of ``samples`` perturbed plants for a ``[feedback]`` table."""
    case = parse_case(LOOP + "\n[feedback]\n" + feedback + EVENTS[events])
    design = design_loop(case)
    scenario = build_scenario(case, design)
    batch = nominal_batch(case, samples)
    batch.set_parameter("process.gain", np.linspace(0.5, 1.1, samples))
    batch.set_parameter("process.dead_time", np.linspace(1.0, 2.5, samples))
    result = simulate(batch, design, scenario, keep=np.arange(samples))
    return {**result.metrics, "trajectories": result.trajectories}


def assert_identical(first: dict[str, np.ndarray], second: dict[str, np.ndarray]) -> None:
    assert first.keys() == second.keys()
    for name in first:
        np.testing.assert_array_equal(first[name], second[name], err_msg=name)


# --- conversions against the published formulas -------------------------------------------------


def test_series_ideal_parallel_worked_example():
    # Source: Astrom and Hagglund, Advanced PID Control, ISA 2006, section 3.4 (from memory):
    # ideal K = K' (Ti' + Td')/Ti', Ti = Ti' + Td', Td = Ti' Td'/(Ti' + Td'); parallel
    # k = K, ki = K/Ti, kd = K Td. Series K' = 3, Ti' = 6, Td' = 2 by hand: K = 3 (8/6) = 4,
    # Ti = 8, Td = 12/8 = 1.5; parallel k = 4, ki = 0.5, kd = 6.
    assert series_to_ideal(3.0, 6.0, 2.0) == pytest.approx((4.0, 8.0, 1.5))
    assert ideal_to_series(4.0, 8.0, 1.5) == pytest.approx((3.0, 6.0, 2.0))
    assert ideal_to_parallel(4.0, 8.0, 1.5) == pytest.approx((4.0, 0.5, 6.0))
    assert parallel_to_ideal(4.0, 0.5, 6.0) == pytest.approx((4.0, 8.0, 1.5))


def test_no_series_form_when_ti_below_four_td():
    # Same source: the series form exists only for Ti >= 4 Td (real zeros).
    assert ideal_to_series(2.0, 8.0, 2.0) == pytest.approx((1.0, 4.0, 4.0))  # Ti = 4 Td
    assert ideal_to_series(2.0, 7.9, 2.0) is None
    assert written_tuning(2.0, 7.9, 2.0, "series", Signals()) is None


@given(st.floats(-50.0, 50.0).filter(lambda k: abs(k) > 1e-3), st.floats(0.1, 100.0),
       st.floats(0.0, 1.0))
def test_ideal_to_series_and_back(kc, ti, fraction):
    td = 0.25 * ti * fraction  # Ti >= 4 Td
    series = ideal_to_series(kc, ti, td)
    assert series is not None
    assert series_to_ideal(*series) == pytest.approx((kc, ti, td), rel=1e-9, abs=1e-12)
    assert parallel_to_ideal(*ideal_to_parallel(kc, ti, td)) == pytest.approx(
        (kc, ti, td), rel=1e-12, abs=1e-15)


@given(st.floats(0.01, 1000.0), st.floats(0.1, 10.0))
def test_series_with_equal_times_converts_back(time, kc):
    # Ti' = Td' gives Ti = 4 Td exactly in theory (a double zero); rounding must not make the
    # series form the engineer entered "not exist".
    series = ideal_to_series(*series_to_ideal(kc, time, time))
    assert series is not None
    assert series == pytest.approx((kc, time, time), rel=1e-6)


def test_proportional_band_of_a_gain_in_engineering_units():
    # Source: Seborg, Edgar, Mellichamp and Doyle, Process Dynamics and Control, 4th ed., 2016,
    # chapter 8 (from memory): PB = 100 % / Kc with Kc dimensionless (both signals in % of
    # span). Kc = 2 %/degC on a 0 .. 200 degC transmitter and a 0 .. 100 % output is 4 %/%,
    # PB = 25 %; the same with an output of 0 .. 50 kg/h and Kc = 1 (kg/h)/degC.
    cv = Signal("temperature", "degC", (0.0, 200.0))
    assert band_from_gain(2.0, Signals(controlled=cv)) == pytest.approx(25.0)
    assert band_from_gain(-2.0, Signals(controlled=cv)) == pytest.approx(25.0)
    flow = Signal("steam", "kg/h", (0.0, 50.0))
    assert band_from_gain(1.0, Signals(controlled=cv, output=flow)) == pytest.approx(25.0)
    assert percent_gain_factor(Signals()) is None  # no CV span
    assert percent_gain_factor(Signals(controlled=cv, output=Signal("steam", "kg/h"))) is None


# --- the same controller, written three ways, simulated ------------------------------------------

# Exactly representable settings, so that every conversion is exact in binary and the results
# must be bit-identical. Series K' = 3 %/degC, Ti' = 4 min, Td' = 4 min; by the formulas of the
# source above: ideal K = 3 (8/4) = 6, Ti = 8, Td = 16/8 = 2; parallel kp = 6, ki = 6/8 = 0.75,
# kd = 6 x 2 = 12.
IDEAL_PID = 'form = "pid"\ntuning = "manual"\nkc = 6.0\nti = 8.0\ntd = 2.0\n'
SERIES_PID = 'form = "pid"\ntuning = "manual"\nstructure = "series"\nkc = 3.0\nti = 4.0\ntd = 4.0\n'
PARALLEL_PID = ('form = "pid"\ntuning = "manual"\nstructure = "parallel"\nkc = 6.0\nki = 0.75\n'
                'kd = 12.0\n')


@pytest.mark.parametrize("events", ["disturbance", "setpoint"])
def test_series_parallel_and_ideal_settings_of_one_controller_simulate_identically(events):
    ideal = run(IDEAL_PID, events)
    assert_identical(ideal, run(SERIES_PID, events))
    assert_identical(ideal, run(PARALLEL_PID, events))
    # And a different series controller does differ (the comparison can fail).
    other = run(SERIES_PID.replace("td = 4.0", "td = 3.0"), events)
    assert not np.array_equal(ideal["iae"], other["iae"])


def test_series_settings_in_general_match_the_ideal_conversion_closely():
    # Not exactly representable: the ideal settings typed in rounded to 15 digits.
    kc, ti, td = series_to_ideal(2.7, 9.3, 1.7)
    ideal = run(f'form = "pid"\ntuning = "manual"\nkc = {kc!r}\nti = {ti!r}\ntd = {td!r}\n')
    series = run('form = "pid"\ntuning = "manual"\nstructure = "series"\nkc = 2.7\nti = 9.3\n'
                 'td = 1.7\n')
    np.testing.assert_allclose(series["iae"], ideal["iae"], rtol=1e-12)


def test_proportional_band_with_spans_equals_the_gain_in_engineering_units():
    # Kc = 2 %/degC, 0 .. 200 degC, 0 .. 100 %: 4 %/%, PB = 100/4 = 25 % (source above).
    gain = run('tuning = "manual"\nkc = 2.0\nti = 8.0\n')
    band = run('tuning = "manual"\nproportional_band = 25.0\nti = 8.0\n')
    assert_identical(gain, band)
    assert not np.array_equal(gain["iae"], run('tuning = "manual"\nproportional_band = 30.0\n'
                                               'ti = 8.0\n')["iae"])


def test_proportional_band_takes_the_action_from_the_process_gain():
    # A negative process gain needs a direct-acting controller: Kc < 0 for the same band.
    case = parse_case(LOOP.replace("gain = 0.8", "gain = -0.8") + "\n[feedback]\n"
                      'tuning = "manual"\nproportional_band = 25.0\nti = 8.0\n'
                      + EVENTS["disturbance"])
    design = design_loop(case)
    assert design.feedback.kc == pytest.approx(-2.0)
    assert any("direct acting" in line for line in design.summary_lines(case))


def test_repeats_per_minute_equal_the_integral_time():
    # Common practice, no source: repeats per minute = 1 / Ti in min per repeat; 0.125 = 1/8.
    assert_identical(run('tuning = "manual"\nkc = 2.0\nti = 8.0\n'),
                     run('tuning = "manual"\nkc = 2.0\nrepeats = 0.125\n'))


def test_parallel_gains_of_opposite_signs_are_refused():
    case = parse_case(LOOP + '\n[feedback]\ntuning = "manual"\nstructure = "parallel"\n'
                      "kc = 2.0\nki = -0.5\n" + EVENTS["disturbance"])
    with pytest.raises(DesignError, match=r"feedback\.ki: -0\.5 must have the sign"):
        design_loop(case)


# --- setpoint weights ----------------------------------------------------------------------------

PI = 'tuning = "manual"\nkc = 4.0\nti = 6.0\n'


def test_setpoint_weight_below_one_reduces_setpoint_overshoot():
    # Source: Astrom and Hagglund, Advanced PID Control, 2006, chapter 3 (set-point weighting,
    # from memory): b < 1 removes part of the proportional kick and so the overshoot of a setpoint
    # step, without changing the loop's response to load disturbances.
    full = run(PI, "setpoint")
    weighted = run(PI + "setpoint_weight = 0.4\n", "setpoint")
    assert np.all(full["overshoot"] > 0.0)
    assert np.all(weighted["overshoot"] < full["overshoot"])


@pytest.mark.parametrize("weights", ["setpoint_weight = 0.4\n",
                                     "setpoint_weight = 0.0\nderivative_setpoint_weight = 1.0\n"])
def test_setpoint_weights_leave_the_disturbance_response_unchanged(weights):
    # Same source: the weights act on the setpoint only, so with a constant setpoint the loop is
    # the same controller (bit for bit: b r and c r are zero).
    pid = 'form = "pid"\n' + PI + "td = 1.0\n"
    assert_identical(run(pid), run(pid + weights))


def test_setpoint_step_moves_the_output_by_the_weighted_kicks():
    # The ideal form with weights, u = Kc (b r - y) + I + D, with D the filtered derivative of
    # c r - y (Astrom and Hagglund 2006, chapter 3, from memory): at the scan of a setpoint step
    # dr, from rest, the output jumps by Kc b dr + Kc Td c dr / (Tf + h), the derivative term
    # being the backward difference through the filter of time constant Tf (h the scan).
    kc, ti, td, b, c = 4.0, 6.0, 1.0, 0.4, 0.5
    fraction, h, dr = 0.1, 0.05, 3.0
    trajectories = run(f'form = "pid"\ntuning = "manual"\nkc = {kc}\nti = {ti}\ntd = {td}\n'
                       f"setpoint_weight = {b}\nderivative_setpoint_weight = {c}\n",
                       "setpoint", samples=1)["trajectories"]
    step = round(5.0 / h)
    jump = trajectories[0, 2, step] - trajectories[0, 2, step - 1]
    tf = fraction * td
    assert jump == pytest.approx(kc * b * dr + kc * td * c * dr / (tf + h), rel=1e-12)


def test_design_summary_shows_the_case_form_and_the_ideal_form():
    case = parse_case(LOOP + "\n[feedback]\n" + SERIES_PID.replace("kc = 3.0",
                                                                  "proportional_band = 25.0")
                      + "setpoint_weight = 0.5\nderivative_filter = 0.125\n"
                      + EVENTS["disturbance"])
    lines = design_loop(case).summary_lines(case)
    text = "\n".join(lines)
    # Series PB 25 % on 200 degC / 100 %: K' = 2 %/degC, ideal K = 2 (8/4) = 4 %/degC (8 %/%).
    assert ("PID, ideal form: Kc = 4 %/degC (8 %/%, PB = 12.5 %), Ti = 8 min, Td = 2 min"
            in lines[0])
    assert ("series form, as the control system takes it: PB = 25 % (Kc' = 2 %/degC, 4 %/%), "
            "Ti' = 4 min (0.25 repeats/min), Td' = 4 min") in text
    assert "CV span 0 .. 200 degC, output span 100 %" in text
    assert "setpoint weight b = 0.5 (proportional), c = 0 (derivative)" in text
    assert "derivative filter 0.125 x ideal Td = 0.25 min" in text
    assert "reverse acting" in text


def test_tuned_controller_is_shown_in_the_case_form():
    # A tuned (IMC) PID shown in the parallel form: kp = Kc, ki = Kc/Ti, kd = Kc Td (source above).
    case = parse_case(LOOP + '\n[feedback]\nform = "pid"\ntuning = "imc"\n'
                      'structure = "parallel"\n' + EVENTS["disturbance"])
    design = design_loop(case)
    fb = design.feedback
    text = "\n".join(design.summary_lines(case))
    assert (f"parallel form, as the control system takes it: kp = {fb.kc:.4g} %/degC "
            f"({fb.kc * 2.0:.4g} %/%, PB = {100.0 / (fb.kc * 2.0):.4g} %), "
            f"ki = {fb.kc / fb.ti:.4g} %/(degC min), kd = {fb.kc * fb.td:.4g} % min/degC") in text


def test_simc_sopdt_pid_shown_in_series_form_is_the_rule_as_published():
    # Source: Skogestad, "Simple analytic rules for model reduction and PID controller tuning",
    # J. Process Control 13 (2003) 291-309 (from memory): for a SOPDT model the SIMC PID is the
    # series controller Kc' = tau1 / (k (tau_c + theta)), Ti' = min(tau1, 4 (tau_c + theta)),
    # Td' = tau2. k = 0.8, tau1 = 12, tau2 = 3, theta = 1.5, tau_c = 1.5: Kc' = 12 / 2.4 = 5
    # %/degC, Ti' = min(12, 12) = 12 min, Td' = 3 min; 5 %/degC on 200 degC / 100 % is 10 %/%.
    text = LOOP.replace("time_constant = 12.0", "time_constant = 12.0\ntime_constant_2 = 3.0", 1)
    text = text.replace('model = "fopdt"', 'model = "sopdt"', 1)
    case = parse_case(text + '\n[feedback]\nform = "pid"\nstructure = "series"\n'
                      + EVENTS["disturbance"])
    lines = "\n".join(design_loop(case).summary_lines(case))
    assert ("series form, as the control system takes it: Kc' = 5 %/degC (10 %/%, PB = 10 %), "
            "Ti' = 12 min (0.08333 repeats/min), Td' = 3 min") in lines
