"""``samples-units.csv`` gives the unit of every column of the per-sample table, and the margins
in ``summary.json`` carry their units."""

from __future__ import annotations

import csv
import json
from pathlib import Path

import pytest

from robustff.case import load_case
from robustff.output.result_files import RESULT_FILES, write_results
from robustff.output.samples_units import FLAG_UNIT, INDEX_UNIT, SAMPLES_UNITS_FILE
from robustff.study import run_study
from robustff.study.summary import summarize_study

CASES = Path(__file__).resolve().parents[2] / "cases"


@pytest.fixture(scope="module")
def written(tmp_path_factory: pytest.TempPathFactory):
    case = load_case(CASES / "surge-tank-level.toml")  # times in min
    result = run_study(case, samples=40, seed=2, jobs=1)
    summary = summarize_study(result, (50.0, 90.0))
    out = write_results(result, summary, tmp_path_factory.mktemp("r") / "out", (50.0, 90.0))
    return case, out


def _rows(path: Path) -> list[list[str]]:
    with path.open(newline="") as handle:
        return list(csv.reader(handle))


def test_every_samples_column_has_one_unit_row_in_order(written) -> None:
    case, out = written
    assert SAMPLES_UNITS_FILE in RESULT_FILES and (out / SAMPLES_UNITS_FILE).exists()
    header = _rows(out / "samples.csv")[0]
    units = _rows(out / SAMPLES_UNITS_FILE)
    assert units[0] == ["column", "unit"]
    assert [row[0] for row in units[1:]] == header
    unit_of = dict(units[1:])
    assert unit_of["sample"] == INDEX_UNIT and unit_of["unstable_fbff"] == FLAG_UNIT
    for parameter in case.uncertainty:
        assert unit_of[parameter.key] == case.parameter_unit(parameter.key)
    summary = json.loads((out / "summary.json").read_text())
    for name, unit in summary["units"].items():
        assert unit_of[f"{name}_fb"] == unit_of[f"{name}_fbff"] == unit
    assert unit_of["settling_time_fb"] == "min"  # the case's time unit, not seconds


def test_summary_margins_carry_their_units(written) -> None:
    case, out = written
    margins = json.loads((out / "summary.json").read_text())["margins"]
    assert margins["units"] == {"gain_margin": "-", "phase_margin": "deg",
                                "delay_margin": case.time_unit, "ms": "-"}
    assert case.time_unit == "min"
