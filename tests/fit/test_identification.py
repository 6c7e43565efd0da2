"""Tests of model fitting from step-test data (robustff.fit.least_squares and helpers)."""

from __future__ import annotations

import subprocess
import sys

import numpy as np
import pytest

from robustff.errors import DataError
from robustff.fit.intervals import fit_autoregression
from robustff.fit.least_squares import fit_record, two_point_estimate, two_point_times
from robustff.fit.records import (
    check_settled,
    locate_step,
    read_record,
    record_from_arrays,
)
from robustff.fit.response import simulate_response
from robustff.fit.spread import combine_fits, propose_distribution
from robustff.output.fit_plot import terminal_fit_plot
from robustff.plant.models import TransferModel

H = 0.5


def _step_input(n: int, at: int = 10, before: float = 30.0, size: float = 4.0) -> np.ndarray:
    u = np.full(n, before)
    u[at:] += size
    return u


def _reference_lsim(model: TransferModel, u: np.ndarray, h: float, hold: str) -> np.ndarray:
    """Delay-free model by scipy.signal.lsim on a fine grid, input shifted by the dead time.

    Source: scipy.signal.lsim (linear interpolation of the input between its points); the fine
    grid makes the dead time a whole number of fine steps, so the shift is exact.
    """
    from scipy.signal import lsim

    fine = 40
    n = u.size
    t = np.arange(n) * h
    t_fine = np.arange((n - 1) * fine + 1) * (h / fine)
    if hold == "zoh":
        u_fine = u[np.minimum(np.floor(t_fine / h + 1e-9).astype(int), n - 1)]
        shifted_t = t_fine - model.dead_time
        index = np.floor(shifted_t / h + 1e-9).astype(int)
        delayed = np.where(shifted_t < -1e-12, 0.0, u[np.clip(index, 0, n - 1)])
    else:
        u_fine = np.interp(t_fine, t, u)
        delayed = np.interp(t_fine - model.dead_time, t, u, left=0.0)
    del u_fine
    if model.kind == "ipdt":
        system = ([model.gain], [1.0, 0.0])
    elif model.kind == "sopdt":
        system = ([model.gain], np.polymul([model.time_constant, 1], [model.time_constant_2, 1]))
    else:
        system = ([model.gain], [model.time_constant, 1.0])
    _, y, _ = lsim(system, delayed, t_fine)
    return y[::fine]


@pytest.mark.parametrize(
    "model",
    [
        TransferModel("fopdt", 1.7, 6.0, 0.0, 2.25),
        TransferModel("sopdt", -0.8, 5.0, 1.5, 1.125),
        TransferModel("ipdt", 0.05, 0.0, 0.0, 3.0),
    ],
)
@pytest.mark.parametrize("hold", ["zoh", "linear"])
def test_simulation_matches_lsim_with_shifted_input(model: TransferModel, hold: str) -> None:
    n = 80
    rng = np.random.default_rng(3)
    u = np.concatenate([np.zeros(5), rng.normal(0.0, 1.0, n - 5)])
    # a step-like input makes the fine-grid ZOH exact; the linear hold matches lsim's own
    # interpolation exactly
    ours = simulate_response(model, u, H, hold)
    ref = _reference_lsim(model, u, H, hold)
    scale = np.max(np.abs(ref))
    tol = 1e-9 if hold == "linear" else 0.02  # zoh: lsim interpolates across each jump (1/40 step)
    assert np.max(np.abs(ours - ref)) <= tol * scale


def test_simulation_matches_python_control_forced_response() -> None:
    # Source: python-control forced_response on the delay-free FOPDT, input delayed by a whole
    # number of samples (dead time = 4 h); python-control's forced_response assumes linear
    # interpolation between input points.
    import control

    model = TransferModel("fopdt", 2.0, 7.0, 0.0, 4 * H)
    t = np.arange(60) * H
    u = np.sin(t / 4.0) * (t > 1.0)
    delayed = np.concatenate([np.zeros(4), u[:-4]])
    ref = control.forced_response(control.tf([2.0], [7.0, 1.0]), t, delayed).outputs
    ours = simulate_response(model, u, H, "linear")
    assert np.max(np.abs(ours - ref)) < 1e-9


