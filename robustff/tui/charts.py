"""Character charts for the studio: the IAE-ratio histogram, the CV band plot (with the allowed
band of the CV when the case gives one) and a recorded disturbance trace.

Drawn with plain characters into :class:`rich.text.Text` (Rich ships with Textual), so they work
in any terminal, over SSH, with ``NO_COLOR`` and with 16 colours: every series has its own
glyph and a legend, colour only repeats what the glyph already says.
"""

from __future__ import annotations

import numpy as np
from rich.text import Text

from robustff.stats import ratio_histogram

__all__ = ["histogram_chart", "band_chart", "trace_chart", "BAND_GLYPHS", "TRACE_GLYPH"]

_EIGHTHS = " ▁▂▃▄▅▆▇█"
_LABEL = 8  # width of the y-axis labels
#: Glyphs of the band plot: fb band, fbff band, both bands, fb median, fbff median, zero line.
BAND_GLYPHS = {"fb": "░", "fbff": "▒", "both": "▓", "fb_median": "o", "fbff_median": "x",
               "zero": "·", "limit": "╌"}
#: Glyph of a recorded trace (each column spans the record's lowest to highest value there).
TRACE_GLYPH = "█"
_STYLES = {"fb": "blue", "fbff": "magenta", "both": "cyan", "fb_median": "bold blue",
           "fbff_median": "bold magenta", "zero": "dim", "limit": "bold red", "better": "green",
           "worse": "red", "line": "bold yellow"}


def _fmt(value: float) -> str:
    return f"{value:.3g}"


#: The histogram's legend, longest first: the first that fits the width is drawn.
_LEGENDS = ("◀ fbff better   ┃ = 1.0 (no change)   fbff worse ▶",
            "◀ fbff better  ┃ = 1.0  fbff worse ▶", "◀ better ┃=1.0 worse ▶")


def histogram_chart(ratio: np.ndarray, width: int, height: int) -> Text:
    """Histogram of the per-sample IAE ratio fbff / fb, the 1.0 line marked ``┃``.

    Parameters
    ----------
    ratio : ndarray, shape (n,)
        NaN entries are ignored.
    width, height : int
        Character cells available (at least 20 x 6).
    """
    width, height = max(width, 20), max(height, 6)
    columns, rows = width - _LABEL, height - 4
    finite = ratio[np.isfinite(ratio)] if ratio.size else ratio
    if finite.size == 0:
        return Text("IAE ratio fbff/fb: no usable samples yet")
    counts, edges = ratio_histogram(finite, bins=columns)
    one = int(np.clip(np.searchsorted(edges, 1.0, side="right") - 1, 0, columns - 1))
    scale = rows * 8 / max(int(counts.max()), 1)
    text = Text(f"IAE ratio fbff/fb, {finite.size} plants (count per bin)\n", style="bold")
    for level in range(rows, 0, -1):
        label = str(int(counts.max())) if level == rows else ""
        text.append(label.rjust(_LABEL - 1) + "│")
        for column, count in enumerate(counts):
            eighths = int(round(count * scale)) - (level - 1) * 8
            glyph = _EIGHTHS[int(np.clip(eighths, 0, 8))]
            if column == one and glyph == " ":
                text.append("┃", _STYLES["line"])
            else:
                text.append(glyph, _STYLES["worse" if edges[column] >= 1.0 else "better"])
        text.append("\n")
    axis = [" "] * columns
    axis[one] = "┃"
    text.append(" " * (_LABEL - 1) + "└" + "".join(axis) + "\n")
    text.append(" " * _LABEL + _ticks(edges, one, columns) + "\n")
    legend = next((line for line in _LEGENDS if len(line) <= columns), _LEGENDS[-1][:columns])
    text.append(" " * _LABEL + legend)
    return text


def _ticks(edges: np.ndarray, one: int, columns: int) -> str:
    """Axis values: the range ends and 1.0 under its marker, where they fit."""
    line = [" "] * columns
    low, high = _fmt(edges[0]), _fmt(edges[-1])
    placed = [(0, low), (max(columns - len(high), 0), high),
              (min(max(one - 1, 0), max(columns - 3, 0)), "1.0")]  # never cut to "1."
    for start, label in sorted(placed, key=lambda item: item[1] != "1.0"):
        end = min(start + len(label), columns)
        if all(c == " " for c in line[start:end]):
            line[start:end] = list(label[: end - start])
    return "".join(line)


