"""The fit printout names the unit of the gain, the times and the RMSE."""

from __future__ import annotations

from pathlib import Path

from robustff.fit.least_squares import fit_record
from robustff.fit.records import read_record
from robustff.fit.result import describe_fit, fit_units

BUMP = Path(__file__).resolve().parents[2] / "cases" / "data" / "stock-heater-bump-1.csv"


def _fit(kind: str, time_unit: str | None):
    record = read_record(BUMP, "steam_valve_pct", "stock_temp_degC", time_column="time_min",
                         time_unit=time_unit)
    return fit_record(record, kind, ci_method="none")


def test_units_come_from_the_columns_and_the_time_unit() -> None:
    result = _fit("fopdt", "min")
    units = fit_units(result)
    assert units["gain"] == "stock_temp_degC units per steam_valve_pct unit"
    assert units["time_constant"] == units["dead_time"] == units["time"] == "min"
    assert units["output"] == "stock_temp_degC units"
    line = describe_fit(result)
    assert f"tau = {result.model.time_constant:.4g} min" in line
    assert f"dead time = {result.model.dead_time:.4g} min" in line


def test_integrating_gain_is_per_time_unit_and_unknown_time_is_said() -> None:
    result = _fit("ipdt", None)
    units = fit_units(result)
    assert units["time"] == "time units"
    assert "per time unit" in units["gain"] and "steam_valve_pct" in units["gain"]