def test_step_response_is_exact_for_fractional_dead_time() -> None:
    # Analytic FOPDT step response: K (1 - exp(-(t - t_s - theta)/tau)) after t_s + theta.
    model = TransferModel("fopdt", 1.3, 4.0, 0.0, 1.37)
    n = 60
    u = np.zeros(n)
    u[8:] = 1.0
    t = np.arange(n) * H
    elapsed = np.clip(t - 8 * H - model.dead_time, 0.0, None)
    expected = 1.3 * (1.0 - np.exp(-elapsed / 4.0))
    assert np.max(np.abs(simulate_response(model, u, H) - expected)) < 1e-12


def test_two_point_formulas_on_an_exact_first_order_response() -> None:
    # Smith's two-point method: tau = 1.5 (t63 - t28), theta = t63 - tau (Source: Seborg, Edgar
    # and Mellichamp, Process Dynamics and Control, step-test identification; from memory).
    # For an exact FOPDT, t28 = theta + tau ln(1/(1 - 0.283)) ~ theta + tau/3 and
    # t63 = theta + tau (analytic), so the method returns tau and theta.
    tau, theta = 10.0, 3.0
    t28 = theta - tau * np.log(1 - 0.283)
    t63 = theta - tau * np.log(1 - 0.632)
    got_tau, got_theta = two_point_times(t28, t63)
    assert got_tau == pytest.approx(tau, rel=0.01)
    assert got_theta == pytest.approx(theta, abs=0.1)
    # hand arithmetic: t28 = 2, t63 = 8 -> tau = 9, theta = -1 clipped to 0
    assert two_point_times(2.0, 8.0) == (9.0, 0.0)
    assert two_point_times(7.0, 12.0, step_time=1.0) == (7.5, 3.5)


def test_two_point_estimate_on_a_sampled_step_record() -> None:
    true = TransferModel("fopdt", 2.0, 10.0, 0.0, 3.0)
    n = 200
    u = _step_input(n, at=10, size=5.0)
    y = 40.0 + simulate_response(true, u - 30.0, H)
    record = record_from_arrays(np.arange(n) * H, u, y)
    model = two_point_estimate(record, locate_step(record))
    assert model.gain == pytest.approx(2.0, rel=0.01)
    assert model.time_constant == pytest.approx(10.0, rel=0.03)
    assert model.dead_time == pytest.approx(3.0, abs=0.3)


def test_fractional_dead_time_recovered_within_two_percent_of_a_sample() -> None:
    true = TransferModel("fopdt", 1.6, 5.0, 0.0, 2.37)  # 4.74 samples
    n = 150
    u = _step_input(n)
    rng = np.random.default_rng(11)
    y = 20.0 + simulate_response(true, u - 30.0, H) + rng.normal(0.0, 1e-4, n)
    result = fit_record(record_from_arrays(np.arange(n) * H, u, y), ci_method="none")
    assert abs(result.model.dead_time - 2.37) <= 0.02 * H
    assert result.model.gain == pytest.approx(1.6, rel=1e-3)
    assert result.model.time_constant == pytest.approx(5.0, rel=1e-3)


def _noisy_records(count: int, n: int, noise: float, seed: int):
    true = TransferModel("fopdt", 1.5, 6.0, 0.0, 2.35)
    rng = np.random.default_rng(seed)
    u = _step_input(n)
    clean = 50.0 + simulate_response(true, u - 30.0, H)
    for _ in range(count):
        yield true, record_from_arrays(np.arange(n) * H, u, clean + rng.normal(0.0, noise, n))


@pytest.mark.parametrize(("ci_method", "resamples"), [("jacobian", 0), ("bootstrap", 60)])
def test_confidence_intervals_cover_the_true_parameters(ci_method: str, resamples: int) -> None:
    # 40 noisy datasets (fixed seed): each 95 % interval should hold the true value in about
    # 95 % of them; >= 85 % (34 of 40) is demanded (binomial: P(X <= 33 | p = 0.95) ~ 1 %).
    hits = {"gain": 0, "time_constant": 0, "dead_time": 0}
    count = 40
    for true, record in _noisy_records(count, 120, 0.08, seed=5):
        result = fit_record(record, ci_method=ci_method, resamples=resamples, seed=1)
        for name in hits:
            low, high = result.estimates[name].ci95
            hits[name] += low <= getattr(true, name) <= high
    assert all(hit >= 34 for hit in hits.values()), hits


