"""Result files of an interrupted run say so in every file, and the title never carries control
characters into a report."""

from __future__ import annotations

import csv
import dataclasses
from pathlib import Path

import pytest

from robustff.case import load_case
from robustff.case.text import control_characters, printable_title
from robustff.output.result_files import write_results
from robustff.study import run_study
from robustff.study.summary import summarize_study

DEMO = Path(__file__).resolve().parents[2] / "cases" / "syrup-dilution.toml"
PERCENTILES = (50.0, 90.0)


@pytest.fixture(scope="module")
def small():
    case = load_case(DEMO)
    case = dataclasses.replace(case, title="Syrup\x00 dilution\x1b[31m\nline two")
    result = run_study(case, samples=30, seed=5, jobs=1, margins=False)
    return result, summarize_study(result, PERCENTILES)


def _rows(path: Path) -> list[dict[str, str]]:
    with path.open(newline="") as handle:
        return list(csv.DictReader(handle))


@pytest.mark.parametrize("partial", [True, False])
def test_percentiles_csv_carries_the_partial_flag(tmp_path: Path, small, partial: bool) -> None:
    result, summary = small
    out = write_results(result, {**summary, "partial": partial}, tmp_path / "out", PERCENTILES)
    rows = _rows(out / "percentiles.csv")
    assert rows and {r["partial"] for r in rows} == {"true" if partial else "false"}
    assert {r["samples"] for r in rows} == {"30"}
    assert ("PARTIAL" in (out / "percentiles.md").read_text()) is partial


def test_control_characters_of_the_title_stay_out_of_percentiles_md(tmp_path: Path, small) -> None:
    result, summary = small
    out = write_results(result, summary, tmp_path / "out", PERCENTILES)
    markdown = (out / "percentiles.md").read_text()
    assert control_characters(markdown.replace("\n", "")) == []
    assert markdown.splitlines()[0] == "# Syrup dilution [31m line two"


def test_printable_title_and_control_characters() -> None:
    assert printable_title("a\x00b\tc\x7fd\x9be") == "a b c d e"
    assert control_characters("ok\x00\x1b") == ["U+0000", "U+001B"]
    assert control_characters("Wäsche 80 °C") == []
