"""A recorded disturbance trace replayed through the loop, and the long-window metrics.

References: an independent simulation of the same sampled loop (first-order lags discretised by
scipy.signal.cont2discrete with a zero-order hold, dead times as whole-scan delay lines, the PI
law written out), fed by the record parsed here with the standard library; and the same record
written as a plain numeric file.
"""

from __future__ import annotations

import math
from datetime import datetime
from pathlib import Path

import numpy as np
import pytest

from robustff.case import parse_case
from robustff.design.tuning import design_loop
from robustff.engine import build_scenario, nominal_batch, simulate
from robustff.engine.metrics import trajectory_metrics

DATA = Path(__file__).resolve().parents[2] / "cases" / "data" / "wash-water-flow-record.csv"
AT = 50.0  # s, where the record starts in the window


def record_case(file: Path, time_column: str, value_column: str, *, extra_event: str = "",
                structure: str = "static", band: str = "band = 0.3") -> str:
    """The wash-water heater (fictional) replaying a record, output limits far away."""
    return f'''
title = "record replay"
time_unit = "s"
[signals.controlled]
name = "outlet temperature"
unit = "degC"
{band}
[process]
model = "fopdt"
gain = 0.6
time_constant = 45.0
dead_time = 8.0
[disturbance]
model = "fopdt"
gain = -1.8
time_constant = 30.0
dead_time = 3.0
[feedback]
output_low = -10000.0
output_high = 10000.0
output_bias = 0.0
[feedforward]
structure = "{structure}"
[simulation]
step = 1.0
[[event]]
kind = "disturbance-record"
at = {AT}
file = "{file.as_posix()}"
time_column = "{time_column}"
value_column = "{value_column}"
{extra_event}
'''


def parse_record_by_hand(path: Path) -> tuple[np.ndarray, np.ndarray]:
    """Seconds since the first row and values (NaN for blanks), read with the standard library."""
    times, values = [], []
    first = None
    for line in path.read_text(encoding="utf-8").splitlines():
        if line.startswith("#") or line.startswith("Zeitstempel"):
            continue
        stamp, value, _ = line.split(";")
        t = datetime.fromisoformat(stamp).timestamp()
        first = t if first is None else first
        times.append(t - first)
        values.append(float(value.replace(",", ".")) if value else math.nan)
    return np.array(times), np.array(values)


def run_nominal(text: str, samples: int = 1):
    case = parse_case(text)
    design = design_loop(case)
    scenario = build_scenario(case, design)
    batch = nominal_batch(case, samples)
    if samples > 1:
        batch.set_parameter("process.gain", np.linspace(0.45, 0.8, samples))
        batch.set_parameter("disturbance.time_constant", np.linspace(22.0, 40.0, samples))
    return case, design, scenario, simulate(batch, design, scenario, keep=np.arange(samples))


def test_the_demo_record_has_what_the_tests_rely_on() -> None:
    # A semicolon file with decimal commas, ISO 8601 timestamps, blank cells and missing rows.
    text = DATA.read_text(encoding="utf-8")
    assert ";" in text.splitlines()[2] and "," in text.splitlines()[2].split(";")[1]
    times, values = parse_record_by_hand(DATA)
    assert np.isnan(values).sum() >= 5
    assert np.max(np.diff(times)) > 3 * np.median(np.diff(times))


def test_semicolon_decimal_comma_timestamps_give_the_metrics_of_a_plain_numeric_file(
        tmp_path: Path) -> None:
    # The same trace written as plain numbers (seconds, decimal point, comma separated, the same
    # blank cells and missing rows) must give the same metrics on perturbed plants.
    times, values = parse_record_by_hand(DATA)
    plain = tmp_path / "plain.csv"
    rows = ["t,flow"] + [f"{t:.6f},{'' if math.isnan(v) else repr(float(v))}"
                         for t, v in zip(times, values, strict=True)]
    plain.write_text("\n".join(rows) + "\n", encoding="utf-8")
    *_, historian = run_nominal(record_case(DATA, "Zeitstempel", "FI3107_m3h"), samples=5)
    *_, numeric = run_nominal(record_case(plain, "t", "flow"), samples=5)
    for name, value in historian.metrics.items():
        np.testing.assert_allclose(numeric.metrics[name], value, rtol=1e-12, atol=1e-12,
                                   err_msg=name)
    assert np.all(historian.metrics["cv_std"] > 0)


