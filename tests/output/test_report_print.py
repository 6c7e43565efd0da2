"""report.html printed in a real headless Chromium (the Debian ``chromium`` package): to PDF on
A4 and US Letter and to a PNG screenshot; the page count, every table within the page width, the
recommendation on the first page and the title and case hash on every page.

Skipped, saying why, when no Chromium is installed (``.ci/run`` tries to install it).
"""

from __future__ import annotations

import hashlib
import shutil
import subprocess
import tempfile
from pathlib import Path

import numpy as np
import pytest

from robustff.case import load_case
from robustff.design.alternatives import with_design_set
from robustff.output.html_report import write_report_files
from robustff.output.pdf_print import find_chromium, print_to_pdf
from robustff.study import run_study
from robustff.study.summary import summarize_study

pypdf = pytest.importorskip("pypdf", reason="pypdf not installed (it is in the test extra: "
                            "pip install '.[test]')")
CHROMIUM = find_chromium()
pytestmark = pytest.mark.skipif(
    CHROMIUM is None,
    reason="no headless Chromium on this machine (Debian: apt-get install chromium); the print "
    "checks of report.html cannot run",
)
DEMO = Path(__file__).resolve().parents[2] / "cases" / "syrup-dilution.toml"
MM = 72.0 / 25.4  # PDF points per millimetre
#: Paper sizes, points (ISO 216 A4 210 x 297 mm; US Letter 8.5 x 11 in).
PAPERS = {"A4": (210 * MM, 297 * MM), "Letter": (8.5 * 72, 11 * 72)}
#: The report's side margins, mm (robustff.output.html_report).
SIDE_MARGIN = 14.0


@pytest.fixture(scope="module")
def printed(tmp_path_factory):
    """The seven-design study of the syrup demo printed on both papers."""
    folder = tmp_path_factory.mktemp("print")
    case_path = folder / "skid.toml"
    shutil.copy(DEMO, case_path)
    case = with_design_set(load_case(case_path), "standard")
    result = run_study(case, samples=300, jobs=1, margins=True)
    summary = summarize_study(result, (5, 10, 50, 90, 95, 99), ["robustff", "run", "skid.toml"])
    margins = {name: getattr(result.margins, name)
               for name in ("gain_margin", "phase_margin", "delay_margin", "ms")}
    out = {}
    for paper in PAPERS:
        target = folder / paper
        target.mkdir()
        files = write_report_files(result, summary, target, (5, 10, 50, 90, 95, 99), margins,
                                   paper=paper, workbook=False)
        assert files.pdf is not None, files.notes
        out[paper] = files
    return hashlib.sha256(case_path.read_bytes()).hexdigest(), summary, out


#: Chromium draws CSS pixels at 72/96 pt each; content wider than the page is shrunk to fit
#: (a smaller scale) and what still does not fit is cut off.
CSS_PIXEL = 72.0 / 96.0


def text_runs(page) -> list[tuple[float, float, str]]:
    """(x in points from the page's left edge, horizontal scale, text) of every text run."""
    runs: list[tuple[float, float, str]] = []

    def visit(text, cm, tm, font, size):
        if text.strip():
            # Device x of the run's origin: the text matrix times the current matrix.
            x = tm[4] * cm[0] + tm[5] * cm[2] + cm[4]
            runs.append((x, cm[0], text))

    page.extract_text(visitor_text=visit)
    return runs


def overflowing(pdf: Path) -> list[tuple[int, float, float, str]]:
    """Text runs drawn shrunk (the page did not fit its width) or right of the printable
    width (side margin), per page."""
    reader = pypdf.PdfReader(str(pdf))
    found = []
    for number, page in enumerate(reader.pages, start=1):
        limit = float(page.mediabox.width) - SIDE_MARGIN * MM + 1.0
        found += [(number, x, scale, text) for x, scale, text in text_runs(page)
                  if x > limit or abs(scale - CSS_PIXEL) > 1e-3]
    return found


