"""Reading historian exports for ``robustff fit``: locales, encodings, gaps and hostile values.

The record is simulated here from a known FOPDT model (exact sampled response, see
robustff.fit.response) with seeded noise, so every check compares against the model the data
came from or against the fit of the complete record.
"""

from __future__ import annotations

from datetime import datetime, timedelta
from pathlib import Path

import numpy as np
import pytest

from robustff.case.table import read_columns
from robustff.errors import DataError
from robustff.fit.least_squares import fit_record
from robustff.fit.records import read_record
from robustff.fit.response import simulate_response
from robustff.plant.models import TransferModel

H = 0.1  # sample time, min
N = 300
STEP = 50  # first sample at the new input level (time 5.0 min)
TRUE = TransferModel("fopdt", 0.8, 3.0, 0.0, 1.25)


def _signals(seed: int = 3) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Times (min), input (%) and output (degC) of a +6 % step test with noise."""
    u = np.full(N, 35.0)
    u[STEP:] = 41.0
    y = 60.0 + simulate_response(TRUE, u - 35.0, H)
    y += np.random.default_rng(seed).normal(0.0, 0.02, N)
    return np.arange(N) * H, u, y


def _stamps(times: np.ndarray, fmt: str) -> list[str]:
    start = datetime(2024, 3, 14, 7, 58, 0)
    return [(start + timedelta(minutes=float(t))).strftime(fmt) for t in times]


def _write(path: Path, header: list[str], rows: list[list[str]], sep: str = ",",
           encoding: str = "utf-8") -> Path:
    lines = [sep.join(header)] + [sep.join(row) for row in rows]
    path.write_text("\n".join(lines) + "\n", encoding=encoding)
    return path


def _comma_file(path: Path, blank_output: slice | None = None,
                blank_input: slice | None = None) -> Path:
    t, u, y = _signals()
    us, ys = [f"{v:.3f}" for v in u], [f"{v:.4f}" for v in y]
    for k in range(N)[blank_output] if blank_output else ():
        ys[k] = ""
    for k in range(N)[blank_input] if blank_input else ():
        us[k] = ""
    rows = [[f"{a:.1f}", b, c] for a, b, c in zip(t, us, ys, strict=True)]
    return _write(path, ["time", "op", "pv"], rows)


def _fit(path: Path, **read: str) -> object:
    record = read_record(path, "op", "pv", time_column="time", **read)
    return fit_record(record, ci_method="jacobian")


# ---- locale formats ---------------------------------------------------------------------------


def test_semicolon_decimal_comma_and_day_first_stamps_fit_like_the_comma_file(tmp_path) -> None:
    t, u, y = _signals()
    iso = [[s, f"{a:.3f}", f"{b:.4f}"] for s, a, b in
           zip(_stamps(t, "%Y-%m-%dT%H:%M:%S"), u, y, strict=True)]
    european = [[s, f"{a:.3f}".replace(".", ","), f"{b:.4f}".replace(".", ",")] for s, a, b in
                zip(_stamps(t, "%d.%m.%Y %H:%M:%S"), u, y, strict=True)]
    plain = _fit(_write(tmp_path / "iso.csv", ["time", "op", "pv"], iso))
    local = _fit(_write(tmp_path / "de.csv", ["time", "op", "pv"], european, sep=";"))
    assert plain.record.time_unit == local.record.time_unit == "s"
    assert local.record.sample_time == pytest.approx(6.0)  # 0.1 min in seconds
    for name in ("gain", "time_constant", "dead_time"):
        assert local.estimates[name].value == pytest.approx(plain.estimates[name].value, rel=1e-9)
    # and both find the model the data came from (dead time 1.25 min = 75 s)
    assert local.estimates["dead_time"].value == pytest.approx(75.0, abs=3.0)


def test_forced_format_options_read_the_same_file(tmp_path) -> None:
    t, u, y = _signals()
    rows = [[s, f"{a:.3f}".replace(".", ","), f"{b:.4f}".replace(".", ",")] for s, a, b in
            zip(_stamps(t, "%d/%m/%Y %H:%M:%S"), u, y, strict=True)]
    path = _write(tmp_path / "tab.txt", ["time", "op", "pv"], rows, sep="\t")
    auto = read_columns(path, ["op", "pv"], time_column="time")
    forced = read_columns(path, ["op", "pv"], time_column="time", separator="\t", decimal=",",
                          time_format="%d/%m/%Y %H:%M:%S")
    for name in ("op", "pv", "time"):
        np.testing.assert_array_equal(auto.values[name], forced.values[name])
    np.testing.assert_allclose(forced.values["pv"], np.round(y, 4), atol=1e-12)
    np.testing.assert_allclose(forced.values["time"], t * 60.0, atol=1e-6)
    # a wrong forced format names the cell instead of guessing
    with pytest.raises(DataError, match=r"line 2: column 'time' has the unreadable timestamp"):
        read_columns(path, ["op"], time_column="time", time_format="%Y-%m-%d %H:%M")


def test_latin1_export_with_a_degree_sign_in_a_header(tmp_path) -> None:
    t, u, y = _signals()
    rows = [[f"{a:.1f}", f"{b:.3f}", f"{c:.4f}"] for a, b, c in zip(t, u, y, strict=True)]
    path = _write(tmp_path / "latin.csv", ["time", "op", "TIC-214 °C"], rows, sep=";",
                  encoding="cp1252")
    record = read_record(path, "op", "TIC-214 °C", time_column="time")
    np.testing.assert_allclose(record.output, np.round(y, 4), atol=1e-12)
    assert any("read as Windows-1252" in w for w in record.warnings)


def test_undecodable_bytes_are_one_clear_error(tmp_path) -> None:
    path = tmp_path / "bad.csv"
    # 0x81 and 0x8d are invalid UTF-8 starts and undefined in Windows-1252
    path.write_bytes(b"time,op,pv\n0,\x81\x8d,1\n")
    with pytest.raises(DataError, match=r"bad.csv: cannot decode the file \(byte 13") as info:
        read_record(path, "op", "pv", time_column="time")
    assert "\n" not in str(info.value)


# ---- gaps -------------------------------------------------------------------------------------


def test_output_gap_during_the_dead_time_keeps_the_step_and_the_dead_time(tmp_path) -> None:
    full = _fit(_comma_file(tmp_path / "full.csv"))
    gap = _fit(_comma_file(tmp_path / "gap.csv", blank_output=slice(STEP, STEP + 10)))
    assert gap.record.size == N and np.isfinite(gap.record.input).all()
    assert np.isnan(gap.record.output[STEP : STEP + 10]).all()
    low, high = full.estimates["dead_time"].ci95
    assert low <= gap.estimates["dead_time"].value <= high
    assert np.isfinite(gap.fitted).all() and np.isfinite(gap.rmse)


@pytest.mark.parametrize("ci", ["bootstrap", "jacobian"])
def test_output_gap_late_in_the_record_is_fitted(tmp_path, ci: str) -> None:
    path = _comma_file(tmp_path / "late.csv", blank_output=slice(200, 240))
    result = fit_record(read_record(path, "op", "pv", time_column="time"), ci_method=ci,
                        resamples=40)
    dead = result.estimates["dead_time"]
    assert dead.ci95[0] <= TRUE.dead_time <= dead.ci95[1]
    assert result.estimates["gain"].value == pytest.approx(TRUE.gain, rel=0.02)


def test_output_gap_hiding_the_response_is_refused(tmp_path) -> None:
    path = _comma_file(tmp_path / "hidden.csv", blank_output=slice(STEP - 2, STEP + 40))
    with pytest.raises(DataError, match="the gap hides the response"):
        _fit(path)


def test_missing_input_at_the_step_is_refused(tmp_path) -> None:
    path = _comma_file(tmp_path / "noinput.csv", blank_input=slice(STEP - 1, STEP + 2))
    with pytest.raises(DataError, match="is missing at the step"):
        _fit(path)


# ---- hostile values ---------------------------------------------------------------------------


@pytest.mark.parametrize(("cell", "message"), [
    ("1e300", "values as large as .* cannot be fitted"),
    ("inf", "infinite or missing values"),
    ("12,5,3", "cannot split the file into columns"),
    ("0x1F", "non-numeric value '0x1F'"),
])
def test_hostile_cells_give_a_data_error(tmp_path, cell: str, message: str) -> None:
    t, u, y = _signals()
    ys = [f"{v:.4f}" for v in y]
    if cell == "1e300":  # every output value huge: the fit overflows
        ys = [f"{v:.4f}e300" for v in y]
    else:
        ys[120] = cell
    rows = [[f"{a:.1f}", f"{b:.3f}", c] for a, b, c in zip(t, u, ys, strict=True)]
    path = _write(tmp_path / "hostile.csv", ["time", "op", "pv"], rows)
    with pytest.raises(DataError, match=message):
        _fit(path)
