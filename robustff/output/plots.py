"""Report figures with matplotlib (imported lazily; the Agg backend, no screen needed).

Every figure reads in greyscale: the two arms differ by line style and hatching, not only by
colour, and every axis carries its unit.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from robustff.design.margins_result import GAIN_MARGIN_LIMIT, MS_LIMIT, PHASE_MARGIN_LIMIT
from robustff.stats import envelope_from_histogram, metric_ratio, ratio_histogram
from robustff.study import StudyResult
from robustff.study.summary import study_frequencies
from robustff.study.summary_types import Summary

__all__ = [
    "band_figure",
    "ratio_figure",
    "sensitivity_figure",
    "margins_figure",
    "designs_ratio_figure",
    "save_figure",
    "FIGURES",
]

_ARMS = (
    ("fb", "feedback only", "-", "0.25", None),
    ("fbff", "feedback + feedforward", "--", "0.6", "//"),
)


def _pyplot():
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    return plt


def band_figure(result: StudyResult):
    """CV deviation over time: P5-P95 band and median for both arms."""
    plt = _pyplot()
    signals, unit = result.case.signals, result.case.time_unit
    fig, ax = plt.subplots(figsize=(8, 4.2))
    for arm, (_, label, style, grey, hatch) in enumerate(_ARMS):
        bands = envelope_from_histogram(
            result.envelope_counts[arm], result.envelope.edges, (5, 50, 95)
        )
        ax.fill_between(
            result.envelope.times,
            bands[0],
            bands[2],
            color=grey,
            alpha=0.35,
            hatch=hatch,
            edgecolor="0.3",
            linewidth=0,
            label=f"{label}: P5-P95",
        )
        ax.plot(
            result.envelope.times,
            bands[1],
            style,
            color="black",
            linewidth=1.4,
            label=f"{label}: median",
        )
    ax.axhline(0.0, color="0.5", linewidth=0.8)
    ax.set_xlabel(f"time [{unit}]")
    ax.set_ylabel(f"{signals.controlled.name} deviation [{signals.controlled.unit or 'CV units'}]")
    ax.set_title("Controlled variable across the sampled plants")
    ax.legend(fontsize=8, loc="best")
    fig.tight_layout()
    return fig


def ratio_figure(result: StudyResult):
    """Histogram of IAE(fbff)/IAE(fb) with the harm region (> 1) hatched."""
    plt = _pyplot()
    iae = result.metrics["iae"]
    counts, edges = ratio_histogram(metric_ratio(iae[:, 0], iae[:, 1]), bins=40)
    fig, ax = plt.subplots(figsize=(8, 3.8))
    ax.bar(
        edges[:-1],
        counts,
        width=np.diff(edges),
        align="edge",
        color="0.55",
        edgecolor="black",
        linewidth=0.4,
    )
    top = max(float(counts.max(initial=0)), 1.0)
    ax.axvspan(
        1.0,
        max(edges[-1], 1.05),
        color="0.85",
        hatch="xx",
        alpha=0.5,
        label="feedforward worse (ratio > 1)",
    )
    ax.axvline(1.0, color="black", linewidth=1.5, linestyle="--", label="ratio = 1")
    ax.set_ylim(0, top * 1.1)
    ax.set_xlabel("IAE ratio, feedback + feedforward / feedback only [-]")
    ax.set_ylabel("samples [count]")
    ax.set_title("Does feedforward help? (left of 1: better)")
    ax.legend(fontsize=8)
    fig.tight_layout()
    return fig


def _or_nan(value: float | None) -> float:
    return float("nan") if value is None else float(value)


def sensitivity_figure(summary: Summary):
    """Ranked Spearman correlations of each parameter with the IAE ratio, with 95 % intervals."""
    plt = _pyplot()
    rows = [row for row in summary.get("sensitivity", []) if row.get("rho") is not None]
    fig, ax = plt.subplots(figsize=(8, 0.5 * max(len(rows), 2) + 1.2))
    names = [row["name"] for row in rows][::-1]
    rho = np.array([row["rho"] for row in rows][::-1], dtype=float)
    low = np.array([_or_nan(row["ci95"][0]) for row in rows][::-1], dtype=float)
    high = np.array([_or_nan(row["ci95"][1]) for row in rows][::-1], dtype=float)
    y = np.arange(len(rows))
    ax.barh(y, rho, color="0.6", edgecolor="black", hatch="..")
    if rows:
        ax.errorbar(
            rho,
            y,
            xerr=[np.nan_to_num(rho - low), np.nan_to_num(high - rho)],
            fmt="none",
            ecolor="black",
            capsize=3,
        )
    ax.set_yticks(y, names)
    ax.axvline(0.0, color="black", linewidth=0.8)
    ax.set_xlim(-1, 1)
    ax.set_xlabel("Spearman rank correlation with the IAE ratio [-]")
    ax.set_title("What drives the feedforward result")
    fig.tight_layout()
    return fig


def margins_figure(margins: dict, values: dict[str, np.ndarray]):
    """Histograms of gain margin, phase margin, delay margin and Ms with common design limits.

    Parameters
    ----------
    margins : dict
        The ``"margins"`` entry of the summary (used for the time unit label).
    values : dict of str to ndarray (n,)
        Per-sample ``gain_margin``, ``phase_margin`` (deg), ``delay_margin``, ``ms``.
    """
    plt = _pyplot()
    panels = (
        ("gain_margin", "gain margin [-]", GAIN_MARGIN_LIMIT),
        ("phase_margin", "phase margin [deg]", PHASE_MARGIN_LIMIT),
        ("delay_margin", f"delay margin [{margins.get('time_unit', 'time')}]", None),
        ("ms", "maximum sensitivity Ms [-]", MS_LIMIT),
    )
    fig, axes = plt.subplots(2, 2, figsize=(8, 5.5))
    for ax, (key, label, limit) in zip(axes.ravel(), panels, strict=True):
        data = np.asarray(values.get(key, []), dtype=float)
        data = data[np.isfinite(data)]
        if data.size:
            ax.hist(data, bins=30, color="0.6", edgecolor="black", linewidth=0.4)
        if limit is not None:
            ax.axvline(
                limit, color="black", linestyle="--", linewidth=1.2, label=f"limit {limit:g}"
            )
            ax.legend(fontsize=7)
        ax.set_xlabel(label)
        ax.set_ylabel("samples [count]")
    fig.suptitle("Feedback stability margins across the samples (limits: common practice)")
    fig.tight_layout()
    return fig


def designs_ratio_figure(result: StudyResult):
    """IAE ratio fbff/fb per feedforward design, side by side on the same plants.

    One horizontal box per design: the box spans P25..P75, the whiskers P5..P95, the thick line
    is the median; right of the dashed line at 1 the design does worse than feedback alone.
    """
    plt = _pyplot()
    arms = result.design_arms()
    fb = result.metrics["iae"][:, 0]
    data, labels = [], []
    for arm in arms:
        ratio = metric_ratio(fb, arm.metrics["iae"])
        data.append(ratio[np.isfinite(ratio)])
        labels.append(f"{arm.name} ({arm.settings.structure}, x{arm.settings.gain_factor:g})")
    fig, ax = plt.subplots(figsize=(8, 0.45 * len(arms) + 1.6))
    positions = np.arange(len(arms))[::-1]
    import matplotlib

    major, minor = (int(part) for part in matplotlib.__version__.split(".")[:2])
    # matplotlib 3.10 renamed vert=False to orientation="horizontal" (vert deprecated in 3.11).
    horizontal = ({"orientation": "horizontal"} if (major, minor) >= (3, 10)
                  else {"vert": False})
    ax.boxplot(data, positions=positions, **horizontal, whis=(5, 95), showfliers=False,
               widths=0.55, patch_artist=True,
               boxprops={"facecolor": "0.8", "edgecolor": "black", "hatch": ".."},
               medianprops={"color": "black", "linewidth": 2.0})
    ax.set_yticks(positions, labels, fontsize=8)
    ax.axvline(1.0, color="black", linewidth=1.3, linestyle="--", label="ratio = 1")
    ax.set_xlabel("IAE ratio, feedback + feedforward / feedback only [-]")
    ax.set_title("IAE ratio per design (box P25-P75, whiskers P5-P95; left of 1: better)")
    ax.legend(fontsize=8, loc="lower right")
    fig.tight_layout()
    return fig


def frequency_figure(result: StudyResult):
    """Error ratio with over without feedforward per frequency: P5-P95 band, P50, P90, nominal,
    one panel per measured disturbance.

    Below 1 feedforward reduces the error at that frequency; the crossover (where P90 reaches 1)
    is marked. From :func:`robustff.study.summary.study_frequencies`.
    """
    plt = _pyplot()
    studies = study_frequencies(result)
    unit = result.case.time_unit
    several = len(studies) > 1
    fig, axes = plt.subplots(len(studies), 1, figsize=(8, 3.8 * len(studies)), squeeze=False)
    for ax, freq in zip(axes[:, 0], studies, strict=True):
        ax.fill_between(freq.omega, freq.bands["p5"], freq.bands["p95"], color="0.8",
                        label="P5-P95 of the plants")
        ax.plot(freq.omega, freq.bands["p50"], "-", color="black", linewidth=1.4, label="median")
        ax.plot(freq.omega, freq.bands["p90"], "--", color="black", linewidth=1.0, label="P90")
        ax.plot(freq.omega, freq.nominal, ":", color="0.3", linewidth=1.2, label="nominal plant")
        ax.axhline(1.0, color="0.4", linewidth=0.8)
        if freq.crossover is not None and freq.crossover < freq.nyquist:
            ax.axvline(freq.crossover, color="black", linewidth=0.8, linestyle="-.",
                       label=f"helps in 90 % of plants below {freq.crossover:.3g} rad/{unit}")
        ax.set_xscale("log")
        ax.set_yscale("log")
        ax.set_xlabel(f"disturbance frequency [rad/{unit}]")
        ax.set_ylabel("error ratio, with / without feedforward [-]")
        title = "Where in frequency feedforward helps (below 1: it reduces the error)"
        ax.set_title(f"{freq.disturbance}: {title}" if several else title,
                     fontsize=10 if several else None)
        ax.legend(fontsize=8, loc="best")
    fig.tight_layout()
    return fig


def save_figure(fig, folder: Path, stem: str) -> list[Path]:
    """Save as PNG and SVG; returns the paths."""
    plt = _pyplot()
    paths = [folder / f"{stem}.png", folder / f"{stem}.svg"]
    fig.savefig(paths[0], dpi=110)
    fig.savefig(paths[1])
    plt.close(fig)
    return paths


FIGURES = ("plot-cv-band", "plot-iae-ratio", "plot-sensitivity", "plot-margins",
           "plot-designs", "plot-frequency")
