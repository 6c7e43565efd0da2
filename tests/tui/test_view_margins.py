"""The studio's margin lines say which loop they describe and repeat the summary's counts."""

from __future__ import annotations

from pathlib import Path

from robustff.case import load_case
from robustff.output.result_files import json_safe
from robustff.study import run_study
from robustff.study.summary import summarize_study
from robustff.tui.view import margin_lines

ROOT = Path(__file__).resolve().parents[2]


def test_margin_lines_name_the_scan_period_and_the_counts():
    result = run_study(load_case(ROOT / "cases" / "wash-water-heater.toml"), samples=60, jobs=1)
    summary = json_safe(summarize_study(result))
    margins = summary["margins"]
    lines = margin_lines(summary)
    assert lines[0].startswith("Margins nominal (as simulated, 0.5 s scan): GM ")
    assert f"GM {margins['nominal']['gain_margin']:.3g}" in lines[0]
    assert any(f"unstable loops {margins['unstable']}" in line for line in lines)
    judged = [line for line in lines if "judged" in line]
    assert len(judged) == (1 if margins["verdicts_differ"] else 0)
