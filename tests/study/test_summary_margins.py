"""The ``margins`` section of ``summary.json`` describes the loop as simulated, so its stability
verdict and the simulation's agree, also at the stability limit."""

from __future__ import annotations

import math

import numpy as np
import pytest
from case_texts import MINIMAL

from robustff.case import parse_case
from robustff.case.sampling import plant_batch
from robustff.design.margins import loop_margins
from robustff.study import run_study
from robustff.study.summary import summarize_study


def _case(kc: float, ti: float, gain_range: tuple[float, float], duration: float) -> str:
    """A fictional FOPDT loop, 2 e^{-2s}/(10s + 1), manual PI, scan period 0.5 s."""
    return (MINIMAL.replace('title = "Test loop"', 'title = "Loop near the stability limit"')
            .replace("duration = 100.0", f"duration = {duration!r}")
            + f'[feedback]\ntuning = "manual"\nkc = {kc!r}\nti = {ti!r}\n'
            "output_low = -1e6\noutput_high = 1e6\n"
            '[uncertainty]\n'
            f'"process.gain" = {{ uniform = [{gain_range[0]!r}, {gain_range[1]!r}] }}\n')


def test_margins_and_simulation_agree_on_every_sample_at_the_limit():
    # Derivation: with Ti = tau the loop is (K Kc/tau) e^{-theta s}/s, continuous GM
    # pi tau/(2 K Kc theta) (phase crossover at pi/(2 theta)); Kc is 0.95 of the value for
    # GM = 1 at the nominal gain, and the gain spreads +-15 %, so the continuous GM spans about
    # 0.92 to 1.24. The sampled controller (0.5 s scan, about 0.25 s more delay) loses about
    # 11 % of it: many samples are stable as continuous loops but unstable as simulated.
    kc = 0.95 * math.pi * 10.0 / (2 * 2.0 * 2.0)
    case = parse_case(_case(kc, 10.0, (1.7, 2.3), 400.0))
    result = run_study(case, samples=200, jobs=1, seed=3)
    margins = summarize_study(result)["margins"]
    assert margins["sample_time"] == 0.5
    simulated = result.unstable[:, 0]
    assert 20 < margins["unstable"] < 180
    assert margins["simulation_unstable"] == int(simulated.sum()) == margins["unstable"]
    assert margins["verdicts_differ"] == 0 and margins["verdicts_differ_samples"] == []
    # The nominal loop: stable with a continuous controller (GM 1/0.95), not as simulated.
    assert margins["nominal_continuous"]["stable"] is True
    assert margins["nominal_continuous"]["gain_margin"] == pytest.approx(1 / 0.95, rel=1e-9)
    assert margins["nominal"]["stable"] is False and margins["nominal"]["gain_margin"] < 1.0
    # The continuous margins alone would contradict the simulation on many samples.
    continuous = loop_margins(plant_batch(case, result.names, result.parameters),
                              result.design.feedback)
    assert np.count_nonzero(continuous.stable == simulated) > 20


def test_a_very_slow_integral_is_stable_in_both():
    # The loop of the issue: 1 e^{-2s}/(20s + 1) under Kc = 1, Ti = 50,000 s (GM about 16).
    text = _case(1.0, 50_000.0, (0.8, 1.2), 200.0).replace("gain = 2.0", "gain = 1.0", 1)
    text = text.replace("time_constant = 10.0", "time_constant = 20.0", 1)
    result = run_study(parse_case(text), samples=40, jobs=1, seed=3)
    margins = summarize_study(result)["margins"]
    assert margins["unstable"] == 0 and margins["verdicts_differ"] == 0
    assert margins["simulation_unstable"] == 0
    assert 10.0 < margins["nominal"]["gain_margin"] < margins["nominal_continuous"]["gain_margin"]


def test_the_note_says_what_the_margins_leave_out():
    # The steam-heater demo has a steam-flow secondary loop and a sticky valve; the margins
    # take the secondary closed loop and the actuator lag, not the stem's nonlinear effects,
    # and the note says so.
    from pathlib import Path

    from robustff.case import load_case

    root = Path(__file__).resolve().parents[2]
    result = run_study(load_case(root / "cases" / "steam-heater-sticky-valve.toml"), samples=20,
                       jobs=1)
    note = summarize_study(result)["margins"]["note"]
    assert "the secondary loop enters as its linear closed loop" in note
    assert "stiction, deadband and rate limit are not part of the margins" in note
    plain = run_study(load_case(root / "cases" / "wash-water-heater.toml"), samples=20, jobs=1)
    assert "The loop as installed" not in summarize_study(plain)["margins"]["note"]
