"""A whole run of the three-disturbance demo: every output names each disturbance."""

from __future__ import annotations

import csv
import json
from pathlib import Path

import jsonschema

from robustff.cli import main
from robustff.cli.exit_codes import EXIT_OK

ROOT = Path(__file__).resolve().parents[2]


def test_the_three_disturbance_demo_reports_each_measured_disturbance(tmp_path, capsys):
    out = tmp_path / "out"
    assert main(["run", "cases/pasteuriser-tempering-tank.toml", "--samples", "120",
                 "--jobs", "1", "--out", str(out), "--report"]) == EXIT_OK
    printed = capsys.readouterr().out
    assert "Where it helps, feed_flow:" in printed
    assert "Where it helps, feed_temperature:" in printed
    assert "steam_pressure" not in printed.split("Where it helps")[1].split("\n")[0]
    summary = json.loads((out / "summary.json").read_text())
    schema = json.loads((ROOT / "docs" / "summary.schema.json").read_text())
    jsonschema.Draft202012Validator(schema).validate(summary)
    entries = summary["frequency_by_disturbance"]
    assert [entry["disturbance"] for entry in entries] == ["feed_flow", "feed_temperature"]
    assert entries[0] == summary["frequency"]
    assert entries[0]["record"] is not None and entries[1]["record"] is None  # the record's
    compensators = summary["design"]["compensators"]
    assert [c["disturbance"] for c in compensators] == ["feed_flow", "feed_temperature",
                                                        "steam_pressure"]
    assert compensators[2]["measured"] is False and compensators[2]["structure"] == "none"
    # -Kd/Kp per path (the ideal compensator's static gain): 0.9 / 0.45 and -0.6 / 0.45
    assert abs(compensators[0]["gain"] - 2.0) < 1e-12
    assert abs(compensators[1]["gain"] + 0.6 / 0.45) < 1e-12
    with (out / "frequency.csv").open() as handle:
        rows = list(csv.DictReader(handle))
    assert {row["disturbance"] for row in rows} == {"feed_flow", "feed_temperature"}
    page = (out / "report.html").read_text()
    for name in ("feed_flow: feedforward", "feed_temperature: feedforward",
                 "disturbance.steam_pressure.gain"):
        assert name in page
    header = (out / "samples.csv").read_text().splitlines()[0]
    assert "disturbance.steam_pressure.gain" in header
