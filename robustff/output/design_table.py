"""The feedforward designs of a study side by side: one row per design, as text cells.

One home for the table the CLI prints and the report and studio show, built from the
``designs`` list of ``summary.json`` (every design simulated on the same plants, so the
differences between rows are not Monte Carlo noise).
"""

from __future__ import annotations

from robustff.study.summary_types import DesignSummary, Summary

__all__ = ["design_table_header", "design_table_rows", "design_table_text"]


def _interval(values: list | None, scale: float = 1.0, digits: str = ".3g") -> str:
    if not values or values[0] is None or values[1] is None:
        return "[n/a]"
    return f"[{scale * values[0]:{digits}}, {scale * values[1]:{digits}}]"


def _value(value: float | None, scale: float = 1.0, digits: str = ".3g") -> str:
    return "n/a" if value is None else f"{scale * value:{digits}}"


def design_table_header(summary: Summary) -> list[str]:
    """Column titles, with units (``IAE`` in the case's metric unit)."""
    unit = summary["units"]["iae"]
    return [
        "design", "structure", "gain factor [-]",
        "IAE ratio P50 [-]", "95 % interval", "IAE ratio P90 [-]",
        "P(worse than fb) [%]", "95 % interval",
        f"IAE gain vs case P50 [{unit}]", "95 % interval", "P(worse than case) [%]",
    ]


def _row(design: DesignSummary) -> list[str]:
    ratio, harm = design["ratio"]["iae"], design["ff_worse"]["iae"]
    versus = design["versus_case"]
    gain, worse = versus["iae_improvement"], versus["worse_than_case"]
    own = design["name"] == "case"
    return [
        design["name"], str(design["feedforward"]["structure"]),
        f"{float(design['feedforward']['gain_factor']):g}",
        _value(ratio.get("p50")), _interval(ratio.get("p50_ci95")), _value(ratio.get("p90")),
        _value(harm["probability"], 100.0, ".2f"), _interval(harm["ci95"], 100.0, ".2f"),
        "-" if own else _value(gain.get("p50")),
        "-" if own else _interval(gain.get("p50_ci95")),
        "-" if own else _value(worse["probability"], 100.0, ".1f"),
    ]


def design_table_rows(summary: Summary) -> list[list[str]]:
    """One row of text cells per design, the case's own first."""
    return [_row(design) for design in summary["designs"]]


def design_table_text(summary: Summary) -> str:
    """The table as aligned plain text (numbers right-aligned), with a one-line legend."""
    header, rows = design_table_header(summary), design_table_rows(summary)
    widths = [max(len(row[i]) for row in [header, *rows]) for i in range(len(header))]
    lines = [
        f"Feedforward designs on the same {summary['samples']} plants (paired, common random "
        "numbers); IAE ratio = fbff/fb per plant; IAE gain vs case = IAE(case) - IAE(design), "
        "positive when the design does better:"
    ]
    for row in [header, *rows]:
        lines.append("  ".join(
            cell.ljust(width) if i < 2 else cell.rjust(width)
            for i, (cell, width) in enumerate(zip(row, widths, strict=True))
        ))
    return "\n".join(lines)