@pytest.mark.parametrize("paper", list(PAPERS))
def test_pdf_size_pages_header_and_first_page(printed, paper):
    digest, summary, files = printed
    reader = pypdf.PdfReader(str(files[paper].pdf))
    width, height = PAPERS[paper]
    box = reader.pages[0].mediabox
    assert float(box.width) == pytest.approx(width, abs=1.5)
    assert float(box.height) == pytest.approx(height, abs=1.5)
    # Seven sections, each from a new page: first page, designs, statistics, margins, figures,
    # case, reproducibility; the long ones take two or three pages.
    assert 7 <= len(reader.pages) <= 20
    pages = [page.extract_text() for page in reader.pages]
    title = summary["title"][:30]
    for number, text in enumerate(pages, start=1):
        assert title in text, f"page {number}: no title in the header"
        assert digest in text.replace("\n", ""), f"page {number}: no case SHA-256"
        assert f"page {number} of {len(pages)}" in text
    first = pages[0]
    rec = summary["recommendation"]
    assert "Recommendation" in first
    assert (f"Recommended: design {rec['design']}" if rec["design"]
            else "No feedforward design is recommended") in first
    assert "management-of-change" in first  # the caution
    assert "common practice, not a standard" in first


SECTIONS = ("Designs side by side", "Statistics", "Feedback stability margins", "Figures",
            "The case as run", "Reproducibility")


@pytest.mark.parametrize("paper", list(PAPERS))
def test_each_section_starts_a_page(printed, paper):
    _, _, files = printed
    reader = pypdf.PdfReader(str(files[paper].pdf))
    bodies = []
    for number, page in enumerate(reader.pages, start=1):
        text = page.extract_text()
        # Header line(s), then "page N of M", then the page's own text.
        bodies.append(text.split(f"page {number} of {len(reader.pages)}", 1)[1].strip())
    for heading in SECTIONS:
        starts = [n for n, body in enumerate(bodies, start=1) if body.startswith(heading)]
        assert len(starts) == 1, f"{heading!r} does not start exactly one page"
    assert bodies[0].startswith(files[paper].html.read_text().split("<h1>")[1][:20])


@pytest.mark.parametrize("paper", list(PAPERS))
def test_every_table_fits_the_page_width(printed, paper):
    _, _, files = printed
    assert overflowing(files[paper].pdf) == []


def test_the_width_check_catches_a_table_that_overflows(tmp_path):
    # The check above must be able to fail: a table wider than the paper, printed the same way.
    cells = "".join(f"<td>column{i}</td>" for i in range(12))
    page = ('<!DOCTYPE html><html><head><meta charset="utf-8"><style>@page { size: A4; margin: '
            f"16mm {SIDE_MARGIN}mm }} table {{ width: 400mm; }}</style></head><body>"
            f"<table><tr>{cells}</tr></table></body></html>")
    source = tmp_path / "wide.html"
    source.write_text(page)
    outcome = print_to_pdf(source, tmp_path / "wide.pdf")
    assert outcome.path is not None, outcome.message
    assert overflowing(outcome.path) != []


def test_png_screenshot_renders_the_page(printed):
    _, _, files = printed
    html_path = files["A4"].html
    shot = html_path.with_name("report.png")
    with tempfile.TemporaryDirectory() as profile:
        subprocess.run([CHROMIUM, "--headless", "--no-sandbox", "--disable-gpu",
                        f"--user-data-dir={profile}", f"--screenshot={shot}",
                        "--window-size=900,1400", html_path.resolve().as_uri()],
                       capture_output=True, timeout=120, check=True)
    import matplotlib.image

    image = matplotlib.image.imread(shot)
    assert image.shape[:2] == (1400, 900)
    grey = image[..., :3].mean(axis=2)
    assert 0.01 < float(np.mean(grey < 0.5)) < 0.5  # text and tables drawn, not a blank page
    # The page is laid out within its width: nothing drawn in the right-most 2 % strip.
    assert float(np.mean(grey[:, -18:] < 0.5)) < 0.001
