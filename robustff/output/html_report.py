"""``report.html``: one self-contained page (images embedded, no network) for a change request."""

from __future__ import annotations

import base64
import html
from collections.abc import Sequence
from pathlib import Path
from typing import cast

import numpy as np

from robustff import CAUTION
from robustff.case.text import printable_title
from robustff.design.margins_result import GAIN_MARGIN_LIMIT, MS_LIMIT, PHASE_MARGIN_LIMIT
from robustff.output.plots import (
    band_figure,
    margins_figure,
    ratio_figure,
    save_figure,
    sensitivity_figure,
)
from robustff.output.result_files import percentile_rows, risk_sentence
from robustff.study import StudyResult
from robustff.study.summary import VERDICT_REASONS
from robustff.study.summary_types import MarginName, Summary, percentile_value

__all__ = ["write_report"]

_STYLE = """
body { font-family: sans-serif; max-width: 60rem; margin: 2rem auto; color: #111; }
table { border-collapse: collapse; margin: 1rem 0; font-size: 0.9rem; }
th, td { border: 1px solid #888; padding: 0.2rem 0.5rem; text-align: right; }
th:first-child, td:first-child, td:nth-child(2), td:nth-child(3) { text-align: left; }
.caution { border: 2px solid #000; padding: 0.8rem; font-weight: bold; }
img { max-width: 100%; }
"""


def _table(header: Sequence[str], rows: Sequence[Sequence[object]]) -> str:
    head = "".join(f"<th>{html.escape(str(h))}</th>" for h in header)
    body = "".join(
        "<tr>" + "".join(f"<td>{html.escape(str(cell))}</td>" for cell in row) + "</tr>"
        for row in rows
    )
    return f"<table><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>"


def _image(path: Path, alt: str) -> str:
    data = base64.b64encode(path.read_bytes()).decode("ascii")
    return f'<p><img src="data:image/png;base64,{data}" alt="{html.escape(alt)}"></p>'


def _margins_section(summary: Summary) -> str:
    margins = summary.get("margins")
    if not margins:
        return ""
    rows = []
    labels: tuple[tuple[MarginName, str], ...] = (
        ("gain_margin", "gain margin [-]"),
        ("phase_margin", "phase margin [deg]"),
        ("delay_margin", f"delay margin [{summary['time_unit']}]"),
        ("ms", "Ms [-]"),
    )
    for key, label in labels:
        stats = margins.get(key, {})
        rows.append([label, *[_fmt(percentile_value(stats, p)) for p in (5.0, 50.0, 95.0)]])
    # Every value of this section is a fraction or None (see FractionBelowLimits).
    limits = cast("dict[str, float | None]", margins.get("fraction_below_limits", {}))
    lines = "".join(
        f"<li>{html.escape(k.replace('_', ' '))}: {100 * v:.1f} % of samples</li>"
        for k, v in limits.items()
        if v is not None
    )
    differ = margins.get("verdicts_differ", 0)
    differ_line = (f"<li>samples the simulation judged otherwise: {differ} "
                   f"({html.escape(VERDICT_REASONS)})</li>" if differ else "")
    return (
        "<h2>Feedback stability margins</h2>"
        + f"<p>The loop as simulated: the controller samples the CV every "
        f"{margins.get('sample_time', 0.0):g} {html.escape(summary['time_unit'])} (the scan "
        "period) and holds its output in between.</p>"
        + _table(["margin", "P5", "P50", "P95"], rows)
        + f"<ul>{lines}<li>unstable feedback loops: {margins.get('unstable', 0)}</li>"
        f"{differ_line}</ul>"
        + f"<p>Limits Ms &gt; {MS_LIMIT:g}, GM &lt; {GAIN_MARGIN_LIMIT:g}, "
        f"PM &lt; {PHASE_MARGIN_LIMIT:g} deg are common practice, no source.</p>"
    )


def _fmt(value: float | None) -> str:
    return "n/a" if value is None else f"{float(value):.4g}"


def write_report(
    result: StudyResult,
    summary: Summary,
    folder: Path,
    percentiles: Sequence[float],
    margin_values: dict[str, np.ndarray] | None = None,
) -> Path:
    """Write the plots (PNG and SVG) and ``report.html`` into ``folder``; returns the HTML path."""
    figures = [
        ("plot-cv-band", band_figure(result), "controlled variable bands"),
        ("plot-iae-ratio", ratio_figure(result), "histogram of the IAE ratio"),
        ("plot-sensitivity", sensitivity_figure(summary), "sensitivity ranking"),
    ]
    margins = summary.get("margins")
    if margin_values is not None and margins:
        figures.append(
            (
                "plot-margins",
                margins_figure({**margins, "time_unit": summary["time_unit"]}, margin_values),
                "margins",
            )
        )
    images = []
    for stem, fig, alt in figures:
        png, _ = save_figure(fig, folder, stem)
        images.append((png, alt))
    header = ["metric", "arm", "unit", *[f"P{p:g}" for p in percentiles]]
    design_lines = result.design.summary_lines(result.case)
    parts = [
        f"<h1>{html.escape(printable_title(summary['title']))}</h1>",
        f'<p class="caution">{html.escape(CAUTION)}</p>',
        f"<p>{summary['samples']} of {summary['requested']} samples"
        + (" (PARTIAL: interrupted)" if summary["partial"] else "")
        + f", seed {summary['seed']}, sampling {html.escape(summary['sampling'])}. "
        "fb = feedback only; fbff = feedback + feedforward.</p>",
        "<h2>Risk</h2><ul>"
        + f"<li>{html.escape(risk_sentence(summary, 'iae'))}</li>"
        + f"<li>{html.escape(risk_sentence(summary, 'peak_deviation'))}</li>"
        + f"<li>Unstable samples: {summary['unstable']['fb']} feedback only, "
        + f"{summary['unstable']['fbff']} with feedforward</li>"
        + "".join(f"<li>warning: {html.escape(text)}</li>" for text in summary["warnings"])
        + "</ul>",
        "<h2>Design (from the nominal models)</h2><pre>"
        + html.escape("\n".join(design_lines))
        + "</pre>",
        "<h2>Percentiles</h2>" + _table(header, percentile_rows(summary, percentiles)),
        _margins_section(summary),
        "<h2>Figures</h2>" + "".join(_image(png, alt) for png, alt in images),
        f'<p class="caution">{html.escape(CAUTION)}</p>',
    ]
    page = (
        '<!DOCTYPE html><html lang="en"><head><meta charset="utf-8">'
        f"<title>{html.escape(printable_title(summary['title']))}</title><style>{_STYLE}</style></head><body>"
        + "\n".join(parts)
        + "</body></html>\n"
    )
    path = folder / "report.html"
    path.write_text(page, encoding="utf-8")
    return path
