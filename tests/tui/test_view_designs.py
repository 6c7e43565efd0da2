"""The studio shows one line per feedforward design when the case has several."""

from __future__ import annotations

from pathlib import Path

from robustff.case import parse_case
from robustff.study import run_study
from robustff.study.summary import summarize_study
from robustff.tui.results_pane import risk_text
from robustff.tui.view import build_view

ROOT = Path(__file__).resolve().parents[2]


def test_each_design_gets_a_line_with_its_own_numbers():
    text = (ROOT / "cases" / "syrup-dilution.toml").read_text() + (
        '\n[[design]]\nname = "static"\nstructure = "static"\n'
        '\n[[design]]\nname = "gentle"\ngain_factor = 0.5\n')
    result = run_study(parse_case(text), samples=100, jobs=1, margins=False)
    summary = summarize_study(result)
    view = build_view(result, summary, quick=False)
    assert view.design_lines[0].startswith("Designs on the same plants")
    names = [line.split()[0] for line in view.design_lines[1:]]
    assert names == ["case", "static", "gentle"]
    for line, design in zip(view.design_lines[1:], summary["designs"], strict=True):
        assert f"{design['ratio']['iae']['p50']:.3g}" in line
        assert f"{100 * design['ff_worse']['iae']['probability']:.1f} %" in line
    assert "Designs on the same plants" in risk_text(view).plain


def test_a_single_design_adds_no_lines():
    text = (ROOT / "cases" / "syrup-dilution.toml").read_text()
    result = run_study(parse_case(text), samples=50, jobs=1, margins=False)
    assert build_view(result, summarize_study(result), quick=False).design_lines == ()
