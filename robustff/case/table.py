"""Reading numeric columns from plant-historian CSV exports (bump tests to fit, recorded
disturbance traces to replay).

Historians export in the conventions of the locale they run in: comma, semicolon or tab
separated; decimal point or decimal comma; ISO 8601 or day-first timestamps (``dd.mm.yyyy``,
``dd/mm/yyyy``); UTF-8 or Windows-1252. :func:`read_columns` detects these (or takes them as
options) and returns float arrays with NaN for missing cells, so that each caller decides what a
gap means (a bump-test fit leaves a missing output out of the residuals; a replayed disturbance
trace may interpolate it). pandas does the tokenising (quotes, ragged rows) and the vectorised
conversion; it is imported inside the function because it is slow to import and not needed on
the ``robustff run`` path.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from robustff.errors import DataError

__all__ = ["MISSING_TOKENS", "SEPARATORS", "TIME_FORMATS", "Columns", "read_columns"]

#: Cell contents read as "no value" (NaN in the returned arrays), compared ignoring case.
MISSING_TOKENS = frozenset({"", "nan", "na", "n/a", "null", "none", "#n/a"})
#: Separators tried, in order of preference (a tab or semicolon in a header is deliberate).
SEPARATORS: tuple[str, ...] = ("\t", ";", ",")
#: Timestamp formats tried after ISO 8601 when no ``time_format`` is given (day first).
TIME_FORMATS: tuple[str, ...] = (
    "%d.%m.%Y %H:%M:%S.%f", "%d.%m.%Y %H:%M:%S", "%d.%m.%Y %H:%M",
    "%d/%m/%Y %H:%M:%S.%f", "%d/%m/%Y %H:%M:%S", "%d/%m/%Y %H:%M",
)
_SNIFF_LINES = 20  # data lines looked at to detect the separator and the decimal mark
_COMMA_DECIMAL = re.compile(r"^\s*[+-]?\d*,\d+([eE][+-]?\d+)?\s*$")
_POINT_DECIMAL = re.compile(r"^\s*[+-]?\d*\.\d+([eE][+-]?\d+)?\s*$")


@dataclass(frozen=True)
class Columns:
    """Numeric columns read from one file.

    Parameters
    ----------
    values : dict of str to ndarray, shape (N,)
        One float array per requested column (keyed by the name asked for), NaN where the cell
        was missing. The time column, if asked for, holds numbers as written or, for timestamps,
        seconds since the first timestamp.
    line_numbers : ndarray of int, shape (N,)
        Line of the file (1-based) each row came from, for messages.
    dated : bool
        True if the time column held timestamps (its values are then seconds).
    header : tuple of str
        All column names of the file.
    notes : tuple of str
        What was detected or assumed (encoding fallback), for the user.
    """

    values: dict[str, np.ndarray]
    line_numbers: np.ndarray
    dated: bool
    header: tuple[str, ...]
    notes: tuple[str, ...]


def _decode(path: Path) -> tuple[str, list[str]]:
    """File text and notes: UTF-8 (with or without BOM), UTF-16 with BOM, else Windows-1252."""
    try:
        raw = path.read_bytes()
    except FileNotFoundError:
        raise DataError(f"{path}: file not found") from None
    except OSError as exc:
        raise DataError(f"{path}: cannot read the file ({exc.strerror or exc})") from None
    if raw.startswith((b"\xff\xfe", b"\xfe\xff")):
        try:
            return raw.decode("utf-16"), []
        except UnicodeDecodeError:
            pass
    try:
        return raw.decode("utf-8-sig"), []
    except UnicodeDecodeError as exc:
        first_bad = exc.start
    try:
        text = raw.decode("cp1252")
    except UnicodeDecodeError:
        raise DataError(
            f"{path}: cannot decode the file (byte {first_bad}: neither UTF-8 nor Windows-1252/"
            "Latin-1); export it as UTF-8 text"
        ) from None
    if "\x00" in text:  # UTF-16 without a byte-order mark, or a binary file
        raise DataError(f"{path}: this is not a text file (or UTF-16 without a byte-order mark); "
                        "export it as UTF-8 text")
    return text, [f"{path}: not UTF-8; read as Windows-1252 (Latin-1) text"]


def _content_lines(path: Path, text: str) -> list[tuple[int, str]]:
    """Non-blank lines that are not ``#`` comments, with their 1-based line numbers."""
    lines = [(n, line) for n, line in enumerate(text.splitlines(), start=1)
             if line.strip() and not line.lstrip().startswith("#")]
    if not lines:
        raise DataError(f"{path}: the file is empty")
    return lines


