"""``samples-units.csv``: the engineering unit of every column of the per-sample table.

``samples.csv`` (or ``samples.npy``) holds bare numbers, one column per sampled parameter,
metric and arm; this small table beside it gives each column's unit, so the numbers can be read
without the case file: ``column,unit`` rows in the table's column order.
"""

from __future__ import annotations

import csv
import io

from robustff.engine.metrics import METRIC_NAMES
from robustff.output.samples_file import sample_columns
from robustff.study import StudyResult
from robustff.study.summary_types import Summary

__all__ = ["SAMPLES_UNITS_FILE", "INDEX_UNIT", "FLAG_UNIT", "column_unit", "samples_units_csv"]

SAMPLES_UNITS_FILE = "samples-units.csv"
#: Unit text of the ``sample`` column.
INDEX_UNIT = "index (0-based)"
#: Unit text of the ``unstable_*`` columns.
FLAG_UNIT = "flag (1 = unstable, 0 = stable)"


def column_unit(header: str, result: StudyResult, summary: Summary) -> str:
    """The unit of one column of the per-sample table.

    Parameters
    ----------
    header : str
        Column name, e.g. ``"process.gain"``, ``"iae_fbff"``, ``"iae_fbff.static"``.
    result : StudyResult
    summary : Summary
        Its ``units`` give the metrics' units (the same as in ``summary.json``).
    """
    if header == "sample":
        return INDEX_UNIT
    if header in result.names:
        return result.case.parameter_unit(header)
    if header.startswith("unstable_"):
        return FLAG_UNIT
    metric = header.split(".", 1)[0].rsplit("_", 1)[0]  # iae_fbff.static -> iae
    if metric in METRIC_NAMES:
        return summary["units"][metric]
    raise ValueError(f"no unit known for the samples column {header!r}")


def samples_units_csv(result: StudyResult, summary: Summary) -> str:
    """The text of ``samples-units.csv``: a ``column,unit`` header, then one row per column."""
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(["column", "unit"])
    for header, _ in sample_columns(result):
        writer.writerow([header, column_unit(header, result, summary)])
    return buffer.getvalue()
