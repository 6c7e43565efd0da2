"""``report.html`` for a change-approval package, with ``report.pdf`` and ``report.xlsx``.

One self-contained HTML file (images embedded, no scripts, nothing fetched from a network),
laid out for print: A4 or US Letter through ``@page``, a page break before every section,
tables that wrap rather than overflow, and a header with the title and the case file's SHA-256
on every printed page. The first page answers the question (the recommendation, why in numbers,
the drivers, the conditions, the caution); then the designs side by side, the statistics with
their intervals, the margins, the case as run and what is needed to reproduce it.

:func:`write_report_files` is the one entry point for the CLI and the studio.
"""

from __future__ import annotations

import base64
import html
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from robustff import CAUTION
from robustff.case.text import printable_title
from robustff.errors import RobustffError
from robustff.output.pdf_print import print_to_pdf
from robustff.output.plots import (
    band_figure,
    designs_ratio_figure,
    frequency_figure,
    margins_figure,
    ratio_figure,
    save_figure,
    sensitivity_figure,
)
from robustff.output.report_sections import (
    case_section,
    designs_section,
    first_page,
    margins_section,
    reproducibility_section,
    statistics_section,
)
from robustff.output.workbook import NO_OPENPYXL, openpyxl_available, write_workbook
from robustff.study import StudyResult
from robustff.study.summary_types import Summary

__all__ = ["write_report", "write_report_files", "ReportFiles", "PAPER_SIZES", "report_html",
           "margin_values"]

#: Paper sizes of the print CSS: name -> (CSS size, width in mm).
PAPER_SIZES: dict[str, tuple[str, float]] = {"A4": ("A4", 210.0), "Letter": ("letter", 215.9)}
#: Page margins, mm: the content width is the same on both papers (A4 is the narrower).
_MARGIN_MM = 14.0
_CONTENT_MM = 210.0 - 2 * _MARGIN_MM

_STYLE = """
html { font-family: "DejaVu Sans", "Liberation Sans", Arial, sans-serif; color: #111; }
body { max-width: %(content)smm; margin: 1.5rem auto; font-size: 10pt; line-height: 1.3; }
h1 { font-size: 16pt; margin: 0 0 0.3rem; }
h2 { font-size: 13pt; margin: 0.6rem 0 0.3rem; border-bottom: 1px solid #444;
     break-after: avoid; }
h3 { font-size: 10.5pt; margin: 0.6rem 0 0.2rem; break-after: avoid; }
p, ul { margin: 0.25rem 0; }
ul { padding-left: 1.2rem; }
table { border-collapse: collapse; margin: 0.3rem 0; width: 100%%; table-layout: fixed;
        font-size: 7.6pt; }
th, td { border: 1px solid #777; padding: 1px 3px; text-align: right; vertical-align: top;
         overflow-wrap: anywhere; word-break: break-word; hyphens: auto; }
th { background: #e6e6e6; font-weight: bold; }
th:first-child, td:first-child { text-align: left; }
table.compact td, table.compact th { text-align: left; }
tr { break-inside: avoid; }
thead { display: table-header-group; }
.ci { color: #333; font-size: 6.8pt; }
.sub { font-size: 9pt; overflow-wrap: anywhere; }
.verdict { border: 2.5px solid #000; padding: 0.3rem 0.6rem; margin: 0.4rem 0;
           break-inside: avoid; }
.verdict h2 { border: none; margin: 0; }
.answer { font-size: 13pt; font-weight: bold; }
.caution { border: 2px solid #000; padding: 0.4rem; font-weight: bold; break-inside: avoid; }
.note { font-size: 8pt; color: #222; }
code { font-size: 8pt; overflow-wrap: anywhere; }
pre { white-space: pre-wrap; overflow-wrap: anywhere; font-size: 7.5pt; background: #f4f4f4;
      padding: 0.3rem; border: 1px solid #bbb; }
figure { margin: 0.3rem 0; break-inside: avoid; }
figure img { width: 100%%; height: auto; }
figcaption { font-size: 8pt; }
.first p, .first li { font-size: 9pt; }
.first .answer { font-size: 12.5pt; }
.first h3 { margin-top: 0.4rem; }
@page {
  size: %(paper)s;
  margin: 16mm %(margin)smm 14mm %(margin)smm;
  @top-left { content: "%(title)s"; font-size: 7.5pt; font-family: sans-serif; }
  @top-right { content: "case SHA-256 %(hash)s"; font-size: 6.5pt; font-family: monospace; }
  @bottom-right { content: "page " counter(page) " of " counter(pages); font-size: 7.5pt; }
}
@media print {
  body { max-width: none; margin: 0; }
  section { break-before: page; }
  section.first { break-before: auto; }
}
"""