def _detect_separator(lines: list[str]) -> str:
    """The separator giving the same number (> 1) of fields on the header and the sampled lines.

    A decimal comma makes the comma count vary from line to line, so a consistent semicolon or
    tab wins; with no consistent candidate the one splitting the header most is taken.
    """
    import csv

    header, sample = lines[0], lines[1 : 1 + _SNIFF_LINES]
    counts = {}
    for sep in SEPARATORS:
        widths = [len(row) for row in csv.reader([header, *sample], delimiter=sep)]
        counts[sep] = widths[0]
        if widths[0] > 1 and all(w == widths[0] for w in widths):
            return sep
    return max(SEPARATORS, key=lambda sep: counts[sep])


def _detect_decimal(cells: list[str], separator: str) -> str:
    """``","`` if the sampled numeric cells use a decimal comma (never with a comma separator)."""
    if separator == ",":
        return "."
    comma = sum(1 for cell in cells if _COMMA_DECIMAL.match(cell))
    point = sum(1 for cell in cells if _POINT_DECIMAL.match(cell))
    return "," if comma > point else "."


def _find_column(header: list[str], wanted: str, path: Path) -> int:
    names = [name.strip() for name in header]
    if wanted in names:
        return names.index(wanted)
    lowered = [name.lower() for name in names]
    if wanted.strip().lower() in lowered:
        return lowered.index(wanted.strip().lower())
    raise DataError(f"{path}: no column '{wanted}'; the columns are: {', '.join(names)}")


def _missing(cells: Any) -> np.ndarray:
    """Boolean mask of missing cells in a pandas Series of strings."""
    return cells.str.strip().str.lower().isin(MISSING_TOKENS).to_numpy()


def _bad_cell(path: Path, name: str, cell: str, line: int, what: str) -> DataError:
    return DataError(
        f"{path}, line {line}: column '{name}' has the {what} value '{cell.strip()}'; clean "
        "the export (blank cells are read as missing values)"
    )


def _numbers(cells: Any, decimal: str) -> np.ndarray:
    """Float array from a Series of strings; NaN where the cell is not a number."""
    import pandas as pd

    text = cells.str.strip()
    if decimal == ",":
        text = text.str.replace(",", ".", regex=False)
    return pd.to_numeric(text, errors="coerce").to_numpy(dtype=float)


def _timestamps(cells: Any, time_format: str | None) -> np.ndarray | None:
    """Seconds since the first timestamp, NaN where a cell does not parse; None if none do.

    Tries ``time_format`` alone if given, else ISO 8601 and then :data:`TIME_FORMATS`, and keeps
    the format that parses the most cells.
    """
    import pandas as pd

    formats = [time_format] if time_format else ["ISO8601", *TIME_FORMATS]
    stripped = cells.str.strip()
    filled = int((stripped != "").sum())  # a format parsing all of these cannot be beaten
    best: Any = None
    for fmt in formats:
        try:
            parsed = pd.to_datetime(stripped, format=fmt, errors="coerce", utc=True)
        except (ValueError, TypeError):
            continue
        if best is None or parsed.notna().sum() > best.notna().sum():
            best = parsed
        if int(best.notna().sum()) >= filled:
            break
    if best is None or not best.notna().any():
        return None
    first = best[best.notna()].iloc[0]
    # total_seconds does not depend on the datetime resolution pandas picked (ns, us, ...)
    return (best - first).dt.total_seconds().to_numpy(dtype=float)  # NaT becomes NaN


def _missing_markers() -> list[str]:
    """:data:`MISSING_TOKENS` in the spellings pandas should treat as missing (it is case
    sensitive); other spellings still end up NaN through the slow path of :func:`_column`."""
    return sorted({v for t in MISSING_TOKENS for v in (t, t.upper(), t.title())})


def _table(path: Path, lines: list[tuple[int, str]], separator: str, decimal: str) -> Any:
    """Data rows as a pandas DataFrame (numbers parsed where a whole column is numeric).

    The C parser converts clean numeric columns at full speed; a column holding anything else
    comes back as strings and is checked cell by cell.
    """
    import io

    import pandas as pd

    body = "\n".join(line for _, line in lines[1:])
    if not body:
        return pd.DataFrame()
    try:
        return pd.read_csv(io.StringIO(body), sep=separator, decimal=decimal, header=None,
                           engine="c", keep_default_na=False, na_values=_missing_markers(),
                           skipinitialspace=True, skip_blank_lines=False, dtype=None)
    except (pd.errors.ParserError, ValueError) as exc:
        message = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        # the parser counts lines of the data rows only; give the file's line number
        message = re.sub(r"line (\d+)", lambda m: f"line {_file_line(lines, int(m.group(1)))}",
                         message)
        raise DataError(f"{path}: cannot split the file into columns ({message}); give "
                        "--separator") from None


def _file_line(lines: list[tuple[int, str]], data_line: int) -> int:
    """File line number of the parser's 1-based data line."""
    return lines[min(max(data_line, 1), len(lines) - 1)][0]


def _column(path: Path, name: str, series: Any, line_numbers: np.ndarray, decimal: str) -> Any:
    """Float array of a numeric column, else its cells as strings (for timestamps/errors)."""
    from pandas.api.types import is_numeric_dtype

    if is_numeric_dtype(series.dtype) and not series.dtype == bool:
        return series.to_numpy(dtype=float)
    return series.astype(object).where(series.notna(), "").astype(str)


