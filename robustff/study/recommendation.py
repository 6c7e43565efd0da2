"""Which feedforward design, if any, a study recommends, and why: a judgement on the summary.

A design passes when all three hold (the case's ``[recommendation]`` sets the two numbers;
the defaults are common practice, not a standard):

1. the upper end of the 95 % (Wilson) interval of the probability that it makes the IAE worse
   than feedback alone is at most ``max_harm`` (the harm is rare with 95 % confidence);
2. its median IAE improvement ``1 - P50(IAE fbff / IAE fb)`` is at least ``min_improvement``;
3. it has no more unstable samples than feedback alone.

Of the passing designs the one with the largest median improvement is recommended (ties: the
smaller harm bound). A design without feedforward (structure ``none``) is never recommended.
"""

from __future__ import annotations

import math

from robustff.case import RecommendationSpec
from robustff.study.summary_types import (
    Criteria,
    DesignSummary,
    DesignVerdict,
    Driver,
    HarmEstimateDict,
    MetricStats,
    RecommendationDict,
    Summary,
    percentile_value,
)

__all__ = ["recommend", "judge_design", "samples_for_bound", "percent", "CRITERIA_BASIS_DEFAULT",
           "CRITERIA_BASIS_CASE"]

CRITERIA_BASIS_DEFAULT = "defaults: common practice, not a standard"
CRITERIA_BASIS_CASE = "set in the case's [recommendation]"
_DRIVERS = 3
#: Two-sided 95 % normal quantile (the Wilson interval's z).
_Z95 = 1.959963984540054


def samples_for_bound(max_harm: float, z: float = _Z95) -> int:
    """Samples without any harm for the upper Wilson bound ``z^2 / (n + z^2)`` to reach
    ``max_harm`` (fraction, 0 < max_harm < 1): ``n = ceil(z^2 (1 - max_harm) / max_harm)``."""
    return int(math.ceil(z * z * (1.0 - max_harm) / max_harm - 1e-9))


def percent(value: float) -> str:
    """A fraction as a percentage with one decimal (``0.0123`` -> ``1.2 %``)."""
    return f"{100 * value:.1f} %"


def _verdict(
    design: DesignSummary, criteria: RecommendationSpec, fb_unstable: int
) -> DesignVerdict:
    return judge_design(
        design["name"], str(design["feedforward"]["structure"]),
        float(design["feedforward"]["gain_factor"]), design["ff_worse"]["iae"],
        design["ratio"]["iae"], design["unstable"], fb_unstable, criteria)


def judge_design(
    name: str, structure: str, gain_factor: float, harm: HarmEstimateDict, ratio: MetricStats,
    unstable: int, fb_unstable: int, criteria: RecommendationSpec,
) -> DesignVerdict:
    """One design judged against the criteria (the rule of this module's docstring).

    Used for the designs of a study and for the designs of the robust search
    (:mod:`robustff.tune.verdict`), so both apply one rule.

    Parameters
    ----------
    name, structure : str
        The design's name and its feedforward structure (``"none"`` never passes).
    gain_factor : float
        Its feedforward gain factor (fraction of the model-based gain).
    harm : HarmEstimateDict
        ``probability_worse(iae_fb, iae_fbff).to_dict()`` (Wilson interval).
    ratio : MetricStats
        Summary of the IAE ratio fbff / fb with ``p50`` (and ``p50_ci95``, ``p90`` if reported).
    unstable, fb_unstable : int
        Samples unstable with this design and with feedback alone.
    criteria : RecommendationSpec
        Fractions 0..1.
    """
    p50 = percentile_value(ratio, 50.0)
    p90 = percentile_value(ratio, 90.0)
    interval = ratio.get("p50_ci95")
    low = high = None
    if isinstance(interval, list) and None not in interval:
        low, high = 1.0 - float(interval[1]), 1.0 - float(interval[0])
    improvement = None if p50 is None else 1.0 - p50
    harm_high = harm["ci95"][1]
    reasons: list[str] = []
    if structure == "none":
        reasons.append("no feedforward (structure none)")
    if harm["probability"] is None or harm_high is None:
        reasons.append("harm probability not available (no usable sample)")
    elif harm_high > criteria.max_harm:
        text = (f"harm bound {percent(harm_high)} > {percent(criteria.max_harm)} (upper "
                "95 % bound)")
        if harm["count"] == 0 and criteria.max_harm > 0:
            text += (f"; none worse of {harm['n']}: about {samples_for_bound(criteria.max_harm)} "
                     "harm-free samples would pass")
        reasons.append(text)
    if improvement is None:
        reasons.append("median IAE ratio not reported (add 50 to --percentiles)")
    elif improvement < criteria.min_improvement:
        reasons.append(f"median IAE improvement {percent(improvement)} < "
                       f"{percent(criteria.min_improvement)}")
    if unstable > fb_unstable:
        reasons.append(f"{unstable} unstable samples against {fb_unstable} with "
                       "feedback alone")
    return {
        "name": name,
        "structure": structure,
        "gain_factor": float(gain_factor),
        "passes": not reasons,
        "harm_probability": harm["probability"],
        "harm_ci95": [harm["ci95"][0], harm_high],
        "harm_count": harm["count"],
        "harm_n": harm["n"],
        "improvement_p50": improvement,
        "improvement_p50_ci95": [low, high],
        "improvement_p90": None if p90 is None else 1.0 - p90,
        "unstable": unstable,
        "reasons": reasons,
    }


