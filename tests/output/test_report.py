"""Tests of the result files (robustff.output.result_files.write_results and friends)."""

from __future__ import annotations

import csv
import json
import math
from pathlib import Path

import numpy as np
import pytest

from robustff import CAUTION
from robustff.case import load_case
from robustff.engine.metrics import METRIC_NAMES
from robustff.errors import RobustffError
from robustff.output.result_files import (
    RESULT_FILES,
    check_output_folder,
    json_safe,
    percentiles_markdown,
    write_results,
)
from robustff.study import run_study
from robustff.study.summary import summarize_study

DEMO = Path(__file__).resolve().parents[2] / "cases" / "syrup-dilution.toml"
PERCENTILES = (5.0, 50.0, 95.0)


@pytest.fixture(scope="module")
def study():
    case = load_case(DEMO)
    result = run_study(case, samples=200, seed=3, jobs=1)
    return result, summarize_study(result, PERCENTILES)


@pytest.fixture(scope="module")
def small_study():
    case = load_case(DEMO)
    result = run_study(case, samples=60, seed=4, jobs=1)
    return result, summarize_study(result, PERCENTILES)


def _data_rows(path: Path) -> list[dict[str, str]]:
    with path.open(newline="") as handle:
        return list(csv.DictReader(handle))


def test_writes_exactly_the_four_files_and_nothing_beside(tmp_path: Path, study) -> None:
    result, summary = study
    out = tmp_path / "runs" / "syrup"
    assert write_results(result, summary, out, PERCENTILES) == out
    assert sorted(p.name for p in out.iterdir()) == sorted(RESULT_FILES)
    assert [p.name for p in (tmp_path / "runs").iterdir()] == ["syrup"]  # no staging folder left


def test_summary_json_has_the_documented_keys(tmp_path: Path, study) -> None:
    result, summary = study
    out = write_results(result, summary, tmp_path / "out", PERCENTILES)
    data = json.loads((out / "summary.json").read_text())
    for key in ("case", "samples", "seed", "partial", "metrics", "ff_worse", "unstable", "design",
                "versions"):
        assert key in data, key
    assert data["case"] == "syrup-dilution" and data["samples"] == 200 and data["seed"] == 3
    assert data["partial"] is False
    assert set(data["metrics"]) == set(METRIC_NAMES)
    for name in METRIC_NAMES:
        for arm in ("fb", "fbff"):
            stats = data["metrics"][name][arm]
            for key in ("mean", "std", "p5", "p50", "p95"):
                assert key in stats, (name, arm, key)
    iae_fb = result.metrics["iae"][:, 0]
    assert data["metrics"]["iae"]["fb"]["mean"] == pytest.approx(float(np.mean(iae_fb)))
    assert data["metrics"]["iae"]["fb"]["p50"] == pytest.approx(float(np.percentile(iae_fb, 50)))
    for metric in ("iae", "peak_deviation"):
        harm = data["ff_worse"][metric]
        assert set(harm) >= {"probability", "ci95", "count"}
        assert len(harm["ci95"]) == 2 and harm["ci95"][0] <= harm["probability"] <= harm["ci95"][1]
        worse = result.metrics[metric][:, 1] > result.metrics[metric][:, 0]
        assert harm["count"] == int(worse.sum())
    assert data["unstable"] == {"fb": int(result.unstable[:, 0].sum()),
                                "fbff": int(result.unstable[:, 1].sum())}
    assert {"feedback", "feedforward"} <= set(data["design"])
    assert "numpy" in data["versions"] and "robustff" in data["versions"]


def test_samples_csv_columns_and_values(tmp_path: Path, study) -> None:
    result, summary = study
    out = write_results(result, summary, tmp_path / "out", PERCENTILES)
    rows = _data_rows(out / "samples.csv")
    assert len(rows) == 200
    header = list(rows[0])
    for key in (c.key for c in result.case.uncertainty):
        assert key in header  # e.g. "process.gain"
    assert "process.gain" in header
    for name in METRIC_NAMES:
        assert f"{name}_fb" in header and f"{name}_fbff" in header
    gains = np.array([float(r["process.gain"]) for r in rows])
    np.testing.assert_allclose(gains, result.parameters[:, result.names.index("process.gain")],
                               rtol=1e-9)
    iae = np.array([[float(r["iae_fb"]), float(r["iae_fbff"])] for r in rows])
    np.testing.assert_allclose(iae, result.metrics["iae"], rtol=1e-9)