def _css_string(text: str, limit: int = 90) -> str:
    """Text for a CSS string: quotes and backslashes escaped, no '<' (the style element)."""
    text = " ".join(text.split())
    if len(text) > limit:
        text = text[: limit - 3] + "..."
    out = []
    for char in text:
        if char in '"\\<>' or ord(char) < 32:
            out.append(f"\\{ord(char):x} ")
        else:
            out.append(char)
    return "".join(out)


def _image(path: Path, caption: str) -> str:
    data = base64.b64encode(path.read_bytes()).decode("ascii")
    return (f'<figure><img src="data:image/png;base64,{data}" alt="{html.escape(caption)}">'
            f"<figcaption>{html.escape(caption)}</figcaption></figure>")


@dataclass
class ReportFiles:
    """What the report writer produced: the files and one line each for what was not."""

    html: Path
    pdf: Path | None = None
    workbook: Path | None = None
    figures: list[Path] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)


def _frequency_words(summary: Summary) -> str:
    """Where feedforward helps, for the one measured disturbance or for each of several."""
    entries = summary["frequency_by_disturbance"]
    if len(entries) <= 1:
        return summary["frequency"]["words"]
    return "; ".join(f"{entry['disturbance']}: {entry['words']}" for entry in entries)


def _figures(result: StudyResult, summary: Summary, folder: Path,
             margin_values: dict[str, np.ndarray] | None) -> dict[str, tuple[Path, str]]:
    figures = [
        ("plot-cv-band", band_figure(result),
         "Controlled variable across the sampled plants: P5-P95 band and median, both arms"),
        ("plot-iae-ratio", ratio_figure(result),
         "Histogram of the IAE ratio with the case's design (right of 1: feedforward worse)"),
        ("plot-designs", designs_ratio_figure(result), "IAE ratio per feedforward design"),
        ("plot-sensitivity", sensitivity_figure(summary),
         "Spearman rank correlation of each uncertain parameter with the IAE ratio"),
        ("plot-frequency", frequency_figure(result),
         "Error ratio with over without feedforward per disturbance frequency (frequency.csv): "
         + _frequency_words(summary)),
    ]
    margins = summary.get("margins")
    if margin_values is not None and margins:
        figures.append(("plot-margins",
                        margins_figure({**margins, "time_unit": summary["time_unit"]},
                                       margin_values),
                        "Feedback stability margins across the margin samples"))
    out = {}
    for stem, fig, caption in figures:
        png, _ = save_figure(fig, folder, stem)
        out[stem] = (png, caption)
    return out


