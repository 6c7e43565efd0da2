"""Per-sample result columns of a large study kept in files instead of memory.

A study keeps every sample's metrics for every arm (12 metrics x 8 bytes x arms per sample:
192 MB for 10^6 plants and two arms). Above :data:`SPILL_BYTES` the runner appends each
finished chunk's columns to raw files in a temporary folder (:class:`ColumnFiles`, which writes
them in batches of a few megabytes) and hands out :class:`SpilledMetrics`, a read-only mapping
that reads a column from its file each time it is asked for. The summary and the writers then
hold a few columns at a time, so the peak memory stays near the fixed cost of the process
whatever the number of samples. The values are the same float64 numbers, bit for bit; the files
are removed when the study's result is garbage collected or the interpreter exits.

:func:`arm_metrics` and :func:`metric_column` give one arm's columns of either kind of
metrics (a plain dict of ``(n, 2)`` arrays or a :class:`SpilledMetrics`), so their callers need
not know where the numbers live.
"""

from __future__ import annotations

import os
import shutil
import tempfile
import threading
import weakref
from collections.abc import Iterator, Mapping
from pathlib import Path

import numpy as np

__all__ = ["SPILL_BYTES", "ColumnFiles", "LazyColumn", "SpilledMetrics", "arm_metrics",
           "metric_column", "spills"]

#: Per-sample metric bytes of a study (samples x metrics x arms x 8) above which the runner
#: keeps them in files: about 260,000 plants with two arms.
SPILL_BYTES = 50_000_000
#: Bytes of appended values a :class:`ColumnFiles` holds before writing them to its files.
PENDING_BYTES = 8_000_000


def spills(samples: int, metrics: int, arms: int) -> bool:
    """Whether a study of ``samples`` plants keeps its ``metrics`` x ``arms`` columns in files."""
    return samples * metrics * arms * 8 > SPILL_BYTES


class ColumnFiles:
    """Raw little-endian columns appended chunk by chunk, one file per key, in a folder of
    their own (``.robustff-columns-<pid>-*``, created in ``folder``, default the system's
    temporary folder) that is removed with this object.

    Parameters
    ----------
    folder : Path, optional
        Where the column folder is made (the CLI uses the result folder's parent, the disk the
        results go to).
    """

    def __init__(self, folder: Path | None = None) -> None:
        if folder is not None:
            Path(folder).mkdir(parents=True, exist_ok=True)
        self.path = Path(tempfile.mkdtemp(prefix=f".robustff-columns-{os.getpid()}-",
                                          dir=folder))
        self._files: dict[str, Path] = {}
        self._types: dict[str, np.dtype] = {}
        self._rows: dict[str, int] = {}
        # Appended values not yet written, by column: written together once they reach
        # PENDING_BYTES (or before a read), so each file is opened once per few hundred chunks.
        self._pending: dict[str, list[bytes]] = {}
        self._pending_bytes = 0
        self._lock = threading.Lock()  # the summary reads columns from several threads
        self._finalizer = weakref.finalize(self, shutil.rmtree, self.path, ignore_errors=True)

    def append(self, key: str, values: np.ndarray) -> None:
        """Append the one-dimensional ``values`` to column ``key`` (its type fixed by the first)."""
        values = np.ascontiguousarray(values)
        if values.ndim != 1:
            raise ValueError(f"column {key!r}: one-dimensional values expected")
        if key not in self._files:
            self._types[key] = values.dtype.newbyteorder("<")
            self._rows[key] = 0
            self._files[key] = self.path / f"{len(self._files)}.bin"
        data = values.astype(self._types[key], copy=False).tobytes()
        with self._lock:
            self._pending.setdefault(key, []).append(data)
            self._pending_bytes += len(data)
            self._rows[key] += values.shape[0]
            if self._pending_bytes >= PENDING_BYTES:
                self._write_pending()

    def _write_pending(self) -> None:
        # Called with the lock held. One file open at a time, not all kept open: a study with
        # many designs has hundreds of columns, more than the open files a process may have.
        for key, parts in self._pending.items():
            with open(self._files[key], "ab") as stream:
                stream.write(b"".join(parts))
        self._pending.clear()
        self._pending_bytes = 0

    def rows(self, key: str) -> int:
        """Values in column ``key``."""
        return self._rows[key]

    def dtype(self, key: str) -> np.dtype:
        return self._types[key]

    def read(self, key: str, start: int = 0, stop: int | None = None) -> np.ndarray:
        """Rows ``start:stop`` of column ``key`` as a new array (native byte order)."""
        with self._lock:
            if self._pending:
                self._write_pending()
        path = self._files[key]
        stop = self._rows[key] if stop is None else min(stop, self._rows[key])
        count = max(stop - start, 0)
        kind = self._types[key]
        with open(path, "rb") as source:
            source.seek(start * kind.itemsize)
            values = np.fromfile(source, dtype=kind, count=count)
        if values.shape[0] != count:
            raise OSError(f"the column file {path} is shorter than it should be")
        return values.astype(kind.newbyteorder("="), copy=False)

    def close(self) -> None:
        """Remove the folder now (the columns can no longer be read)."""
        self._finalizer()