def independent_sampled_loop(case, design, d: np.ndarray) -> np.ndarray:
    """CV (2, T) of both arms of the sampled loop, written out from the textbook pieces.

    Source: scipy.signal.cont2discrete (zero-order hold) for K / (tau s + 1); Astrom and
    Wittenmark, Computer-Controlled Systems, 3rd ed. 1997, ch. 2 (a dead time of m whole sample
    periods is a delay of m samples of the held input); PI in ideal form, integral updated after
    the output, e = r - y with r = 0; static feedforward Kff d added to the controller output.
    """
    from scipy.signal import cont2discrete, tf2ss

    h = case.simulation.step

    def zoh(model):
        a, b, c, _, _ = cont2discrete(tf2ss([model.gain], [model.time_constant, 1.0]), h,
                                      method="zoh")
        return a.item(), b.item(), c.item(), int(round(model.dead_time / h))

    ap, bp, cp, mp = zoh(case.process)
    ad, bd, cd, md = zoh(case.disturbance)
    fb, ff = design.feedback, design.feedforward
    n = d.size
    out = np.zeros((2, n))
    for arm in range(2):
        xp = xd = integral = 0.0
        u = np.zeros(n)
        for k in range(n):
            y = cp * xp + cd * xd
            out[arm, k] = y
            e = -y
            u[k] = fb.kc * e + integral + (ff.gain * d[k] if arm == 1 else 0.0)
            integral += fb.kc * h / fb.ti * e
            xp = ap * xp + bp * (u[k - mp] if k >= mp else 0.0)
            xd = ad * xd + bd * (d[k - md] if k >= md else 0.0)
    return out


def test_nominal_loop_driven_by_the_record_matches_an_independent_simulation() -> None:
    case, design, scenario, result = run_nominal(record_case(DATA, "Zeitstempel", "FI3107_m3h"))
    times, values = parse_record_by_hand(DATA)
    valid = ~np.isnan(values)
    bridged = np.interp(times, times[valid], values[valid])  # gaps interpolated linearly
    t = np.arange(case.simulation.n_steps) * case.simulation.step
    d = np.where(t >= AT, np.interp(t - AT, times, bridged - bridged[0]), 0.0)
    # the window was left out: it covers the record to its last row
    assert case.simulation.duration == pytest.approx(AT + times[-1] + case.simulation.step)
    reference = independent_sampled_loop(case, design, d)
    assert np.max(np.abs(reference)) > 0.5  # degC: the record moves the loop
    np.testing.assert_allclose(result.trajectories[0, :2], reference, rtol=0, atol=1e-9)
    # the standard deviation over the window, from the reference response
    for arm in range(2):
        assert result.metrics["cv_std"][0, arm] == pytest.approx(np.std(reference[arm]),
                                                                 rel=1e-9)
        outside = 100.0 * np.mean(np.abs(reference[arm]) > 0.3)
        assert result.metrics["outside_band"][0, arm] == pytest.approx(outside, abs=1e-9)
    assert result.metrics["cv_std"][0, 1] < result.metrics["cv_std"][0, 0]


def test_long_window_metrics_stream_like_their_definitions_with_saturation() -> None:
    # Source: the definitions in robustff.engine.metrics, evaluated with numpy on the stored
    # responses of perturbed plants with a lead-lag-delay feedforward and tight output limits.
    text = record_case(DATA, "Zeitstempel", "FI3107_m3h", structure="lead-lag-delay")
    text = text.replace("output_low = -10000.0", "output_low = -4.0").replace(
        "output_high = 10000.0", "output_high = 4.0")
    case, design, scenario, result = run_nominal(text, samples=4)
    band = case.signals.controlled.band
    for i in range(4):
        for arm in range(2):
            error = scenario.setpoint_profile - result.trajectories[i, arm]
            ref = trajectory_metrics(error, result.trajectories[i, 2 + arm], scenario.step,
                                     event_start=scenario.event_start,
                                     direction=scenario.direction,
                                     settling_band=scenario.settling_band, cv_band=band)
            for name in ("cv_std", "outside_band", "iae", "ise", "ie"):
                assert result.metrics[name][i, arm] == pytest.approx(ref[name], rel=1e-9,
                                                                     abs=1e-9), name
    assert np.all(result.metrics["outside_band"] > 0)
    assert np.all(result.metrics["outside_band"] < 100)


def test_outside_band_is_not_a_number_without_a_band() -> None:
    *_, result = run_nominal(record_case(DATA, "Zeitstempel", "FI3107_m3h", band=""))
    assert np.all(np.isnan(result.metrics["outside_band"]))
    assert np.all(np.isfinite(result.metrics["cv_std"]))
