"""The change-approval report: every input a reviewer needs appears in it, the case hash is the
file's, the margins follow --percentiles, the workbook equals percentiles.csv, and without a
Chromium the report says how to get the PDF. (Printing in a real Chromium: test_report_print.)
"""

from __future__ import annotations

import csv
import hashlib
import html
import json
import re
import shutil
import socket
import tomllib
from pathlib import Path

import pytest

import robustff
from robustff.cli import main
from robustff.output import pdf_print
from robustff.output.html_report import write_report_files
from robustff.output.workbook import NO_OPENPYXL

DEMO = Path(__file__).resolve().parents[2] / "cases" / "syrup-dilution.toml"


def _run(case: Path, out: Path, *extra: str) -> None:
    argv = ["run", str(case), "--samples", "400", "--jobs", "1", "--out", str(out), "--report",
            *extra]
    assert main(argv) == 0


@pytest.fixture(scope="module")
def report(tmp_path_factory):
    """A 400-sample study of a copy of the syrup demo, seven designs, percentiles 10/50/90."""
    folder = tmp_path_factory.mktemp("report")
    case = folder / "dilution-skid.toml"
    shutil.copy(DEMO, case)
    out = folder / "out"
    _run(case, out, "--designs", "standard", "--percentiles", "10,50,90", "--seed", "4242")
    page = (out / "report.html").read_text(encoding="utf-8")
    return case, out, page


def text_of(page: str) -> str:
    """The page as a reader sees it: tags gone, entities decoded, whitespace collapsed."""
    body = re.sub(r"<style>.*?</style>", " ", page, flags=re.S)
    body = re.sub(r"<br>", " ", body)
    return " ".join(html.unescape(re.sub(r"<[^>]+>", " ", body)).split())


def _g(value: float) -> str:
    return f"{value:.4g}"


def test_the_page_is_self_contained(report):
    _, _, page = report
    assert "<script" not in page and "<link" not in page
    assert "http://" not in page and "https://" not in page
    assert re.findall(r'src="(?!data:image/png;base64,)', page) == []


def test_every_input_a_reviewer_needs_appears(report, capsys):
    case_path, out, page = report
    text = text_of(page)
    raw = tomllib.loads(case_path.read_text())  # the file itself, read independently
    missing = []

    def need(what: str, shown: str) -> None:
        if shown not in text:
            missing.append(f"{what}: {shown!r}")

    need("case file name", case_path.name)
    need("case SHA-256", hashlib.sha256(case_path.read_bytes()).hexdigest())
    for block in ("process", "disturbance"):
        need(f"{block} model", raw[block]["model"])
        for key, value in raw[block].items():
            if key != "model":
                need(f"{block}.{key}", _g(value))
    for key, value in raw["feedback"].items():
        need(f"feedback.{key}", str(value) if isinstance(value, str) else _g(value))
    need("feedforward structure", raw["feedforward"]["structure"])
    for name in ("static", "static-0.8", "lead-lag", "lead-lag-0.8", "lead-lag-delay",
                 "lead-lag-delay-0.8"):
        need("design", name)
    for event in raw["event"]:
        need("event kind", event["kind"])
        need("event at", f"at {_g(event['at'])} s")
        need("event size", f"size {_g(event['size'])}")
    need("window", f"window (duration) {_g(raw['simulation']['duration'])} s")
    need("scan period", f"scan period (controller step) {_g(raw['simulation']['step'])} s")
    need("substeps", "internal steps per scan (substeps) 1")
    for key, spec in raw["uncertainty"].items():
        if key == "correlation":
            continue
        need("uncertain parameter", key)
        (kind, params), *_ = [(k, v) for k, v in spec.items() if k != "clip"]
        need(f"{key} distribution", "uniform" if kind == "relative" else kind)
        for number in params if isinstance(params, list) else [100 * params]:
            need(f"{key} parameter", _g(number))
    for correlation in raw["uncertainty"]["correlation"]:
        need("correlation", f"{correlation['first']} {correlation['second']} "
                            f"{_g(correlation['rank_correlation'])}")
    need("sampling plan", f"sampling plan {raw['study']['sampling']}")
    need("seed", "seed 4242")
    need("samples", "samples simulated 400")
    need("command line", f"robustff run {case_path} --samples 400 --jobs 1")
    need("robustff version", f"robustff version {robustff.__version__}")
    summary = json.loads((out / "summary.json").read_text())
    for name, version in summary["versions"].items():
        need(f"{name} version", f"{name} version {version}")
    need("matplotlib version", "matplotlib version")
    feedback = summary["design"]["feedback"]  # the ideal-form settings as designed
    need("ideal-form Kc", f"Kc (gain) {_g(feedback['kc'])}")
    need("ideal-form Ti", f"Ti (integral time) {_g(feedback['ti'])} s")
    for design in summary["designs"]:
        need(f"{design['name']} feedforward gain", _g(design["feedforward"]["gain"]))
    created = summary["reproducibility"]["created"]
    assert re.fullmatch(r"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d[+-]\d\d:\d\d", created), created
    need("date and time with zone", f"date and time {created}")
    need("host", f"host {socket.gethostname()}")
    need("caution", robustff.CAUTION)
    assert missing == []


