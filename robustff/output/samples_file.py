"""The per-sample table of a study: ``samples.csv`` (text) or ``samples.npy`` (binary).

The table is a list of ``(header, column)`` pairs, one value per simulated sample in each column,
so a new kind of column (another design's metrics, say) is one more pair. The writers stream the
table to an atomic file in blocks of rows: memory beyond the columns themselves is one block,
whatever the number of samples. :class:`SamplesCsvStream` writes ``samples.csv`` while the
study runs, a chunk of rows at a time as the chunks finish (the same bytes as
:func:`write_samples_csv` on the finished study).

``samples.npy`` holds one NumPy structured array with a named field per column (``sample`` as
int64, flags as bool, the rest float64), for ``pandas.DataFrame(numpy.load("samples.npy"))``.
"""

from __future__ import annotations

import os
from collections.abc import Sequence
from pathlib import Path
from typing import IO

import numpy as np

from robustff.atomic import open_atomic
from robustff.engine.metrics import METRIC_NAMES
from robustff.errors import RobustffError
from robustff.output.csv_numbers import format_csv_rows
from robustff.study import SampleRows, StudyResult
from robustff.study.result_columns import metric_column

__all__ = [
    "SAMPLES_FORMATS",
    "ROWS_PER_BLOCK",
    "Column",
    "sample_columns",
    "row_columns",
    "SamplesCsvStream",
    "samples_file_name",
    "write_samples",
    "write_samples_csv",
    "write_samples_npy",
]

#: File formats of the per-sample table: ``csv`` (the default) or ``npy``.
SAMPLES_FORMATS: tuple[str, ...] = ("csv", "npy")
#: Rows formatted and written at a time.
ROWS_PER_BLOCK = 20_000
#: A column of the table: its header and one value per sample (an array, or a column that reads
#: its rows from a file when sliced).
Column = tuple[str, np.ndarray]


def sample_columns(result: StudyResult) -> list[Column]:
    """The columns of the per-sample table, in file order (see :func:`row_columns`)."""
    return row_columns(result.rows())


def row_columns(rows: SampleRows) -> list[Column]:
    """The columns of the per-sample table for some consecutive samples, in file order.

    ``sample`` (0-based index), the sampled parameters (case units), every metric for both arms
    (``<metric>_fb``, ``<metric>_fbff``, in the metric's unit, see ``summary.json`` ``units``)
    and the unstable flags (``unstable_fb``, ``unstable_fbff``); then, for each of the case's
    other feedforward designs, ``<metric>_fbff.<design>`` and ``unstable_fbff.<design>`` (the
    same plants and noise, so a row compares the designs on one plant).
    """
    index = np.arange(rows.start, rows.start + rows.count, dtype=np.int64)
    columns: list[Column] = [("sample", index)]
    columns += [(name, rows.parameters[:, j]) for j, name in enumerate(rows.names)]
    # Columns of a large study's spilled metrics read their rows block by block as written.
    for name in METRIC_NAMES:
        columns += [(f"{name}_fb", metric_column(rows.metrics, name, 0)),
                    (f"{name}_fbff", metric_column(rows.metrics, name, 1))]
    columns += [("unstable_fb", rows.unstable[:, 0]), ("unstable_fbff", rows.unstable[:, 1])]
    for arm_name, metrics, unstable in rows.arms:
        columns += [(f"{name}_fbff.{arm_name}", metric_column(metrics, name, None))
                    for name in METRIC_NAMES]
        columns.append((f"unstable_fbff.{arm_name}", unstable))
    return columns


def samples_file_name(samples_format: str) -> str:
    """``samples.csv`` or ``samples.npy``; RobustffError for another format."""
    if samples_format not in SAMPLES_FORMATS:
        raise RobustffError(
            f"samples format {samples_format!r} is unknown (use one of "
            f"{', '.join(SAMPLES_FORMATS)})"
        )
    return f"samples.{samples_format}"


def write_samples(folder: Path, columns: Sequence[Column], samples_format: str = "csv") -> Path:
    """Write the table into ``folder`` as ``samples.csv`` or ``samples.npy``; returns the path."""
    path = Path(folder) / samples_file_name(samples_format)
    if samples_format == "npy":
        write_samples_npy(path, columns)
    else:
        write_samples_csv(path, columns)
    return path


def _rows(columns: Sequence[Column]) -> int:
    lengths = {np.shape(values)[0] for _, values in columns}
    if len(lengths) > 1:
        raise ValueError(f"columns of different lengths: {sorted(lengths)}")
    return lengths.pop() if lengths else 0