def read_columns(
    path: str | Path,
    columns: list[str] | tuple[str, ...],
    *,
    time_column: str | None = None,
    separator: str | None = None,
    decimal: str | None = None,
    time_format: str | None = None,
) -> Columns:
    """Read named numeric columns (and optionally a time column) from a CSV file.

    Parameters
    ----------
    path : str or Path
        Text file with a header row; blank lines and lines starting with ``#`` are skipped.
    columns : sequence of str
        Numeric columns to read (matched exactly, then ignoring case).
    time_column : str, optional
        Column of numbers or timestamps (ISO 8601, ``dd.mm.yyyy HH:MM[:SS]``,
        ``dd/mm/yyyy HH:MM[:SS]``, or ``time_format``); timestamps become seconds.
    separator : {",", ";", "\\t"}, optional
        Field separator; detected when None.
    decimal : {".", ","}, optional
        Decimal mark; detected when None (a comma only with a semicolon or tab separator).
    time_format : str, optional
        strftime format of the timestamps, e.g. ``"%d.%m.%Y %H:%M:%S"``.

    Returns
    -------
    Columns

    Raises
    ------
    DataError
        Missing or undecodable file, missing column, or a cell that is neither a number nor
        a missing-value marker (naming the line, column and value).
    """
    path = Path(path)
    text, notes = _decode(path)
    lines = _content_lines(path, text)
    sep = separator or _detect_separator([line for _, line in lines])
    header, sample = _split_sample(lines, sep)
    index = {name: _find_column(header, name, path) for name in columns}
    mark = decimal or _detect_decimal(
        [row[col] for row in sample for col in index.values() if col < len(row)], sep)
    if mark == sep:
        raise DataError(f"{path}: the decimal mark and the separator are both '{sep}'")
    table = _table(path, lines, sep, mark)
    line_numbers = np.asarray([n for n, _ in lines[1:]], dtype=int)
    values: dict[str, np.ndarray] = {}
    for name, col in index.items():
        values[name] = _numeric(path, header[col], _cells(table, col), line_numbers, mark)
    dated = False
    if time_column is not None:
        col = _find_column(header, time_column, path)
        values[time_column], dated = _times(path, header[col], _cells(table, col), line_numbers,
                                            mark, time_format)
    return Columns(values, line_numbers, dated, tuple(header), tuple(notes))


def _split_sample(lines: list[tuple[int, str]], sep: str) -> tuple[list[str], list[list[str]]]:
    """Header names and the first data rows split at ``sep`` (for column lookup and sniffing)."""
    import csv

    rows = list(csv.reader([line for _, line in lines[: 1 + _SNIFF_LINES]], delimiter=sep))
    return [name.strip() for name in rows[0]], rows[1:]


def _cells(table: Any, col: int) -> Any:
    """Column ``col`` of the data (all missing when the rows are shorter than the header)."""
    import pandas as pd

    if col < table.shape[1]:
        return table.iloc[:, col]
    return pd.Series([np.nan] * table.shape[0], dtype=float)


def _numeric(path: Path, name: str, series: Any, line_numbers: np.ndarray,
             decimal: str) -> np.ndarray:
    """Float array of one column; NaN where missing; raises on the first non-numeric cell."""
    column = _column(path, name, series, line_numbers, decimal)
    if isinstance(column, np.ndarray):
        return column
    return _checked(path, name, column, line_numbers, _numbers(column, decimal), "non-numeric")


def _times(path: Path, name: str, series: Any, line_numbers: np.ndarray, decimal: str,
           time_format: str | None) -> tuple[np.ndarray, bool]:
    """Time column as numbers, or timestamps as seconds; and whether they were timestamps."""
    column = _column(path, name, series, line_numbers, decimal)
    if isinstance(column, np.ndarray):
        return column, False
    times = _numbers(column, decimal)
    dated = False
    if np.any(np.isnan(times) & ~_missing(column)):
        stamps = _timestamps(column, time_format)
        if stamps is not None:
            times, dated = stamps, True
    kind = "unreadable timestamp" if dated or time_format else "non-numeric"
    return _checked(path, name, column, line_numbers, times, kind), dated


def _checked(path: Path, name: str, cells: Any, line_numbers: np.ndarray, parsed: np.ndarray,
             what: str) -> np.ndarray:
    """``parsed`` with missing cells as NaN; raises on the first cell that is bad, not missing."""
    missing = _missing(cells)
    bad = np.isnan(parsed) & ~missing
    if np.any(bad):
        k = int(np.argmax(bad))
        raise _bad_cell(path, name, str(cells.iloc[k]), int(line_numbers[k]), what)
    parsed = parsed.copy()
    parsed[missing] = np.nan
    return parsed
