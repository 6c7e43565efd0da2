"""The summary's warnings (valve travel from transmitter noise) reach every report: the run
printout, percentiles.md and report.html."""

from __future__ import annotations

from pathlib import Path

import pytest

from robustff.cli import EXIT_OK, main

CASE = Path(__file__).resolve().parents[2] / "cases" / "wash-water-heater.toml"


def test_noise_warning_in_printout_markdown_and_html(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    out = tmp_path / "out"
    status = main(["run", str(CASE), "--samples", "200", "--jobs", "1", "--out", str(out),
                   "--report"])
    printed = capsys.readouterr().out
    assert status == EXIT_OK
    line = next(line for line in printed.splitlines() if line.startswith("warning: valve"))
    text = line.removeprefix("warning: ")
    assert "transmitter noise" in text and "input_filter" in text
    trial = next(line for line in printed.splitlines() if line.startswith("warning: tried on"))
    assert "median IAE" in trial and "degC*s" in trial  # the filter's cost, with units
    assert f"- warning: {text}" in (out / "percentiles.md").read_text()
    page = (out / "report.html").read_text()
    assert "<li>warning: valve travel with feedforward is" in page
    assert "input_filter" in page
