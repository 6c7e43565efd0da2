"""Where in frequency feedforward helps: the error ratio, its crossover and a record's share.

References: the continuous-time ratio |1 + Gp Gff Gm / Gd| evaluated from the models' own
transfer functions; the closed form for identical paths; the engine's simulation of the loop
driven by a sinusoid; the analytic spectrum of a first-order autoregressive process.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import jsonschema
import numpy as np
import pytest

from robustff.case import (
    Case,
    Event,
    FeedbackSpec,
    FeedforwardSpec,
    SimulationSpec,
    parse_case,
)
from robustff.cli import EXIT_OK, main
from robustff.design.tuning import design_loop
from robustff.engine import build_scenario, nominal_batch, simulate
from robustff.plant.models import SensorModel
from robustff.plant.models import TransferModel as Model
from robustff.study.frequency import error_ratio, frequency_study, variance_share_below

ROOT = Path(__file__).resolve().parents[2]
PROCESS = Model("fopdt", 0.6, 45.0, 0.0, 8.0)  # steam valve -> outlet temperature (fictional)
DISTURBANCE = Model("fopdt", -1.8, 30.0, 0.0, 10.0)  # slower path: the delay is realizable
TRANSMITTER = SensorModel(2.0, 0.0)  # flowmeter damping, s


def heater(step: float, structure: str = "lead-lag-delay", gain_factor: float = 1.0,
           process: Model = PROCESS, disturbance: Model = DISTURBANCE,
           sensor: SensorModel = TRANSMITTER) -> Case:
    return Case("frequency", "s", process, disturbance,
                FeedbackSpec(output_low=-1e4, output_high=1e4, output_bias=0.0),
                FeedforwardSpec(structure, gain_factor=gain_factor),
                SimulationSpec(600.0, step), (Event("disturbance-step", 1.0, 1.0),),
                sensor=sensor)


def test_nominal_ratio_matches_the_continuous_formula_well_below_nyquist() -> None:
    # Source: superposition of the disturbance path and the feedforward path through the
    # process, both under the same feedback loop: E_ff / E_fb = (Gd + Gp Gff Gm) / Gd
    # (Seborg, Edgar and Mellichamp, Process Dynamics and Control, 2nd ed. 2004, ch. 15, the
    # feedforward-feedback block diagram; from memory). Gff = K (lead s + 1)/(lag s + 1)
    # e^(-delay s), Gm = 1/(tau_m s + 1).
    h = 0.02
    case = heater(h)
    design = design_loop(case)
    ff = design.feedforward
    assert ff.delay > 0 and ff.lead > 0 and ff.lag > 0
    nyquist = math.pi / h
    w = np.geomspace(1e-4, 0.1 * nyquist, 300)
    s = 1j * w
    gff = ff.gain * (ff.lead * s + 1) / (ff.lag * s + 1) * np.exp(-ff.delay * s)
    gm = 1.0 / (case.sensor.time_constant * s + 1)
    analytic = np.abs(1 + PROCESS.frequency_response(w) * gff * gm
                      / DISTURBANCE.frequency_response(w))
    sampled = error_ratio(nominal_batch(case), design, h, w)[0]
    np.testing.assert_allclose(sampled, analytic, rtol=0.01)
    # the nominal column of the study is the same ratio on its own grid
    result = frequency_study(case, design, nominal_batch(case, 3))
    s = 1j * result.omega
    low = result.omega < 0.1 * nyquist
    gff = ff.gain * (ff.lead * s + 1) / (ff.lag * s + 1) * np.exp(-ff.delay * s)
    analytic = np.abs(1 + PROCESS.frequency_response(result.omega) * gff
                      / (case.sensor.time_constant * s + 1)
                      / DISTURBANCE.frequency_response(result.omega))
    np.testing.assert_allclose(result.nominal[low], analytic[low], rtol=0.01)


def test_static_feedforward_on_identical_paths_is_one_plus_kp_kff_over_kd_everywhere() -> None:
    # Source: Gp = Kp G, Gd = Kd G with the same G, Gm = 1 and Gff = Kff give
    # |1 + Kp Kff / Kd| (the shared dynamics cancel; common practice, no source). With the gain
    # factor 0.7 of the ideal Kff = -Kd / Kp the ratio is 0.3 at every frequency.
    h = 0.5
    process = Model("sopdt", 2.0, 12.0, 3.0, 4.5)
    disturbance = Model("sopdt", -1.5, 12.0, 3.0, 4.5)
    case = heater(h, "static", 0.7, process, disturbance, SensorModel(0.0, 0.0))
    design = design_loop(case)
    kff = design.feedforward.gain
    assert kff == pytest.approx(-0.7 * (-1.5) / 2.0)
    w = np.geomspace(1e-4, math.pi / h, 200)
    ratio = error_ratio(nominal_batch(case), design, h, w)[0]
    np.testing.assert_allclose(ratio, abs(1 + 2.0 * kff / -1.5), rtol=1e-9)
    np.testing.assert_allclose(ratio, 0.3, rtol=1e-9)


def test_ratio_is_the_ratio_of_simulated_error_amplitudes(tmp_path: Path) -> None:
    # The engine, driven by a sinusoidal disturbance (a record on the scan grid), settles into
    # sinusoidal errors in both arms; the ratio of their amplitudes (least-squares fit of sine
    # and cosine over the second half of the window) is the sampled ratio.
    h = 0.5
    design_case = heater(h)
    for w in (0.01, 0.05, 0.2, 1.0):
        t = np.arange(0.0, 4000.0 + h / 2, h)
        csv = tmp_path / "sine.csv"
        csv.write_text("t,d\n" + "\n".join(f"{float(a)!r},{math.sin(w * a)!r}" for a in t))
        text = f'''
title = "sine"
time_unit = "s"
[process]
model = "fopdt"
gain = 0.6
time_constant = 45.0
dead_time = 8.0
[disturbance]
model = "fopdt"
gain = -1.8
time_constant = 30.0
dead_time = 10.0
[sensor]
time_constant = 2.0
[feedback]
output_low = -10000.0
output_high = 10000.0
output_bias = 0.0
[feedforward]
structure = "lead-lag-delay"
[simulation]
step = {h}
[[event]]
kind = "disturbance-record"
file = "{csv.as_posix()}"
time_column = "t"
value_column = "d"
'''
        case = parse_case(text)
        design = design_loop(case)
        assert design.feedforward == design_loop(design_case).feedforward
        result = simulate(nominal_batch(case), design, build_scenario(case, design),
                          keep=np.array([0]))
        cv = result.trajectories[0, :2]
        tk = np.arange(cv.shape[1]) * h
        late = tk > 2000.0
        basis = np.column_stack([np.sin(w * tk[late]), np.cos(w * tk[late])])
        amplitude = [np.linalg.norm(np.linalg.lstsq(basis, cv[arm, late], rcond=None)[0])
                     for arm in range(2)]
        expected = error_ratio(nominal_batch(case), design, h, np.array([w]))[0, 0]
        assert amplitude[1] / amplitude[0] == pytest.approx(expected, rel=1e-6)


def test_crossover_is_where_ninety_percent_of_plants_stop_being_helped() -> None:
    case = heater(0.5)
    design = design_loop(case)
    batch = nominal_batch(case, 400)
    rng = np.random.default_rng(7)
    batch.set_parameter("process.gain", rng.uniform(0.45, 0.75, 400))
    batch.set_parameter("disturbance.dead_time", rng.uniform(7.0, 13.0, 400))
    batch.set_parameter("sensor.time_constant", rng.uniform(1.0, 4.0, 400))
    result = frequency_study(case, design, batch)
    assert result.crossover is not None and result.crossover < result.nyquist
    below = result.omega < result.crossover
    above = result.omega > result.crossover * 1.2
    # the plants helped, counted directly from the ratios of every plant
    ratios = error_ratio(batch, design, 0.5, result.omega)
    helped = 100.0 * np.mean(ratios < 1.0, axis=0)
    np.testing.assert_allclose(result.bands["helped"], helped)
    assert np.all(helped[below] >= 89.75)  # 90 % up to the order statistic's rounding
    assert helped[above][0] < 90.0
    assert np.all(result.bands["p5"] <= result.bands["p50"])
    assert np.all(result.bands["p50"] <= result.bands["p95"])
    assert result.variance_share is None  # no record


@pytest.mark.parametrize("omega", [0.05, 0.2, 1.0])
def test_welch_variance_share_of_filtered_white_noise_matches_its_spectrum(omega: float) -> None:
    # Source: a first-order autoregressive process x[k] = a x[k-1] + e[k] has the spectrum
    # S(theta) ~ 1 / (1 - 2 a cos theta + a^2) (Box and Jenkins, Time Series Analysis:
    # Forecasting and Control, 1976, ch. 3; from memory), and
    # int_0^t dtheta / (1 - 2 a cos theta + a^2) = 2 / (1 - a^2) atan((1 + a)/(1 - a) tan(t/2))
    # (Gradshteyn and Ryzhik, Table of Integrals, 2.553.3; from memory), so the share of the
    # variance below theta* = omega dt is (2 / pi) atan((1 + a)/(1 - a) tan(theta*/2)).
    a, n, dt = 0.95, 2**17, 1.0
    rng = np.random.default_rng(11)
    noise = rng.normal(size=n)
    x = np.empty(n)
    x[0] = noise[0] / math.sqrt(1 - a * a)
    for k in range(1, n):
        x[k] = a * x[k - 1] + noise[k]
    expected = 100.0 * (2 / math.pi) * math.atan((1 + a) / (1 - a) * math.tan(omega * dt / 2))
    assert variance_share_below(np.arange(n) * dt, x, omega) == pytest.approx(expected, abs=1.0)


def test_a_recorded_run_writes_frequency_csv_and_a_valid_frequency_summary(
        tmp_path: Path) -> None:
    record = ROOT / "cases" / "data" / "wash-water-flow-record.csv"
    case_text = (ROOT / "cases" / "wash-water-heater.toml").read_text(encoding="utf-8")
    head = case_text.split("[[event]]")[0].replace("duration = 600.0", "")
    tail = "[uncertainty]" + case_text.split("[uncertainty]")[1]
    path = tmp_path / "replay.toml"
    path.write_text(head + f'''[[event]]
kind = "disturbance-record"
file = "{record.as_posix()}"
time_column = "Zeitstempel"
value_column = "FI3107_m3h"

''' + tail, encoding="utf-8")
    out = tmp_path / "out"
    assert main(["run", str(path), "--samples", "100", "--jobs", "1", "--out", str(out)]) == EXIT_OK
    summary = json.loads((out / "summary.json").read_text())
    schema = json.loads((ROOT / "docs" / "summary.schema.json").read_text())
    jsonschema.Draft202012Validator(schema).validate(summary)
    frequency = summary["frequency"]
    assert frequency["record"] is not None
    assert 0 < frequency["record"]["variance_share_below"] <= 100
    assert frequency["crossover_period"] == pytest.approx(2 * math.pi / frequency["crossover"])
    rows = (out / "frequency.csv").read_text().splitlines()
    assert rows[0].startswith("omega [rad/s],frequency [1/s],period [s]")
    assert len(rows) == 1 + 160
    assert summary["units"]["cv_std"] == "degC" and summary["units"]["outside_band"] == "%"


def test_a_large_study_takes_the_bands_over_its_first_plants_only() -> None:
    # memory stays MAX_PLANTS x FREQUENCY_POINTS numbers however many plants the study has
    from types import SimpleNamespace

    from robustff.study.frequency import FREQUENCY_POINTS, MAX_PLANTS
    from robustff.study.summary import study_frequency

    case = heater(0.5)
    n = MAX_PLANTS + 1500
    rng = np.random.default_rng(3)
    gains = rng.uniform(0.45, 0.75, n)
    result = SimpleNamespace(case=case, design=design_loop(case), names=["process.gain"],
                             parameters=gains[:, None], samples=n, derived={})
    frequency = study_frequency(result)
    assert study_frequency(result) is frequency  # computed once, shared by summary and files
    assert frequency.plants == MAX_PLANTS and frequency.omega.size == FREQUENCY_POINTS
    batch = nominal_batch(case, MAX_PLANTS)
    batch.set_parameter("process.gain", gains[:MAX_PLANTS])
    direct = frequency_study(case, result.design, batch)
    np.testing.assert_array_equal(frequency.bands["p90"], direct.bands["p90"])
