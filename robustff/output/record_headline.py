"""The headline of a study over a recorded disturbance trace, for the plant manager.

Over a long recorded window one event's IAE means little; what the engineer reports is how
much feedforward narrows the controlled variable's spread and the time outside its allowed
band, e.g. "over this record, feedforward cuts the outlet temperature's standard deviation from
0.80 to 0.31 degC (P90 of plants 0.45) and the time outside +-0.5 degC from 12 % to 1.5 %".
"""

from __future__ import annotations

from robustff.case import Case
from robustff.study.summary_types import Summary, percentile_value

__all__ = ["record_headline"]


def _median_and_p90(summary: Summary, metric: str) -> tuple[float, float, float] | None:
    """P50 without, P50 with and P90 with feedforward; None when not reported or not finite."""
    stats = summary["metrics"][metric]
    values = (percentile_value(stats["fb"], 50.0), percentile_value(stats["fbff"], 50.0),
              percentile_value(stats["fbff"], 90.0))
    if any(value is None or value != value for value in values):
        return None
    return values  # type: ignore[return-value]


def record_headline(summary: Summary, case: Case) -> str | None:
    """One sentence on the CV's standard deviation and time outside the band over the record.

    Parameters
    ----------
    summary : Summary
        Must report the 50th and 90th percentiles (the default percentiles do).
    case : Case

    Returns
    -------
    str or None
        None when the case replays no record or the percentiles are not reported.
    """
    if not any(event.record is not None for event in case.events):
        return None
    spread = _median_and_p90(summary, "cv_std")
    if spread is None:
        return None
    cv = case.signals.controlled
    unit = summary["units"]["cv_std"]
    text = (f"Over this record, feedforward changes the {cv.name}'s standard deviation from "
            f"{spread[0]:.3g} to {spread[1]:.3g} {unit} (medians over the plants; P90 of "
            f"plants with feedforward {spread[2]:.3g} {unit})")
    outside = _median_and_p90(summary, "outside_band") if cv.band is not None else None
    if outside is not None:
        text += (f" and the time outside +-{cv.band:g} {cv.unit} from {outside[0]:.3g} % to "
                 f"{outside[1]:.3g} % (P90 {outside[2]:.3g} %)")
    return text