def _drivers(summary: Summary) -> list[Driver]:
    rows = [row for row in summary["sensitivity"] if row.get("rho") is not None]
    rows.sort(key=lambda row: -abs(float(row["rho"])))  # type: ignore[arg-type]
    return [{"name": row["name"], "rho": row["rho"], "ci95": row["ci95"],
             "rho_harm": row["rho_harm"]} for row in rows[:_DRIVERS]]


def _conditions(summary: Summary, chosen: DesignVerdict | None) -> list[str]:
    conditions = [
        "the plant stays within the uncertainty ranges of the case (table 'Uncertainty') and "
        "the disturbances are those of the events simulated",
        "the controller runs as tuned in the case (settings in 'Controller'), at the scan "
        "period simulated",
    ]
    if summary["partial"]:
        conditions.append(f"the run was interrupted: {summary['samples']} of "
                          f"{summary['requested']} samples; rerun in full before relying on it")
    convergence = summary["convergence"]["ff_worse_iae"]
    if not convergence["enough"]:
        conditions.append(f"more samples are needed: {convergence['message']}")
    if chosen is not None and chosen["gain_factor"] != 1.0:
        conditions.append(f"the feedforward gain is detuned to {chosen['gain_factor']:g} of the "
                          "model-based gain, as simulated")
    conditions += [f"warning: {warning}" for warning in summary["warnings"]]
    return conditions


def recommend(summary: Summary, criteria: RecommendationSpec) -> RecommendationDict:
    """The recommendation for a study.

    Parameters
    ----------
    summary : Summary
        Needs ``designs`` (the case's own first), ``unstable``, ``sensitivity``,
        ``convergence``, ``partial``, ``samples``, ``requested`` and ``warnings``.
    criteria : RecommendationSpec
        Fractions 0..1.

    Returns
    -------
    RecommendationDict
        ``design`` is the recommended design's name, or None.
    """
    fb_unstable = summary["unstable"]["fb"]
    verdicts = [_verdict(design, criteria, fb_unstable) for design in summary["designs"]]
    passing = [v for v in verdicts if v["passes"]]
    passing.sort(key=lambda v: (-float(v["improvement_p50"] or 0.0),  # passing: never None
                                float(v["harm_ci95"][1] or 0.0)))
    chosen = passing[0] if passing else None
    basis = (CRITERIA_BASIS_DEFAULT if criteria == RecommendationSpec()
             else CRITERIA_BASIS_CASE)
    rule: Criteria = {"max_harm": criteria.max_harm,
                      "min_improvement": criteria.min_improvement, "basis": basis}
    if chosen is None:
        grouped: dict[str, list[str]] = {}  # the same shortfall once, with every design it hits
        for v in verdicts:
            grouped.setdefault(", ".join(v["reasons"]), []).append(v["name"])
        reason = "No design meets the criteria: " + "; ".join(
            f"{', '.join(names)}: {text}" for text, names in grouped.items())
    else:
        low, high = chosen["harm_ci95"]
        reason = (
            f"Design {chosen['name']} ({chosen['structure']}, gain factor "
            f"{chosen['gain_factor']:g}) meets the criteria with the largest median IAE "
            f"improvement, {percent(float(chosen['improvement_p50'] or 0.0))}; it makes the IAE "
            f"worse in {percent(float(chosen['harm_probability'] or 0.0))} of the plants "
            f"(95 % interval {percent(float(low or 0.0))} to {percent(float(high or 0.0))})"
        )
        if len(passing) > 1:
            reason += f"; {len(passing) - 1} other design(s) also pass"
    return {
        "design": None if chosen is None else chosen["name"],
        "reason": reason,
        "criteria": rule,
        "designs": verdicts,
        "drivers": _drivers(summary),
        "conditions": _conditions(summary, chosen),
    }
