"""Character chart of where in frequency feedforward helps: the error-ratio bands on a log axis.

The ratio of the errors with and without feedforward (one measured disturbance, across the
sampled plants) is drawn as its P5-P95 band and median over a logarithmic frequency axis; the
ratio 1 (feedforward changes nothing) is a dotted line and the crossover (the highest frequency
up to which it helps in 90 % of the plants) a vertical bar. Plain glyphs with a legend, colour
only repeats them (see :mod:`robustff.tui.charts`).
"""

from __future__ import annotations

import math

import numpy as np
from rich.text import Text

__all__ = ["frequency_chart", "FREQUENCY_GLYPHS", "ratio_ceiling"]

#: Glyphs: the P5-P95 band, the median, the ratio-1 line, the crossover.
FREQUENCY_GLYPHS = {"band": "░", "median": "o", "one": "┄", "crossover": "┃"}
_STYLES = {"band": "cyan", "median": "bold cyan", "one": "dim", "crossover": "bold yellow"}
_LABEL = 8  # width of the y-axis labels, as the other charts


def ratio_ceiling(p95: np.ndarray) -> float:
    """Top of the ratio axis: the largest P95, at least 1.5 (the 1 line in the lower part) and
    at most 3 (beyond, feedforward is plainly harmful and detail above does not matter)."""
    finite = p95[np.isfinite(p95)]
    top = float(finite.max()) if finite.size else 1.5
    return float(np.clip(math.ceil(top * 2.0) / 2.0, 1.5, 3.0))


def _row(value: np.ndarray | float, top: float, rows: int) -> np.ndarray:
    """Row (0 = top) of ratio ``value`` on an axis from 0 (bottom row) to ``top``."""
    position = (top - np.asarray(value, dtype=float)) / top * (rows - 1)
    return np.clip(np.round(np.nan_to_num(position, nan=-1)), -1, rows - 1).astype(int)


def _column(omega: float, low: float, high: float, columns: int) -> int:
    """Column of angular frequency ``omega`` on the log axis ``low .. high``."""
    share = (math.log(omega) - math.log(low)) / (math.log(high) - math.log(low))
    return int(np.clip(round(share * (columns - 1)), 0, columns - 1))


def _ticks(low: float, high: float, crossover: float | None, columns: int) -> str:
    """The axis ends and the crossover under its bar, where they fit."""
    line = [" "] * columns
    labels = [(0, f"{low:.2g}"), (None, f"{high:.2g}")]
    if crossover is not None and crossover < high:
        labels.insert(0, (_column(crossover, low, high, columns), f"{crossover:.2g}"))
    for start, label in labels:
        begin = columns - len(label) if start is None else min(start, columns - len(label))
        end = begin + len(label)
        if begin >= 0 and all(c == " " for c in line[max(begin - 1, 0):min(end + 1, columns)]):
            line[begin:end] = list(label)
    return "".join(line)


def frequency_chart(omega: np.ndarray, bands: dict[str, np.ndarray], crossover: float | None,
                    width: int, height: int, title: str, time_unit: str) -> Text:
    """The P5-P95 band and median of the error ratio over frequency, log axis.

    Parameters
    ----------
    omega : ndarray, shape (F,)
        Angular frequencies, rad per time unit, increasing.
    bands : dict
        ``"p5"``, ``"p50"``, ``"p95"``: the ratio's percentiles at ``omega``, each shape (F,),
        dimensionless.
    crossover : float or None
        Highest frequency up to which feedforward helps in 90 % of the plants, rad per time
        unit (None: at no frequency).
    width, height : int
        Character cells available (at least 30 x 9).
    title : str
        First line (which disturbance).
    time_unit : str
        The case's time unit, for the axis unit ``rad/<unit>``.
    """
    width, height = max(width, 30), max(height, 9)
    columns, rows = width - _LABEL, height - 5
    if omega.size < 2:
        return Text(f"{title}: no frequency response yet")
    low, high = float(omega[0]), float(omega[-1])
    at = np.geomspace(low, high, columns)
    log_omega = np.log(omega)
    picked = {key: np.interp(np.log(at), log_omega, bands[key]) for key in ("p5", "p50", "p95")}
    top = ratio_ceiling(bands["p95"])
    cells = np.full((rows, columns), "", dtype=object)
    one = int(_row(1.0, top, rows))
    cells[one, :] = "one"
    upper, lower = _row(picked["p95"], top, rows), _row(picked["p5"], top, rows)
    for column in range(columns):
        if upper[column] >= 0:
            cells[upper[column]:lower[column] + 1, column] = "band"
    if crossover is not None and crossover < high:
        cells[cells[:, _column(crossover, low, high, columns)] != "band",
              _column(crossover, low, high, columns)] = "crossover"
    middle = _row(picked["p50"], top, rows)
    for drawn in np.flatnonzero(middle >= 0):
        cells[middle[drawn], drawn] = "median"
    text = Text(title + "\n", style="bold")
    for row in range(rows):
        label = f"{top:g}" if row == 0 else "1" if row == one else "0" if row == rows - 1 else ""
        text.append(label.rjust(_LABEL - 1) + "│")
        for kind in cells[row]:
            text.append(FREQUENCY_GLYPHS.get(kind, " "), _STYLES.get(kind, ""))
        text.append("\n")
    text.append(" " * (_LABEL - 1) + "└" + "─" * columns + "\n")
    text.append(" " * _LABEL + _ticks(low, high, crossover, columns) + "\n")
    g = FREQUENCY_GLYPHS
    text.append(f"{g['band']} P5-P95 {g['median']} P50 {g['one']} 1: no change "
                f"{g['crossover']} crossover\n")
    text.append(f"rad/{time_unit}, log axis; below 1 feedforward helps")
    return text