def test_integrating_and_second_order_fits_recover_their_models() -> None:
    n = 160
    u = _step_input(n)
    t = np.arange(n) * H
    rng = np.random.default_rng(2)
    ipdt = TransferModel("ipdt", 0.04, 0.0, 0.0, 1.8)
    y = 10.0 + simulate_response(ipdt, u - 30.0, H) + rng.normal(0, 0.005, n)
    fit = fit_record(record_from_arrays(t, u, y), "ipdt", ci_method="jacobian")
    assert fit.model.gain == pytest.approx(0.04, rel=0.02)
    assert fit.model.dead_time == pytest.approx(1.8, abs=0.1)
    low, high = fit.estimates["gain"].ci95
    assert low < fit.model.gain < high
    sopdt = TransferModel("sopdt", 2.0, 8.0, 2.5, 1.2)
    y = 5.0 + simulate_response(sopdt, u - 30.0, H) + rng.normal(0, 0.001, n)
    fit = fit_record(record_from_arrays(t, u, y), "sopdt", ci_method="none")
    assert fit.model.gain == pytest.approx(2.0, rel=0.01)
    assert fit.model.time_constant == pytest.approx(8.0, rel=0.05)
    assert fit.model.time_constant_2 == pytest.approx(2.5, rel=0.1)
    assert fit.model.dead_time == pytest.approx(1.2, abs=0.15)


def test_pulse_test_is_fitted_and_two_point_refuses_it() -> None:
    n = 200
    u = np.full(n, 30.0)
    u[10:40] = 36.0
    true = TransferModel("fopdt", -0.9, 4.0, 0.0, 1.6)
    y = 70.0 + simulate_response(true, u - 30.0, H)
    record = record_from_arrays(np.arange(n) * H, u, y)
    fit = fit_record(record, ci_method="none")
    assert fit.model.gain == pytest.approx(-0.9, rel=1e-3)
    assert fit.model.dead_time == pytest.approx(1.6, abs=0.01)
    with pytest.raises(DataError, match="single step"):
        fit_record(record, method="two-point")


def test_autoregression_of_white_and_correlated_noise() -> None:
    rng = np.random.default_rng(4)
    white = rng.normal(size=2000)
    assert fit_autoregression(white)[0].size == 0
    e = rng.normal(size=2000)
    ar = np.zeros(2000)
    for k in range(1, 2000):
        ar[k] = 0.7 * ar[k - 1] + e[k]
    coef, _ = fit_autoregression(ar)
    assert coef.size >= 1 and coef[0] == pytest.approx(0.7, abs=0.08)


# ---- bad data -------------------------------------------------------------------------------


def _write(tmp_path, text: str, name: str = "test.csv"):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def _csv(u: np.ndarray, y: np.ndarray) -> str:
    rows = [f"{k * H:g},{a:g},{b:g}" for k, (a, b) in enumerate(zip(u, y, strict=True))]
    return "time,op,pv\n" + "\n".join(rows) + "\n"


def test_missing_column_is_named(tmp_path) -> None:
    path = _write(tmp_path, _csv(_step_input(40), np.zeros(40)))
    with pytest.raises(DataError, match=r"no column 'flow'; the columns are: time, op, pv"):
        read_record(path, "flow", "pv", time_column="time")


def test_non_numeric_value_names_line_and_column(tmp_path) -> None:
    text = _csv(_step_input(40), np.linspace(0, 1, 40)).replace("\n2,", "\n2,Bad Input#", 1)
    path = _write(tmp_path, text.replace("2,Bad Input#30", "2,Bad Input"))
    with pytest.raises(DataError, match=r"line 6: column 'op' has the non-numeric value 'Bad"):
        read_record(path, "op", "pv", time_column="time")


def test_missing_values_are_dropped_with_a_warning(tmp_path) -> None:
    n = 60
    u = _step_input(n)
    y = 1.0 + simulate_response(TransferModel("fopdt", 1.0, 2.0, 0, 1.0), u - 30, H)
    lines = _csv(u, y).splitlines()
    lines[20] = lines[20].rsplit(",", 1)[0] + ","
    lines[30] = lines[30].rsplit(",", 1)[0] + ",NaN"
    path = _write(tmp_path, "\n".join(lines) + "\n")
    record = read_record(path, "op", "pv", time_column="time")
    assert record.size == n  # the rows stay: a missing output does not drop the measured input
    assert np.isnan(record.output[[19, 29]]).all() and np.isfinite(record.input).all()
    assert any("2 missing output values (lines 21, 31)" in w for w in record.warnings)