def test_the_first_page_answers_the_question(report):
    _, out, page = report
    first = text_of(page.split("</section>", 1)[0])
    summary = json.loads((out / "summary.json").read_text())
    rec = summary["recommendation"]
    assert "Recommendation" in first
    assert ("Recommended: design " + rec["design"]) in first if rec["design"] else (
        "No feedforward design is recommended" in first)
    assert "common practice, not a standard" in first and robustff.CAUTION in first
    for verdict in rec["designs"]:  # harm with its Wilson interval for each design
        low, high = verdict["harm_ci95"]
        assert f"[{100 * low:.2f}, {100 * high:.2f}]" in first
    assert rec["drivers"] and all(d["name"] in first for d in rec["drivers"])


def test_margins_follow_the_percentiles_and_show_the_nominal(report):
    _, out, page = report
    section = page[page.index("<h2>Feedback stability margins</h2>"):]
    section = section[: section.index("</section>")]
    header = re.findall(r"<th>([^<]*)</th>", section)
    assert [h for h in header if h.startswith("P")] == [
        "P10 [row unit]", "P50 [row unit]", "P90 [row unit]"]
    margins = json.loads((out / "summary.json").read_text())["margins"]
    phase_row = re.search(r"<tr><td>phase margin</td>(.*?)</tr>", section).group(1)
    cells = re.findall(r"<td>(.*?)</td>", phase_row)
    assert cells[1] == _g(margins["nominal"]["phase_margin"])
    low, high = margins["phase_margin"]["p10_ci95"]
    assert cells[3] == (f'{_g(margins["phase_margin"]["p10"])}<br><span class="ci">'
                        f"[{_g(low)}, {_g(high)}]</span>")
    assert low <= margins["phase_margin"]["p10"] <= high
    assert "n/a" not in phase_row


def test_the_hash_is_the_files_and_follows_one_byte(tmp_path):
    case = tmp_path / "skid.toml"
    data = DEMO.read_bytes()
    case.write_bytes(data)
    seen = []
    for version in (data, data.replace(b"seed = 731", b"seed = 732")):  # one byte changed
        case.write_bytes(version)
        out = tmp_path / f"out{len(seen)}"
        assert main(["run", str(case), "--samples", "50", "--jobs", "1", "--out", str(out),
                     "--report"]) == 0
        page = (out / "report.html").read_text()
        digest = hashlib.sha256(version).hexdigest()
        assert digest in text_of(page) and f"case SHA-256 {digest}" in page  # every page header
        seen.append(digest)
    assert seen[0] != seen[1]


