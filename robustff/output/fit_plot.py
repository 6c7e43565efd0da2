"""Pictures of a fit: recorded data against the fitted response.

:func:`save_fit_plot` writes a PNG or SVG with matplotlib (imported here, Agg backend, so nothing
else pays for it); :func:`terminal_fit_plot` draws the same comparison as text with plotext for
the terminal and the studio.
"""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path
from typing import Any

import numpy as np

from robustff.errors import DataError
from robustff.fit.least_squares import FitResult
from robustff.fit.result import describe_fit, fit_units

__all__ = ["PLOT_SUFFIXES", "save_fit_plot", "terminal_fit_plot"]

PLOT_SUFFIXES: tuple[str, ...] = (".png", ".svg")


def save_fit_plot(
    results: Sequence[FitResult], path: str | Path, time_unit: str | None = None
) -> None:
    """Write one column per record: output (data and fit) above, input below.

    Parameters
    ----------
    results : sequence of FitResult
    path : str or Path
        Ends in ``.png`` or ``.svg``.
    time_unit : str, optional
        Label of the time axis.

    Raises
    ------
    DataError
        Unsupported file type or the file cannot be written.
    """
    path = Path(path)
    if path.suffix.lower() not in PLOT_SUFFIXES:
        raise DataError(f"{path}: the plot file must end in .png or .svg")
    import matplotlib

    matplotlib.use("Agg")
    from matplotlib.figure import Figure

    n = len(results)
    fig = Figure(figsize=(4.5 * n + 1.5, 6.0), layout="constrained")
    axes = fig.subplots(2, n, sharex="col", squeeze=False, height_ratios=[3, 1])
    unit = f" [{time_unit}]" if time_unit else ""
    for col, result in enumerate(results):
        _draw_one(axes[0, col], axes[1, col], result, unit)
    try:
        fig.savefig(path, dpi=120)
    except OSError as exc:
        raise DataError(f"{path}: cannot write the plot ({exc.strerror or exc})") from None


def _draw_one(top: Any, bottom: Any, result: FitResult, unit: str) -> None:
    rec, model = result.record, result.model
    top.plot(rec.times, rec.output, ".", ms=3, color="0.45", label="data")
    units = fit_units(result)
    top.plot(rec.times, result.fitted, "-", lw=1.8, color="C0",
             label=f"{model.kind.upper()} fit (RMSE {result.rmse:.3g} {units['output']})")
    description = describe_fit(result).replace("), ", ")\n", 1)  # the gain on its own line
    top.set_title(f"{Path(rec.source).name}\n{description}", fontsize=8)
    top.set_ylabel(rec.output_name)
    top.legend(fontsize=8)
    top.grid(alpha=0.3)
    bottom.step(rec.times, rec.input, where="post", color="C1")
    bottom.set_ylabel(rec.input_name)
    bottom.set_xlabel(f"time{unit}")
    bottom.grid(alpha=0.3)


def terminal_fit_plot(
    times: np.ndarray,
    data: np.ndarray,
    fitted: np.ndarray,
    width: int,
    height: int,
    colorless: bool = True,
) -> str:
    """Data (dots) and fitted response (line) as a text plot.

    Parameters
    ----------
    times, data, fitted : ndarray, shape (N,)
        Sample times (time units), recorded output (NaN where missing) and fitted output.
    width, height : int
        Size in terminal cells.
    colorless : bool
        Plain text (True) or with ANSI colour codes.

    Returns
    -------
    str
        ``height`` lines of at most ``width`` characters.
    """
    import plotext

    figure = plotext.figure
    figure.clear()
    figure.plot_size(int(width), int(height))
    t = [float(v) for v in np.asarray(times, dtype=float)]
    known = np.isfinite(np.asarray(data, dtype=float))  # missing outputs are not drawn
    figure.draw(figure.signal([v for v, k in zip(t, known, strict=True) if k],
                              [float(v) for v in np.asarray(data)[known]],
                              marker="dot").label("data"))
    figure.draw(figure.signal(t, [float(v) for v in fitted]).lines().label("fit"))
    text = figure.build().string(colorless=colorless)
    figure.clear()
    return str(text)