def _cell_rows(values: np.ndarray, low: float, high: float, rows: int) -> np.ndarray:
    """Row index (0 = top) of each value on a grid spanning ``low .. high``."""
    position = (high - values) / (high - low) * (rows - 1)
    return np.clip(np.round(np.nan_to_num(position, nan=-1)), -1, rows - 1).astype(int)


def _resample(times: np.ndarray, bands: np.ndarray, columns: int) -> np.ndarray:
    """Bands at ``columns`` evenly spaced times (nearest envelope point), shape (2, 3, columns)."""
    picks = np.linspace(0, times.size - 1, columns).round().astype(int)
    return bands[:, :, picks]


def _band_cells(grid: np.ndarray, low: float, high: float, rows: int, zero: int,
                limits: np.ndarray | None = None) -> np.ndarray:
    """What each character cell shows: a key of :data:`BAND_GLYPHS`, ``"zero"`` or ``""``.

    Parameters
    ----------
    grid : ndarray, shape (2, 3, C)
        P5, P50, P95 per arm at each of the C columns, CV units.
    low, high : float
        CV values of the bottom and top rows.
    rows : int
        Character rows of the plot area.
    zero : int
        Row of the zero deviation line.
    limits : ndarray, shape (2, C), optional
        Lower and upper edge of the allowed band at each column, CV units.

    Returns
    -------
    ndarray of str, shape (rows, C)
    """
    columns = grid.shape[2]
    cells = np.full((rows, columns), "", dtype=object)
    cells[zero, :] = "zero"
    for arm, name in enumerate(("fb", "fbff")):
        top = _cell_rows(grid[arm, 2], low, high, rows)
        bottom = _cell_rows(grid[arm, 0], low, high, rows)
        for column in range(columns):
            if top[column] < 0:
                continue
            for row in range(top[column], bottom[column] + 1):
                overlap = arm and cells[row, column] in ("fb", "both")
                cells[row, column] = "both" if overlap else name
    if limits is not None:  # over the bands: the allowed band is what they are judged by
        for edge in limits:
            for column, row in enumerate(_cell_rows(edge, low, high, rows)):
                if row >= 0:
                    cells[row, column] = "limit"
    # medians are drawn last so they stay visible on top of the bands
    for arm, name in enumerate(("fb_median", "fbff_median")):
        middle = _cell_rows(grid[arm, 1], low, high, rows)
        for drawn in np.flatnonzero(middle >= 0):
            cells[middle[drawn], drawn] = name
    return cells