def test_workbook_numbers_equal_percentiles_csv(report):
    openpyxl = pytest.importorskip("openpyxl", reason="openpyxl not installed: pip install "
                                   "'robustff[report]' to write and check report.xlsx")
    _, out, _ = report
    book = openpyxl.load_workbook(out / "report.xlsx", read_only=True)
    assert {"percentiles", "percentile intervals", "margins", "designs"} <= set(book.sheetnames)
    sheet = list(book["percentiles"].iter_rows(values_only=True))
    with (out / "percentiles.csv").open(newline="") as handle:
        table = list(csv.reader(handle))
    assert sheet[0][:3] == ("metric", "arm", "unit (of every value in the row)")
    assert [h for h in sheet[0] if str(h).startswith("P")] == [
        "P10 [row unit]", "P50 [row unit]", "P90 [row unit]"]
    assert len(sheet) == len(table)
    for cells, row in zip(sheet[1:], table[1:], strict=True):
        assert list(cells[:3]) == row[:3]
        for cell, text in zip(cells[3:6], row[3:6], strict=True):
            assert (cell == text) if text == "n/a" else (cell == float(text)), (row, cells)
        assert cells[6] == int(row[6])  # samples


def test_without_chromium_the_report_says_how_to_get_the_pdf(tmp_path, monkeypatch, capsys):
    monkeypatch.setattr(pdf_print, "find_chromium", lambda: None)
    out = tmp_path / "out"
    assert main(["run", str(DEMO), "--samples", "50", "--jobs", "1", "--out", str(out),
                 "--report"]) == 0
    printed = capsys.readouterr().out
    assert not (out / "report.pdf").exists()
    assert "note: report.pdf not written: no headless Chromium found" in printed
    assert "apt-get install chromium" in printed and "print it to PDF" in printed


def test_without_openpyxl_the_workbook_is_skipped_with_a_reason(tmp_path, monkeypatch):
    from robustff.case import load_case
    from robustff.output import html_report
    from robustff.study import run_study
    from robustff.study.summary import summarize_study

    monkeypatch.setattr(html_report, "openpyxl_available", lambda: False)
    result = run_study(load_case(DEMO), samples=30, jobs=1, margins=False)
    files = write_report_files(result, summarize_study(result), tmp_path, (5, 50, 95),
                               pdf=False)
    assert files.workbook is None and NO_OPENPYXL in files.notes
    assert not (tmp_path / "report.xlsx").exists() and files.html.is_file()


def test_warnings_added_after_the_judgement_reach_the_first_page(tmp_path):
    from robustff.case import load_case
    from robustff.study import run_study
    from robustff.study.summary import summarize_study

    result = run_study(load_case(DEMO), samples=30, jobs=1, margins=False)
    summary = summarize_study(result)
    summary["warnings"].append("an input filter of 2 s would halve the valve travel")
    files = write_report_files(result, summary, tmp_path, (5, 50, 95), pdf=False,
                               workbook=False)
    first = text_of(files.html.read_text().split("</section>", 1)[0])
    assert "warning: an input filter of 2 s would halve the valve travel" in first


def test_a_failing_workbook_costs_only_the_workbook(tmp_path, monkeypatch):
    from robustff.case import load_case
    from robustff.output import html_report
    from robustff.study import run_study
    from robustff.study.summary import summarize_study

    def broken(*args, **kwargs):
        raise ValueError("cannot store a control character")

    monkeypatch.setattr(html_report, "openpyxl_available", lambda: True)
    monkeypatch.setattr(html_report, "write_workbook", broken)
    result = run_study(load_case(DEMO), samples=30, jobs=1, margins=False)
    files = write_report_files(result, summarize_study(result), tmp_path, (5, 50, 95),
                               pdf=False)
    assert files.workbook is None and files.html.is_file()
    assert files.notes == ["report.xlsx not written: ValueError: cannot store a control "
                           "character; the same numbers are in percentiles.csv and report.html"]
