"""The headline over a recorded trace names the spread and the time outside the band, with units."""

from __future__ import annotations

from pathlib import Path

from robustff.case import load_case
from robustff.output.record_headline import record_headline
from robustff.study import run_study
from robustff.study.summary import summarize_study
from robustff.study.summary_types import percentile_value

ROOT = Path(__file__).resolve().parents[2]
CASE = '''
title = "Fictional wash-water heater over a flow record"
time_unit = "s"
[signals.controlled]
name = "outlet temperature"
unit = "degC"
band = 0.2
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
[feedforward]
structure = "lead-lag-delay"
[simulation]
step = 2.0
[[event]]
kind = "disturbance-record"
file = "{file}"
time_column = "Zeitstempel"
value_column = "FI3107_m3h"
[uncertainty]
"process.gain" = {{ relative = 0.25 }}
'''


def test_headline_over_a_record(tmp_path: Path) -> None:
    record = ROOT / "cases" / "data" / "wash-water-flow-record.csv"
    path = tmp_path / "replay.toml"
    path.write_text(CASE.format(file=record.as_posix()), encoding="utf-8")
    case = load_case(path)
    summary = summarize_study(run_study(case, samples=40, jobs=1, margins=False))
    text = record_headline(summary, case)
    assert text is not None
    std = summary["metrics"]["cv_std"]
    outside = summary["metrics"]["outside_band"]
    assert f"from {percentile_value(std['fb'], 50):.3g} to " in text
    assert f"{percentile_value(std['fbff'], 50):.3g} degC" in text
    assert f"+-0.2 degC from {percentile_value(outside['fb'], 50):.3g} %" in text
    # feedforward narrows the spread on this plant: the sentence reports a reduction
    assert percentile_value(std["fbff"], 50) < percentile_value(std["fb"], 50)


def test_no_headline_without_a_record() -> None:
    case = load_case(ROOT / "cases" / "syrup-dilution.toml")
    summary = summarize_study(run_study(case, samples=20, jobs=1, margins=False))
    assert record_headline(summary, case) is None
