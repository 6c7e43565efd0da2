"""What the results pane shows, computed from a finished study (plain Python, no Textual).

Built in the worker thread so the UI thread only formats text. Every verdict carries a word and a
symbol, never colour alone.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Literal

import numpy as np

from robustff.tui.disturbance_view import (
    FrequencyView,
    RecordView,
    compensator_lines,
    frequency_views,
    record_views,
    setpoint_profile,
)

if TYPE_CHECKING:
    from robustff.study import StudyResult
    from robustff.study.summary_types import Arm, Summary

__all__ = ["TABLE_METRICS", "TABLE_PERCENTILES", "MetricRow", "StudyView", "build_view", "verdict"]

#: Metrics in the percentile table, with their short labels.
TABLE_METRICS: dict[str, str] = {
    "iae": "IAE",
    "peak_deviation": "peak dev",
    "valve_travel": "valve trav",
}
#: Percentiles shown in the table (the export has the full set).
TABLE_PERCENTILES: tuple[float, ...] = (5.0, 50.0, 95.0)
#: Relative change of the median below which the arms are called the same.
SAME_BAND = 0.01


@dataclass(frozen=True)
class MetricRow:
    """One metric of the percentile table.

    Attributes
    ----------
    label, unit : str
    fb, fbff : tuple of float
        The :data:`TABLE_PERCENTILES` of each arm (NaN when not available).
    verdict : str
        ``"better"``, ``"worse"`` or ``"same"`` (feedforward arm against feedback only, medians).
    """

    label: str
    unit: str
    fb: tuple[float, ...]
    fbff: tuple[float, ...]
    verdict: str


@dataclass(frozen=True)
class StudyView:
    """Everything the results and picture panes draw.

    Attributes
    ----------
    samples, requested : int
    partial, quick : bool
        ``quick`` marks the first short pass that precedes the full run.
    elapsed : float
        Seconds.
    rows : list of MetricRow
    harm_probability : float or None
        Probability that feedforward makes IAE worse.
    harm_interval : tuple of float
        Its 95 % interval.
    harm_count, harm_n : int
    unstable_fb, unstable_fbff : int
    ratio : ndarray, shape (n,)
        Per-sample IAE ratio fbff / fb (NaN where undefined).
    times : ndarray, shape (P,)
        Envelope times, time units.
    bands : ndarray, shape (2, 3, P)
        CV P5, P50, P95 per arm (arm 0 feedback only), CV units (deviation from the start).
    cv_label, time_unit : str
    margin_lines : list of str
        Feedback stability margins (nominal and P5/P50/P95 over the samples) and warnings.
    driver_lines : list of str
        The uncertain parameters ranked by their rank correlation with the IAE ratio.
    design_lines : list of str
        With several feedforward designs (``[[design]]``): one line each, on the same plants.
    compensator_lines : list of str
        With named disturbances: each one's compensator (designed from the nominal models).
    frequencies : tuple of FrequencyView
        Where in frequency feedforward helps, per measured disturbance.
    records : tuple of RecordView
        The recorded disturbance traces replayed.
    cv_band : float or None
        ``[signals.controlled] band``, CV units (None: not given).
    setpoint : ndarray, shape (P,) or None
        The setpoint at ``times`` as a deviation from its start, CV units.
    """

    samples: int
    requested: int
    partial: bool
    quick: bool
    elapsed: float
    rows: list[MetricRow]
    harm_probability: float | None
    harm_interval: tuple[float, float]
    harm_count: int
    harm_n: int
    unstable_fb: int
    unstable_fbff: int
    ratio: np.ndarray
    times: np.ndarray
    bands: np.ndarray
    cv_label: str
    time_unit: str
    margin_lines: tuple[str, ...] = ()
    driver_lines: tuple[str, ...] = ()
    design_lines: tuple[str, ...] = ()
    compensator_lines: tuple[str, ...] = ()
    frequencies: tuple[FrequencyView, ...] = ()
    records: tuple[RecordView, ...] = ()
    cv_band: float | None = None
    setpoint: np.ndarray | None = None


def verdict(fb: float, fbff: float) -> str:
    """``"better"``/``"worse"``/``"same"`` for a smaller-is-better metric (medians)."""
    if not (np.isfinite(fb) and np.isfinite(fbff)):
        return "same"
    if abs(fbff - fb) <= SAME_BAND * max(abs(fb), 1e-12):
        return "same"
    return "better" if fbff < fb else "worse"


def _row(summary: Summary, metric: str) -> MetricRow:
    # Imported here, like the statistics in build_view: robustff.study loads the simulation
    # engine, which the studio should not pay for before its first run.
    from robustff.study.summary_types import percentile_value

    def values(arm: Arm) -> tuple[float, ...]:
        stats = summary["metrics"][metric][arm]
        found = [percentile_value(stats, p) for p in TABLE_PERCENTILES]
        return tuple(float("nan") if value is None else float(value) for value in found)

    fb, fbff = values("fb"), values("fbff")
    middle = TABLE_PERCENTILES.index(50.0)
    return MetricRow(TABLE_METRICS[metric], summary["units"][metric], fb, fbff,
                     verdict(fb[middle], fbff[middle]))


def _number(value: float | None, digits: str = ".3g") -> str:
    return "n/a" if value is None else format(float(value), digits)


def margin_lines(summary: Summary) -> tuple[str, ...]:
    """Margin percentiles and warnings (limits are common practice, no source)."""
    from robustff.study.summary_types import percentile_value  # see _row

    margins = summary.get("margins")
    if not margins:
        return ()
    nominal = margins["nominal"]
    def spread(name: Literal["gain_margin", "ms"]) -> str:
        return "/".join(_number(percentile_value(margins[name], p)) for p in (5.0, 50.0, 95.0))

    lines = [
        f"Margins nominal (as simulated, {margins['sample_time']:g} "
        f"{margins['units']['delay_margin']} scan): GM {_number(nominal['gain_margin'])}, "
        f"PM {_number(nominal['phase_margin'], '.0f')} deg, Ms {_number(nominal['ms'])}",
        f"  over samples P5/P50/P95: GM {spread('gain_margin')}, Ms {spread('ms')}",
    ]
    ms_above = margins["fraction_below_limits"]["ms_above_2"]
    if ms_above is not None:
        lines.append(f"  Ms > 2 in {100 * ms_above:.1f} % of plants; "
                     f"unstable loops {margins['unstable']}")
    if margins["verdicts_differ"]:
        lines.append(f"  the simulation judged {margins['verdicts_differ']} of them otherwise "
                     "(see margins.note in summary.json)")
    lines += [f"⚠ WARNING: {warning}" for warning in margins.get("nominal_warnings", [])]
    return tuple(lines)


def driver_lines(summary: Summary, rows: int = 3) -> tuple[str, ...]:
    """The top rows of the sensitivity ranking (Spearman rho with the IAE ratio)."""
    ranking = [row for row in summary.get("sensitivity", []) if row.get("rho") is not None]
    if not ranking:
        return ()
    return ("Drives the IAE ratio (Spearman rho):",) + tuple(
        f"  {row['name']}: {row['rho']:+.2f}" for row in ranking[:rows]
    )


def design_lines(summary: Summary) -> tuple[str, ...]:
    """One line per feedforward design when the case has several: the median IAE ratio, the
    probability of harm with its 95 % interval, and how often it does worse than the case's
    own design on the same plant."""
    designs = summary.get("designs", [])
    if len(designs) < 2:
        return ()
    lines = ["Designs on the same plants: P50 IAE ratio, P(harm) [95 %], worse than case"]
    for design in designs:
        ratio = design["ratio"]["iae"].get("p50")
        harm = design["ff_worse"]["iae"]
        low, high = harm["ci95"]
        interval = ("" if low is None or high is None
                    else f" [{100 * low:.1f}-{100 * high:.1f}]")
        worse = design["versus_case"]["worse_than_case"]["probability"]
        versus = ("" if design["name"] == "case" or worse is None
                  else f", {100 * worse:.0f} %")
        probability = None if harm["probability"] is None else 100 * harm["probability"]
        lines.append(f"  {design['name'][:12]:<12} {_number(ratio):>5} "
                     f"{_number(probability, '.1f')} %{interval}{versus}")
    return tuple(lines)


def build_view(result: StudyResult, summary: Summary, quick: bool) -> StudyView:
    """The view of a study.

    Parameters
    ----------
    result : robustff.study.StudyResult
    summary : Summary
        From :func:`robustff.study.summary.summarize_study`.
    quick : bool
        True for the first short pass.
    """
    from robustff.stats import envelope_from_histogram, metric_ratio

    ratio = metric_ratio(result.metrics["iae"][:, 0], result.metrics["iae"][:, 1])
    bands = np.stack([
        envelope_from_histogram(result.envelope_counts[arm], result.envelope.edges, (5, 50, 95))
        for arm in (0, 1)
    ])
    harm = summary["ff_worse"]["iae"]
    # The interval is None only without usable samples (probability None too); NaN keeps the
    # view's tuple of floats.
    low, high = (float("nan") if bound is None else bound for bound in harm["ci95"])
    times = np.asarray(result.envelope.times, dtype=float)
    return StudyView(
        samples=result.samples, requested=result.requested, partial=result.partial, quick=quick,
        elapsed=result.elapsed, rows=[_row(summary, m) for m in TABLE_METRICS],
        harm_probability=harm["probability"], harm_interval=(low, high),
        harm_count=int(harm["count"]), harm_n=int(harm["n"]),
        unstable_fb=summary["unstable"]["fb"], unstable_fbff=summary["unstable"]["fbff"],
        ratio=ratio, times=times, bands=bands,
        cv_label=result.case.signals.controlled.label(), time_unit=result.case.time_unit,
        margin_lines=margin_lines(summary), driver_lines=driver_lines(summary),
        design_lines=design_lines(summary), compensator_lines=compensator_lines(result),
        frequencies=frequency_views(result), records=record_views(result.case),
        cv_band=result.case.signals.controlled.band,
        setpoint=setpoint_profile(result.case, times),
    )
