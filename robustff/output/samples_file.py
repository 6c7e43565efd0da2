"""The per-sample table of a study: ``samples.csv`` (text) or ``samples.npy`` (binary).

The table is a list of ``(header, column)`` pairs, one value per simulated sample in each column,
so a new kind of column (another design's metrics, say) is one more pair. The writers stream the
table to an atomic file in blocks of rows: memory beyond the columns themselves is one block,
whatever the number of samples.

``samples.npy`` holds one NumPy structured array with a named field per column (``sample`` as
int64, flags as bool, the rest float64), for ``pandas.DataFrame(numpy.load("samples.npy"))``.
"""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path

import numpy as np

from robustff.atomic import open_atomic
from robustff.engine.metrics import METRIC_NAMES
from robustff.errors import RobustffError
from robustff.study import StudyResult

__all__ = [
    "SAMPLES_FORMATS",
    "ROWS_PER_BLOCK",
    "Column",
    "sample_columns",
    "samples_file_name",
    "write_samples",
    "write_samples_csv",
    "write_samples_npy",
]

#: File formats of the per-sample table: ``csv`` (the default) or ``npy``.
SAMPLES_FORMATS: tuple[str, ...] = ("csv", "npy")
#: Rows formatted and written at a time.
ROWS_PER_BLOCK = 20_000
#: A column of the table: its header and one value per sample.
Column = tuple[str, np.ndarray]


def sample_columns(result: StudyResult) -> list[Column]:
    """The columns of the per-sample table, in file order.

    ``sample`` (0-based index), the sampled parameters (case units), every metric for both arms
    (``<metric>_fb``, ``<metric>_fbff``, in the metric's unit, see ``summary.json`` ``units``)
    and the unstable flags (``unstable_fb``, ``unstable_fbff``); then, for each of the case's
    other feedforward designs, ``<metric>_fbff.<design>`` and ``unstable_fbff.<design>`` (the
    same plants and noise, so a row compares the designs on one plant).
    """
    columns: list[Column] = [("sample", np.arange(result.samples, dtype=np.int64))]
    columns += [(name, result.parameters[:, j]) for j, name in enumerate(result.names)]
    for name in METRIC_NAMES:
        values = result.metrics[name]
        columns += [(f"{name}_fb", values[:, 0]), (f"{name}_fbff", values[:, 1])]
    columns += [("unstable_fb", result.unstable[:, 0]), ("unstable_fbff", result.unstable[:, 1])]
    for arm in result.alternatives:
        columns += [(f"{name}_fbff.{arm.name}", arm.metrics[name]) for name in METRIC_NAMES]
        columns.append((f"unstable_fbff.{arm.name}", arm.unstable))
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
    n = _rows(columns)
    with open_atomic(path) as stream:
        stream.write(",".join(header for header, _ in columns) + "\n")
        for start in range(0, n, rows_per_block):
            stop = min(start + rows_per_block, n)
            block = np.column_stack(
                [np.asarray(values[start:stop], dtype=np.float64) for _, values in columns]
            )
            np.savetxt(stream, block, delimiter=",", fmt="%.10g")


def _field_type(values: np.ndarray) -> np.dtype:
    kind = np.asarray(values).dtype.kind
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