def band_chart(times: np.ndarray, bands: np.ndarray, width: int, height: int,
               cv_label: str, time_unit: str, band: float | None = None,
               setpoint: np.ndarray | None = None) -> Text:
    """Band plot of the CV: P5..P95 and median over time for both arms.

    Parameters
    ----------
    times : ndarray, shape (P,)
        Time units.
    bands : ndarray, shape (2, 3, P)
        P5, P50, P95 per arm (arm 0 feedback only), CV units.
    width, height : int
        Character cells available (at least 24 x 8).
    band : float, optional
        ``[signals.controlled] band``: the allowed deviation from the setpoint, CV units; drawn
        as two lines at setpoint +- band (one more legend line).
    setpoint : ndarray, shape (P,), optional
        The setpoint at ``times`` as a deviation from the start, CV units (default 0).
    """
    width, height = max(width, 24), max(height, 8)
    columns, rows = width - _LABEL, height - 4
    if times.size == 0 or not np.isfinite(bands).any():
        return Text("CV band: no samples yet")
    grid = _resample(times, bands, columns)
    low = float(np.nanmin(np.minimum(grid.min(axis=(0, 1)), 0.0)))
    high = float(np.nanmax(np.maximum(grid.max(axis=(0, 1)), 0.0)))
    limits = None
    if band is not None:
        centre = np.zeros(times.size) if setpoint is None else np.asarray(setpoint, dtype=float)
        centre = centre[np.linspace(0, times.size - 1, columns).round().astype(int)]
        limits = np.stack([centre - band, centre + band])
        low, high = min(low, float(limits[0].min())), max(high, float(limits[1].max()))
    if not high > low:
        low, high = low - 1.0, high + 1.0
    zero = int(_cell_rows(np.array([0.0]), low, high, rows)[0])
    cells = _band_cells(grid, low, high, rows, zero, limits)
    text = Text(f"{cv_label}: P5-P95 band and median, deviation from start\n", style="bold")
    for row in range(rows):
        label = _fmt(high) if row == 0 else _fmt(low) if row == rows - 1 else (
            "0" if row == zero else "")
        text.append(label.rjust(_LABEL - 1) + "│")
        for kind in cells[row]:
            text.append(BAND_GLYPHS.get(kind, " "), _STYLES.get(kind, ""))
        text.append("\n")
    end = f"{times[-1]:g} {time_unit}"
    text.append(" " * (_LABEL - 1) + "└" + "─" * columns + "\n")
    text.append(" " * _LABEL + "0" + end.rjust(columns - 1) + "\n")
    g = BAND_GLYPHS
    text.append(f"{g['fb']} fb  {g['fbff']} fbff  {g['both']} both  median: "
                f"{g['fb_median']} fb, {g['fbff_median']} fbff")
    if band is not None:
        unit = cv_label.rsplit("[", 1)[1].rstrip("]") if cv_label.endswith("]") else ""
        text.append(f"\n{g['limit']} allowed band: setpoint +-{band:g} {unit}".rstrip())
    return text


def trace_chart(times: np.ndarray, values: np.ndarray, width: int, height: int,
                title: str, unit: str, time_unit: str) -> Text:
    """A recorded trace over time: each column spans the lowest to the highest value recorded
    in its time slice, so steps, drifts and the noise's spread all show.

    Parameters
    ----------
    times : ndarray, shape (M,)
        Time units, increasing (the simulated window's time, the record's start at its event).
    values : ndarray, shape (M,)
        Deviation from the record's baseline, disturbance units.
    width, height : int
        Character cells available (at least 24 x 7).
    title : str
        First line (which record, which disturbance).
    unit : str
        The disturbance's unit.
    """
    width, height = max(width, 24), max(height, 7)
    columns, rows = width - _LABEL, height - 3
    if times.size < 2:
        return Text(f"{title}: the record holds fewer than two rows")
    slot = np.clip(((times - times[0]) / (times[-1] - times[0]) * columns).astype(int),
                   0, columns - 1)
    lowest = np.full(columns, np.nan)
    highest = np.full(columns, np.nan)
    np.fmin.at(lowest, slot, values)
    np.fmax.at(highest, slot, values)
    low = float(min(np.nanmin(values), 0.0))
    high = float(max(np.nanmax(values), 0.0))
    if not high > low:
        low, high = low - 1.0, high + 1.0
    top, bottom = _cell_rows(highest, low, high, rows), _cell_rows(lowest, low, high, rows)
    zero = int(_cell_rows(np.array([0.0]), low, high, rows)[0])
    text = Text(title + "\n", style="bold")
    for row in range(rows):
        label = _fmt(high) if row == 0 else _fmt(low) if row == rows - 1 else (
            "0" if row == zero else "")
        text.append(label.rjust(_LABEL - 1) + "│")
        for column in range(columns):
            if top[column] >= 0 and top[column] <= row <= bottom[column]:
                text.append(TRACE_GLYPH, _STYLES["fbff"])
            else:
                text.append(BAND_GLYPHS["zero"] if row == zero else " ", _STYLES["zero"])
        text.append("\n")
    span = f"{times[0]:g} .. {times[-1]:g} {time_unit}"
    text.append(" " * (_LABEL - 1) + "└" + "─" * columns + "\n")
    text.append(" " * _LABEL + span.rjust(columns) + "\n")
    text.append(f"{TRACE_GLYPH} lowest to highest recorded in each column"
                + (f", {unit}" if unit else ""))
    return text
