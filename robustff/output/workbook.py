"""``report.xlsx``: the report's percentile tables as a workbook, one sheet per table.

Cells hold numbers (the same 4-significant-digit values as ``percentiles.csv``, so a pasted
table matches the file an auditor re-reads), units in the header or, where the unit changes from
row to row, in a ``unit`` column named in the header. Needs openpyxl (the ``report`` extra);
without it the workbook is skipped with a message saying how to install it.
"""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path

from robustff.output.design_table import design_table_header, design_table_rows
from robustff.output.report_tables import (
    TableData,
    design_paired_table,
    harm_table,
    margins_table,
    paired_table,
    percentile_interval_table,
)
from robustff.output.result_files import percentile_rows
from robustff.study.summary_types import Summary

__all__ = ["write_workbook", "workbook_tables", "NO_OPENPYXL", "openpyxl_available"]

NO_OPENPYXL = ("report.xlsx not written: openpyxl is not installed "
               "(pip install 'robustff[report]' or pip install openpyxl)")
_MAX_SHEET_NAME = 31  # Excel's limit


def openpyxl_available() -> bool:
    """True when openpyxl can be imported."""
    try:
        import openpyxl  # noqa: F401
    except ImportError:
        return False
    return True


def _number(cell: str) -> float | str:
    try:
        return float(cell)
    except ValueError:
        return cell  # "n/a" stays text


def workbook_tables(summary: Summary, percentiles: Sequence[float]) -> list[TableData]:
    """The sheets, in order: (name, header, rows)."""
    header = ["metric", "arm", "unit (of every value in the row)",
              *[f"P{p:g} [row unit]" for p in percentiles], "samples [count]"]
    rows: list[list[object]] = [
        [*row[:3], *[_number(cell) for cell in row[3:]], summary["samples"]]
        for row in percentile_rows(summary, percentiles)
    ]
    tables = [TableData("percentiles", header, rows),
              percentile_interval_table(summary, percentiles),
              paired_table(summary, percentiles, "ratio"),
              paired_table(summary, percentiles, "improvement"),
              harm_table(summary)]
    margins = margins_table(summary, percentiles)
    if margins is not None:
        tables.append(margins)
    # The designs table as the CLI prints it (intervals as "[low, high]" text cells).
    tables.append(TableData("designs", design_table_header(summary),
                            [[_number(cell) for cell in row]
                             for row in design_table_rows(summary)]))
    if len(summary["designs"]) > 1:
        tables.append(design_paired_table(summary, percentiles))
    return tables


def write_workbook(summary: Summary, percentiles: Sequence[float], path: Path) -> Path:
    """Write the workbook; raises ImportError without openpyxl (see :data:`NO_OPENPYXL`)."""
    from openpyxl import Workbook
    from openpyxl.styles import Font

    book = Workbook()
    book.remove(book.active)
    for table in workbook_tables(summary, percentiles):
        sheet = book.create_sheet(table.name[:_MAX_SHEET_NAME])
        sheet.append(list(table.header))
        for cell in sheet[1]:
            cell.font = Font(bold=True)
        for row in table.rows:
            sheet.append([None if value is None else value for value in row])
        for index, title in enumerate(table.header, start=1):
            letter = sheet.cell(row=1, column=index).column_letter
            sheet.column_dimensions[letter].width = max(10, min(40, len(str(title)) + 2))
        sheet.freeze_panes = "A2"
    book.save(path)
    return path