def write_samples_csv(
    path: Path, columns: Sequence[Column], rows_per_block: int = ROWS_PER_BLOCK
) -> None:
    """Comma-separated text: a header line, then one row per sample.

    Every value is written with ``%.10g`` (integers and flags as ``0``/``1`` and plain integers,
    NaN as ``nan``). Rows go to the atomic file a block at a time.
    """
    with open_atomic(path) as stream:
        stream.write(_csv_header(columns))
        _write_csv_rows(stream, columns, rows_per_block)


def _csv_header(columns: Sequence[Column]) -> str:
    return ",".join(header for header, _ in columns) + "\n"


def _write_csv_rows(stream: IO[str], columns: Sequence[Column], rows_per_block: int) -> None:
    n = _rows(columns)
    for start in range(0, n, rows_per_block):
        stop = min(start + rows_per_block, n)
        block = np.column_stack(
            [np.asarray(values[start:stop], dtype=np.float64) for _, values in columns]
        )
        stream.write(format_csv_rows(block))


class SamplesCsvStream:
    """``samples.csv`` written while the study runs: :meth:`add` each finished chunk's rows as
    it arrives (in sample order, as :func:`robustff.study.run_study` passes them to
    ``on_rows``), then :meth:`finish`. The rows are formatted while the next chunks are
    simulated instead of after the study.

    The file is ``.<folder>.samples-<pid>.part`` beside the result folder (the same file
    system, so it moves into the folder in one rename); :meth:`discard` removes it when the
    run ends without results.

    Parameters
    ----------
    folder : Path
        The result folder the table is for (it need not exist yet).
    """

    def __init__(self, folder: Path) -> None:
        folder = Path(folder)
        folder.parent.mkdir(parents=True, exist_ok=True)
        self.path = folder.parent / f".{folder.name}.samples-{os.getpid()}.part"
        self._stream: IO[str] | None = open(self.path, "w", encoding="utf-8", newline="\n")
        self._header = False
        self.rows = 0

    def add(self, rows: SampleRows) -> None:
        """Append consecutive samples' rows (the next ones after those already written)."""
        if self._stream is None:
            raise ValueError("the samples table is already finished")
        if rows.start != self.rows:
            raise ValueError(f"rows from sample {rows.start} follow {self.rows} rows")
        columns = row_columns(rows)
        if not self._header:
            self._stream.write(_csv_header(columns))
            self._header = True
        _write_csv_rows(self._stream, columns, ROWS_PER_BLOCK)
        self.rows += rows.count

    def finish(self, result: StudyResult) -> Path | None:
        """Close the file, flushed to disk, and return its path, when it holds exactly the
        finished study's samples; otherwise (an interrupt struck between a chunk's arrival and
        its rows) remove it and return None: the caller writes the table from ``result``."""
        if self._stream is None:
            raise ValueError("the samples table is already finished")
        if result.samples != self.rows:
            self.discard()
            return None
        if not self._header:
            self._stream.write(_csv_header(sample_columns(result)))
        self._stream.flush()
        os.fsync(self._stream.fileno())
        self._stream.close()
        self._stream = None
        return self.path

    def discard(self) -> None:
        """Close and remove the file, if it is still there (a finished one moved away is not)."""
        if self._stream is not None:
            self._stream.close()
            self._stream = None
        self.path.unlink(missing_ok=True)


def _field_type(values: np.ndarray) -> np.dtype:
    kind = values.dtype.kind if hasattr(values, "dtype") else np.asarray(values).dtype.kind
    if kind == "b":
        return np.dtype(np.bool_)
    if kind in "iu":
        return np.dtype(np.int64)
    return np.dtype(np.float64)


def write_samples_npy(
    path: Path, columns: Sequence[Column], rows_per_block: int = ROWS_PER_BLOCK
) -> None:
    """NumPy ``.npy`` (format 1.0 or 2.0): one structured array, a named field per column.

    The header is written first with the final shape, then the records a block at a time, so
    ``numpy.load`` reads the file as if it had been saved with ``numpy.save`` in one piece.
    """
    n = _rows(columns)
    names = [header for header, _ in columns]
    if len(set(names)) != len(names):
        raise ValueError(f"column headers repeat: {names}")
    dtype = np.dtype([(header, _field_type(values)) for header, values in columns])
    header = {"descr": np.lib.format.dtype_to_descr(dtype), "fortran_order": False,
              "shape": (n,)}
    with open_atomic(path, binary=True) as stream:
        try:
            np.lib.format.write_array_header_1_0(stream, header)
        except ValueError:  # a header beyond 64 KiB (very many columns) needs format 2.0
            stream.seek(0)
            stream.truncate()
            np.lib.format.write_array_header_2_0(stream, header)
        for start in range(0, n, rows_per_block):
            stop = min(start + rows_per_block, n)
            block = np.empty(stop - start, dtype=dtype)
            for name, values in columns:
                block[name] = values[start:stop]
            stream.write(block.tobytes())