class LazyColumn:
    """One column of a :class:`ColumnFiles`, first ``rows`` values: indexing with a slice
    reads only those rows (the table writers' blocks); anything else reads the column."""

    def __init__(self, files: ColumnFiles, key: str, rows: int) -> None:
        self._files, self._key = files, key
        self.shape = (rows,)
        self.dtype = files.dtype(key).newbyteorder("=")

    def __len__(self) -> int:
        return self.shape[0]

    def __getitem__(self, index):
        if isinstance(index, slice) and index.step in (None, 1):
            start, stop, _ = index.indices(self.shape[0])
            return self._files.read(self._key, start, max(start, stop))
        return self._files.read(self._key, 0, self.shape[0])[index]

    def __array__(self, dtype=None, copy=None) -> np.ndarray:
        values = self._files.read(self._key, 0, self.shape[0])
        return values if dtype is None else values.astype(dtype, copy=False)


class SpilledMetrics(Mapping[str, np.ndarray]):
    """Per-sample metrics read from :class:`ColumnFiles`: ``metrics[name]`` is a new
    ``(rows, 2)`` array (arm 0 feedback only, arm 1 with feedforward) or, for one design's arm,
    ``(rows,)``; :meth:`column` reads one arm alone.

    Parameters
    ----------
    files : ColumnFiles
    names : tuple of str
        Metric names, in order.
    keys : tuple of str
        Column key prefix of each arm (``"<prefix>|<name>"``): two for a study's arms, one for
        a single design's.
    rows : int
        Samples (the first ``rows`` values of every column).
    """

    def __init__(self, files: ColumnFiles, names: tuple[str, ...], keys: tuple[str, ...],
                 rows: int) -> None:
        self.files, self.names, self.keys, self.rows = files, names, keys, rows

    def __getitem__(self, name: str) -> np.ndarray:
        if name not in self.names:
            raise KeyError(name)
        if len(self.keys) == 1:
            return self.files.read(f"{self.keys[0]}|{name}", 0, self.rows)
        out = np.empty((self.rows, len(self.keys)))
        for arm, key in enumerate(self.keys):
            out[:, arm] = self.files.read(f"{key}|{name}", 0, self.rows)
        return out

    def __iter__(self) -> Iterator[str]:
        return iter(self.names)

    def __len__(self) -> int:
        return len(self.names)

    def column(self, name: str, arm: int | None) -> LazyColumn:
        """Arm ``arm`` of metric ``name`` (None for a single design's only arm), unread."""
        if name not in self.names:
            raise KeyError(name)
        key = self.keys[0 if arm is None else arm]
        return LazyColumn(self.files, f"{key}|{name}", self.rows)


class _ArmMetrics(Mapping[str, np.ndarray]):
    """One arm of two-arm metrics: ``view[name]`` is metric ``name`` of arm ``arm``, (n,);
    read from its file when the metrics are spilled, a view of the array otherwise."""

    def __init__(self, metrics: Mapping[str, np.ndarray], arm: int) -> None:
        self._metrics, self._arm = metrics, arm

    def __getitem__(self, name: str) -> np.ndarray:
        return np.asarray(metric_column(self._metrics, name, self._arm))

    def __iter__(self) -> Iterator[str]:
        return iter(self._metrics)

    def __len__(self) -> int:
        return len(self._metrics)


def arm_metrics(metrics: Mapping[str, np.ndarray], arm: int) -> Mapping[str, np.ndarray]:
    """Arm ``arm`` (0 feedback only, 1 with feedforward) of two-arm metrics, by name."""
    return _ArmMetrics(metrics, arm)


def metric_column(metrics: Mapping[str, np.ndarray], name: str, arm: int | None):
    """Metric ``name`` of arm ``arm`` (None: one design's one-arm metrics): an array view, or
    a :class:`LazyColumn` that reads its rows when indexed (spilled metrics)."""
    if isinstance(metrics, SpilledMetrics):
        return metrics.column(name, arm)
    values = metrics[name]
    return values if arm is None else values[:, arm]
