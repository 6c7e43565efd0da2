"""The report lists the loop as installed: the valve, the secondary loop, the controller form,
and that the feedforward was designed on the loop linearised at the nominal point."""

from __future__ import annotations

import html
import re
from pathlib import Path

from robustff.case import load_case
from robustff.output.html_report import write_report_files
from robustff.study import run_study
from robustff.study.summary import summarize_study

CASES = Path(__file__).resolve().parents[2] / "cases"


def _text(page: str) -> str:
    body = re.sub(r"<style>.*?</style>", " ", page, flags=re.S)
    return " ".join(html.unescape(re.sub(r"<[^>]+>", " ", body)).split())


def _report(tmp_path: Path, name: str) -> str:
    result = run_study(load_case(CASES / name), samples=30, jobs=1, margins=False)
    files = write_report_files(result, summarize_study(result), tmp_path, (5, 50, 95),
                               pdf=False, workbook=False)
    return _text(files.html.read_text(encoding="utf-8"))


def test_the_report_lists_valve_secondary_loop_and_controller_form(tmp_path):
    page = _report(tmp_path, "steam-heater-sticky-valve.toml")
    section = page.split("Valve and secondary loop", 1)[1].split("Feedforward designs", 1)[0]
    assert ("valve: equal-percentage, rangeability 30; stiction S = 3 %, J = 1 % of travel"
            in section)
    assert "rate limit 10 %/s" in section
    assert "secondary loop" in section and "Kc = 0.625 %/(kg/h), Ti = 1.6 s" in section
    assert "scan 0.125 s" in section
    assert "feedforward designed on the loop linearised at the nominal point" in page
    assert "first moment Ti/(Kc K) = 0.32 s" in page
    assert "feedback.structure ideal" in page  # the controller form as written in the case


def test_an_ideal_actuator_is_said_in_words(tmp_path):
    page = _report(tmp_path, "wash-water-heater.toml")
    assert "No valve and no secondary loop" in page
