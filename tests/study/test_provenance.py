"""summary.json's reproducibility entry: the case file and its hash, the case as run (it reads
back to the case that ran), the command line, a time stamp with its zone; non-settling counts."""

from __future__ import annotations

import dataclasses
import datetime
import hashlib
import shutil
from pathlib import Path

import pytest
from case_texts import MINIMAL

from robustff.case import StudySpec, load_case, parse_case
from robustff.design.alternatives import with_design_set
from robustff.study import run_study
from robustff.study.provenance import not_settled, reproducibility

DEMO = Path(__file__).resolve().parents[2] / "cases" / "syrup-dilution.toml"


@pytest.fixture(scope="module")
def study(tmp_path_factory):
    path = tmp_path_factory.mktemp("case") / "dilution.toml"
    shutil.copy(DEMO, path)
    case = with_design_set(load_case(path), "standard")
    return path, run_study(case, samples=40, seed=5, jobs=1, margins=False)


def test_case_file_name_and_hash(study):
    path, result = study
    entry = reproducibility(result, ["robustff", "run", str(path)])
    assert entry["case_file"] == {"name": "dilution.toml", "path": str(path),
                                  "sha256": hashlib.sha256(path.read_bytes()).hexdigest(),
                                  "bytes": path.stat().st_size}
    assert entry["command_line"] == ["robustff", "run", str(path)]
    assert reproducibility(result)["command_line"] is None


def test_the_case_as_run_reads_back_to_the_case_that_ran(study):
    _, result = study
    text = reproducibility(result)["case_as_run"]
    again = parse_case(text)
    # The samples and seed of the run (not the file's), the --designs set merged in.
    expected = dataclasses.replace(result.case, study=StudySpec(40, 5, result.case.study.sampling))
    assert again == expected
    assert len(again.designs) == 6


def test_time_stamp_has_its_zone_and_the_tables_carry_units(study):
    _, result = study
    zone = datetime.timezone(datetime.timedelta(hours=5, minutes=30), "IST")
    entry = reproducibility(result, now=datetime.datetime(2026, 3, 1, 9, 15, tzinfo=zone))
    assert entry["created"] == "2026-03-01T09:15:00+05:30" and entry["timezone"] == "IST"
    assert entry["host"]
    words = {row["key"]: row["words"] for row in entry["uncertainty"]}
    assert words["process.gain"] == "uniform -0.15 .. -0.09 Brix per %"
    assert words["disturbance.time_constant"].endswith("clipped to 10 .. 30 s")
    units = {row["key"]: row["unit"] for row in entry["models"]}
    assert units["process.dead_time"] == "s" and units["disturbance.gain"] == "Brix per L/min"
    assert entry["correlations"] == [{"first": "process.dead_time",
                                      "second": "disturbance.dead_time",
                                      "rank_correlation": 0.7}]
    assert entry["window"]["scan_period"] == 0.25 and entry["sampling"]["seed"] == 5
    assert "at 200 s, size -4 L/min over 60 s" in entry["events"][1]["words"]


def _study_of(text: str):
    return run_study(parse_case(text), samples=12, seed=1, jobs=1, margins=False)


def test_not_settled_counts_responses_cut_off_by_the_window():
    # Step at 95 s in a 100 s window: a loop with a 2 s dead time and 10 s lag cannot settle
    # within 5 s, so every sample is cut off. A step at 5 s settles long before 100 s.
    late = _study_of(MINIMAL.replace("at = 5.0", "at = 95.0"))
    counts = not_settled(late)
    assert counts == {"fb": 12, "fbff": 12, "window_after_last_event": 5.0}
    early = not_settled(_study_of(MINIMAL))
    assert early["fb"] == 0 and early["window_after_last_event"] == 95.0


def test_valve_and_secondary_loop_are_listed_with_units():
    case_path = DEMO.with_name("steam-heater-sticky-valve.toml")
    result = run_study(load_case(case_path), samples=10, seed=1, jobs=1, margins=False)
    rows = {row["key"]: (row["value"], row["unit"])
            for row in reproducibility(result)["models"]}
    # The values of the case file's [valve] and [secondary] tables, with their units.
    assert rows["valve.characteristic"] == ("equal-percentage", "")
    assert rows["valve.stiction_s"] == (3.0, "%") and rows["valve.rate_limit"] == (10.0, "%/s")
    assert rows["secondary.gain"] == (8.0, "kg/h per % of secondary output")
    assert rows["secondary.time_constant"] == (2.0, "s")
    assert rows["secondary.scans_per_primary"] == (4.0, "-")
    assert rows["secondary.tuning"] == ("simc", "")