def test_no_step_in_input(tmp_path) -> None:
    path = _write(tmp_path, _csv(np.full(50, 30.0), np.linspace(0, 1, 50)))
    record = read_record(path, "op", "pv", time_column="time")
    with pytest.raises(DataError, match="no step in the input column 'op'"):
        fit_record(record)


def test_too_short_record(tmp_path) -> None:
    path = _write(tmp_path, _csv(_step_input(12, at=5), np.arange(12.0)))
    with pytest.raises(DataError, match="too short"):
        read_record(path, "op", "pv", time_column="time")
    record = record_from_arrays(np.arange(30) * H, _step_input(30, at=25), np.arange(30.0))
    with pytest.raises(DataError, match="too short after the step"):
        fit_record(record)


def test_output_that_never_settles() -> None:
    n = 100
    u = _step_input(n)
    y = 3.0 + simulate_response(TransferModel("ipdt", 0.05, 0, 0, 1.0), u - 30, H)
    record = record_from_arrays(np.arange(n) * H, u, y)
    with pytest.raises(DataError, match="never settles"):
        check_settled(record, locate_step(record))
    with pytest.raises(DataError, match="never settles"):
        fit_record(record, "fopdt")
    assert fit_record(record, "ipdt", ci_method="none").model.gain == pytest.approx(0.05, rel=1e-3)


def test_times_must_increase() -> None:
    t = np.arange(30) * H
    t[12] = t[11]
    with pytest.raises(DataError, match="times must increase"):
        record_from_arrays(t, _step_input(30), np.zeros(30))


# ---- spread between files ---------------------------------------------------------------------


def test_distribution_choice_by_number_of_files() -> None:
    one = propose_distribution(np.array([5.0]), np.array([[4.0, 6.0]]), nonnegative=True)
    assert one.kind == "normal" and one.params[1] == pytest.approx(1.0 / 1.96, rel=1e-3)
    three = propose_distribution(np.array([5.0, 6.0, 7.0]),
                                 np.array([[4.5, 5.5], [5.5, 6.5], [6.0, 8.0]]), True)
    assert three.kind == "uniform" and three.params == (4.5, 8.0)
    values = np.array([2.0, 3.0, 4.0, 5.0, 6.0, 2.5])
    wide = propose_distribution(values, np.column_stack([values * 0.9, values * 1.1]), True)
    assert wide.kind == "lognormal" and wide.clip[0] >= 0.0
    values = np.array([-2.0, -2.1, -1.9, -2.05, -1.95])
    gains = propose_distribution(values, np.column_stack([values - 0.1, values + 0.1]), False)
    assert gains.kind == "normal" and gains.clip[1] < 0.0  # a gain keeps its sign


def test_combine_fits_over_three_tests() -> None:
    n = 160
    u = _step_input(n)
    results = []
    for gain, tau, theta in ((1.4, 5.0, 2.1), (1.6, 6.0, 2.4), (1.5, 5.5, 2.2)):
        y = simulate_response(TransferModel("fopdt", gain, tau, 0, theta), u - 30, H)
        y = y + np.random.default_rng(int(gain * 10)).normal(0, 0.01, n)
        results.append(fit_record(record_from_arrays(np.arange(n) * H, u, y),
                                  ci_method="jacobian"))
    proposals = combine_fits(results)
    low, high = proposals["gain"].params
    assert proposals["gain"].kind == "uniform" and low < 1.4 < 1.6 < high
    assert proposals["dead_time"].params[0] < 2.1 and proposals["dead_time"].params[1] > 2.4


# ---- plots and layering -----------------------------------------------------------------------


def test_terminal_fit_plot_has_the_requested_size() -> None:
    t = np.arange(50) * H
    data = 1 - np.exp(-t / 5)
    text = terminal_fit_plot(t, data, data * 0.98, 60, 15)
    lines = text.splitlines()
    assert len(lines) == 15 and max(len(line) for line in lines) <= 60
    assert "data" in text and "fit" in text and "\x1b[" not in text


def test_fitting_core_does_not_import_plotting_or_the_command_line() -> None:
    code = ("import sys, robustff.fit.least_squares, robustff.fit.spread, "
            "robustff.fit.intervals; "
            "bad = [m for m in ('matplotlib', 'plotext', 'textual', 'robustff.cli', 'control') "
            "if m in sys.modules]; print(bad); sys.exit(1 if bad else 0)")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert done.returncode == 0, done.stdout + done.stderr
