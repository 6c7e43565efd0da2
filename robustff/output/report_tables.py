"""The report's statistics tables as plain data (numbers, None where not available).

One home for what the HTML report shows and ``report.xlsx`` holds: each table is a name, a
header with units, and rows of numbers or text. Every percentile comes with its distribution-
free 95 % interval (``low`` and ``high`` columns).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass

from robustff.stats import percentile_key
from robustff.study.summary import HARM_METRICS, PAIRED_METRICS
from robustff.study.summary_types import MarginName, Summary, percentile_value

__all__ = [
    "TableData",
    "estimate",
    "percentile_interval_table",
    "paired_table",
    "harm_table",
    "margins_table",
    "design_paired_table",
    "MARGIN_LABELS",
]

#: The four margins with their names as shown.
MARGIN_LABELS: tuple[tuple[MarginName, str], ...] = (
    ("gain_margin", "gain margin"),
    ("phase_margin", "phase margin"),
    ("delay_margin", "delay margin"),
    ("ms", "Ms (peak sensitivity)"),
)


@dataclass(frozen=True)
class TableData:
    """One table: ``name`` (sheet name), ``header`` (with units), ``rows``."""

    name: str
    header: list[str]
    rows: list[list[object]]


def _float(value: object) -> float | None:
    return None if value is None else float(value)  # type: ignore[arg-type]


def estimate(stats: Mapping[str, object], percentile: float) -> tuple[
        float | None, float | None, float | None]:
    """``(value, low, high)`` of one percentile: the value and its 95 % interval."""
    value = percentile_value(stats, percentile)
    interval = stats.get(f"{percentile_key(percentile)}_ci95")
    low = high = None
    if isinstance(interval, list | tuple) and len(interval) == 2:
        low, high = _float(interval[0]), _float(interval[1])
    return _float(value), low, high


def _interval_header(percentiles: Sequence[float], unit: str) -> list[str]:
    header: list[str] = []
    for p in percentiles:
        header += [f"P{p:g} {unit}", f"P{p:g} 95 % low {unit}", f"P{p:g} 95 % high {unit}"]
    return header


def _interval_cells(stats: Mapping[str, object], percentiles: Sequence[float]) -> list[object]:
    cells: list[object] = []
    for p in percentiles:
        cells += list(estimate(stats, p))
    return cells


def percentile_interval_table(summary: Summary, percentiles: Sequence[float]) -> TableData:
    """Every metric and arm: each percentile with its interval, in the row's unit."""
    rows = [
        [name, arm, summary["units"][name], stats["n"], stats["n_excluded"],
         *_interval_cells(stats, percentiles)]
        for name, arms in summary["metrics"].items()
        for arm, stats in (("fb", arms["fb"]), ("fbff", arms["fbff"]))
    ]
    header = ["metric", "arm", "unit (of every value in the row)", "samples used [count]",
              "samples excluded (unstable) [count]", *_interval_header(percentiles, "[row unit]")]
    return TableData("percentile intervals", header, rows)


def paired_table(summary: Summary, percentiles: Sequence[float], kind: str) -> TableData:
    """Per-sample ratio (``kind="ratio"``, fbff/fb, dimensionless) or improvement
    (``"improvement"``, fb - fbff, metric units) of the paired metrics, with intervals."""
    section = summary["ratio"] if kind == "ratio" else summary["improvement"]
    rows = []
    for name in PAIRED_METRICS:
        stats = section[name]
        unit = "-" if kind == "ratio" else summary["units"][name]
        rows.append([name, unit, stats["n"], *_interval_cells(stats, percentiles)])
    title = ("ratio fbff over fb" if kind == "ratio" else "improvement fb minus fbff")
    header = ["metric", "unit (of every value in the row)", "samples used [count]",
              *_interval_header(percentiles, "[row unit]")]
    return TableData(title, header, rows)


def harm_table(summary: Summary) -> TableData:
    """Probability that the case's feedforward makes each harm metric worse, Wilson interval."""
    rows: list[list[object]] = []
    for name in HARM_METRICS:
        harm = summary["ff_worse"][name]
        low, high = harm["ci95"]
        scale = (lambda v: None if v is None else 100.0 * v)  # noqa: E731
        rows.append([name, scale(harm["probability"]), scale(low), scale(high), harm["count"],
                     harm["n"], harm["method"]])
    header = ["metric", "P(feedforward worse) [%]", "95 % low [%]", "95 % high [%]",
              "worse [count]", "compared [count]", "interval method"]
    return TableData("probability of harm", header, rows)


def margins_table(summary: Summary, percentiles: Sequence[float]) -> TableData | None:
    """Nominal margins (as simulated, and with a continuous controller) and their spread over
    the margin samples at the requested percentiles; None when margins were not computed.

    A percentile is None (shown as ``inf``) when it is infinite or lies between a finite and an
    infinite margin (a sample without a phase crossover has an infinite gain margin).
    """
    margins = summary.get("margins")
    if not margins:
        return None
    units = margins["units"]
    nominal, continuous = margins["nominal"], margins["nominal_continuous"]
    rows: list[list[object]] = []
    for key, label in MARGIN_LABELS:
        stats = margins[key]
        rows.append([
            label, units[key], _float(nominal[key]),
            None if continuous is None else _float(continuous[key]),
            *_interval_cells(stats, percentiles),
            stats["min"], stats["max"], stats["n"], stats["infinite"],
        ])
    header = ["margin", "unit (of every value in the row)", "nominal, as simulated [row unit]",
              "nominal, continuous controller [row unit]",
              *_interval_header(percentiles, "[row unit]"),
              "min [row unit]", "max [row unit]", "samples [count]", "infinite [count]"]
    return TableData("margins", header, rows)


def design_paired_table(summary: Summary, percentiles: Sequence[float]) -> TableData:
    """Each other design against the case's own on the same plants: the per-sample IAE gain
    ``IAE(case) - IAE(design)`` (positive: the design does better) with intervals, and the
    probability that the design does worse than the case's, with its Wilson interval."""
    unit = summary["units"]["iae"]
    rows: list[list[object]] = []
    for design in summary["designs"][1:]:
        versus = design["versus_case"]
        worse = versus["worse_than_case"]
        low, high = worse["ci95"]
        rows.append([
            design["name"], *_interval_cells(versus["iae_improvement"], percentiles),
            None if worse["probability"] is None else 100.0 * worse["probability"],
            None if low is None else 100.0 * low, None if high is None else 100.0 * high,
        ])
    header = ["design", *_interval_header(percentiles, f"IAE gain vs case [{unit}]"),
              "P(worse than case) [%]", "95 % low [%]", "95 % high [%]"]
    return TableData("designs paired with case", header, rows)