def report_html(result: StudyResult, summary: Summary, percentiles: Sequence[float],
                images: dict[str, tuple[Path, str]], paper: str = "A4") -> str:
    """The page as text (see the module docstring)."""
    if paper not in PAPER_SIZES:
        raise RobustffError(f"paper size must be one of {', '.join(PAPER_SIZES)}, got {paper!r}")
    title = printable_title(summary["title"])
    case_file = summary["reproducibility"]["case_file"]
    sha = "none (case not read from a file)" if case_file is None else str(case_file["sha256"])
    style = _STYLE % {"content": f"{_CONTENT_MM:g}", "paper": PAPER_SIZES[paper][0],
                      "margin": f"{_MARGIN_MM:g}", "title": _css_string(title),
                      "hash": _css_string(sha, 80)}

    def figure(stem: str) -> str:
        return _image(*images[stem]) if stem in images else ""

    others = "".join(figure(stem) for stem in
                     ("plot-cv-band", "plot-iae-ratio", "plot-sensitivity", "plot-margins",
                      "plot-frequency"))
    parts = [
        first_page(summary),
        designs_section(summary, percentiles, figure("plot-designs")),
        statistics_section(summary, percentiles),
        margins_section(summary, percentiles),
        f"<section><h2>Figures</h2>{others}</section>",
        case_section(result, summary),
        reproducibility_section(summary),
        f'<p class="caution">{html.escape(CAUTION)}</p>',
    ]
    return (
        '<!DOCTYPE html><html lang="en"><head><meta charset="utf-8">'
        f"<title>{html.escape(title)}</title><style>{style}</style></head><body>"
        + "\n".join(parts) + "</body></html>\n"
    )


def margin_values(result: StudyResult) -> dict[str, np.ndarray] | None:
    """The per-sample margins of a study for the margins figure (None without margins)."""
    if result.margins is None:
        return None
    m = result.margins
    return {"gain_margin": m.gain_margin, "phase_margin": m.phase_margin,
            "delay_margin": m.delay_margin, "ms": m.ms}


def write_report_files(
    result: StudyResult,
    summary: Summary,
    folder: Path,
    percentiles: Sequence[float],
    margin_values: dict[str, np.ndarray] | None = None,
    *,
    paper: str = "A4",
    pdf: bool = True,
    workbook: bool = True,
) -> ReportFiles:
    """Write the plots (PNG and SVG), ``report.html`` and, where possible, ``report.pdf`` and
    ``report.xlsx`` into ``folder``.

    Parameters
    ----------
    result : StudyResult
    summary : Summary
        From :func:`robustff.study.summary.summarize_study` (with ``reproducibility`` and
        ``recommendation``).
    folder : Path
        An existing folder (the CLI passes the staging folder of the result files).
    percentiles : sequence of float
        In percent; the tables show these.
    margin_values : dict of str to ndarray, optional
        Per-sample margins for the margins figure.
    paper : {"A4", "Letter"}
    pdf, workbook : bool
        Also try ``report.pdf`` (headless Chromium) and ``report.xlsx`` (openpyxl).

    Returns
    -------
    ReportFiles
        ``notes`` has one sentence for each file not written, saying how to get it.
    """
    images = _figures(result, summary, folder, margin_values)
    page = report_html(result, summary, percentiles, images, paper)
    path = folder / "report.html"
    path.write_text(page, encoding="utf-8")
    files = ReportFiles(path, figures=[png for png, _ in images.values()])
    if workbook:
        if not openpyxl_available():
            files.notes.append(NO_OPENPYXL)
        else:
            try:
                files.workbook = write_workbook(summary, percentiles, folder / "report.xlsx")
            except Exception as exc:  # noqa: BLE001 - an optional file must not cost the run
                (folder / "report.xlsx").unlink(missing_ok=True)
                files.notes.append(f"report.xlsx not written: {type(exc).__name__}: {exc}; "
                                   "the same numbers are in percentiles.csv and report.html")
    if pdf:
        outcome = print_to_pdf(path, folder / "report.pdf")
        files.pdf = outcome.path
        if outcome.path is None:
            files.notes.append(outcome.message)
    return files


def write_report(
    result: StudyResult,
    summary: Summary,
    folder: Path,
    percentiles: Sequence[float],
    margin_values: dict[str, np.ndarray] | None = None,
) -> Path:
    """Write the report files (see :func:`write_report_files`); returns the HTML path."""
    return write_report_files(result, summary, folder, percentiles, margin_values).html