def test_percentiles_csv_and_markdown(tmp_path: Path, study) -> None:
    result, summary = study
    out = write_results(result, summary, tmp_path / "out", PERCENTILES)
    rows = _data_rows(out / "percentiles.csv")
    assert len(rows) == 2 * len(METRIC_NAMES)
    assert list(rows[0]) == ["metric", "arm", "unit", "p5", "p50", "p95", "samples", "partial"]
    assert {(r["samples"], r["partial"]) for r in rows} == {("200", "false")}
    first = next(r for r in rows if r["metric"] == "iae" and r["arm"] == "fbff")
    expected = np.percentile(result.metrics["iae"][:, 1], 95)
    assert float(first["p95"]) == pytest.approx(expected, rel=1e-3)  # 4 significant digits
    markdown = (out / "percentiles.md").read_text()
    assert markdown.rstrip().endswith(CAUTION)
    assert "| iae | fbff |" in markdown
    assert "PARTIAL" not in markdown


def test_partial_summary_is_marked_in_markdown(small_study) -> None:
    _, summary = small_study
    marked = percentiles_markdown({**summary, "partial": True}, PERCENTILES)
    assert "PARTIAL" in marked and marked.rstrip().endswith(CAUTION)


def test_second_run_replaces_the_first_as_a_whole(tmp_path: Path, study, small_study) -> None:
    result, summary = study
    out = tmp_path / "out"
    write_results(result, summary, out, PERCENTILES,
                  extra=lambda folder: (folder / "report.html").write_text("<p>old</p>"))
    assert (out / "report.html").exists()
    small, small_summary = small_study
    write_results(small, small_summary, out, PERCENTILES)
    assert sorted(p.name for p in out.iterdir()) == sorted(RESULT_FILES)  # stale report gone
    assert len(_data_rows(out / "samples.csv")) == 60
    assert json.loads((out / "summary.json").read_text())["samples"] == 60
    assert [p.name for p in tmp_path.iterdir()] == ["out"]


def test_failed_write_keeps_the_previous_results(tmp_path: Path, study, small_study) -> None:
    result, summary = study
    out = tmp_path / "out"
    write_results(result, summary, out, PERCENTILES)
    before = {p.name: p.read_bytes() for p in out.iterdir()}

    def broken(folder: Path) -> None:
        raise OSError("disk full (simulated)")

    small, small_summary = small_study
    with pytest.raises(OSError, match="simulated"):
        write_results(small, small_summary, out, PERCENTILES, extra=broken)
    assert {p.name: p.read_bytes() for p in out.iterdir()} == before
    assert [p.name for p in tmp_path.iterdir()] == ["out"]


def test_folder_with_foreign_files_is_refused_untouched(tmp_path: Path, study) -> None:
    result, summary = study
    out = tmp_path / "out"
    out.mkdir()
    (out / "notes.txt").write_text("mine")
    with pytest.raises(RobustffError, match="notes.txt"):
        write_results(result, summary, out, PERCENTILES)
    assert [p.name for p in out.iterdir()] == ["notes.txt"]
    assert [p.name for p in tmp_path.iterdir()] == ["out"]
    target = tmp_path / "a-file"
    target.write_text("x")
    with pytest.raises(RobustffError, match="not a folder"):
        check_output_folder(target)
    check_output_folder(tmp_path / "does-not-exist")  # a new folder is fine


def test_json_safe_replaces_non_finite_values() -> None:
    value = {"a": math.nan, "b": [np.float64(np.inf), np.int64(3), np.bool_(True)], "c": 1.5}
    safe = json_safe(value)
    assert safe == {"a": None, "b": [None, 3, True], "c": 1.5}
    json.dumps(safe, allow_nan=False)
