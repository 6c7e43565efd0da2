"""Which design the robust search recommends: its winner, the nominal design, or neither.

The search minimises its objective (P90, CVaR or the harm probability) and nothing else, so a
winner can lower the P90 of IAE while making IAE worse than feedback alone on more plants. The
verdict therefore judges the winner and the nominal design on the FRESH samples (not the ones
the winner was chosen on) with the rule the report applies to the designs of a study,
:func:`robustff.study.recommendation.judge_design`, and the case's ``[recommendation]``
criteria: the upper end of the 95 % Wilson interval of the harm probability at most
``max_harm``, the median IAE improvement ``1 - P50(IAE fbff / IAE fb)`` at least
``min_improvement``, no sample unstable with feedforward that is stable without it.

Then, in this order:

1. the winner, when it passes and its objective improvement over the nominal design is clear of
   Monte Carlo noise (the lower end of the 90 % paired-bootstrap interval is above zero);
2. the nominal design, when it passes;
3. the winner, when it passes and the nominal design does not (the criteria, not the
   objective, tell them apart);
4. neither: the verdict says which criterion each design missed, in numbers.

Samples unstable with feedback alone were left out of both sample sets (no feedforward changes
them), so "unstable" here counts samples unstable with feedforward only.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from robustff.case import RecommendationSpec
from robustff.design.tuning import FeedforwardSettings
from robustff.jsonvalues import json_float
from robustff.stats import paired_comparison, probability_worse
from robustff.study.recommendation import judge_design, percent
from robustff.study.summary_types import DesignVerdict, HarmEstimateDict, MetricStats

__all__ = ["TuneVerdict", "RECOMMENDED_CHOICES", "judge_fresh", "tune_verdict", "DESIGN_WORDS"]

#: Values of :attr:`TuneVerdict.recommended`.
RECOMMENDED_CHOICES = ("robust", "nominal", "none")
#: The two judged designs in words (the names of ``robustff tune``'s table).
DESIGN_WORDS = {"robust": "robust optimum", "nominal": "nominal design"}


@dataclass(frozen=True)
class TuneVerdict:
    """The recommendation of a robust search and why.

    Attributes
    ----------
    recommended : {"robust", "nominal", "none"}
    reason : str
        One paragraph, every figure with its unit: the decision, the criteria, each design's
        harm probability (count, 95 % interval) and median improvement against them, and
        whether the winner is clear of Monte Carlo noise (``robustff tune``'s printout).
    brief : str
        The same verdict without the per-design figures, for a screen that shows them in a
        table beside it (the studio's robust dialog): decision, criteria, what each failing
        design misses, Monte Carlo noise.
    criteria : RecommendationSpec
        The criteria applied (the case's ``[recommendation]``).
    designs : dict of str to DesignVerdict
        ``"robust"`` and ``"nominal"``, judged on the fresh samples (fractions 0..1).
    clear : bool
        Whether the winner's objective improvement is clear of Monte Carlo noise.
    """

    recommended: str
    reason: str
    brief: str
    criteria: RecommendationSpec
    designs: dict[str, DesignVerdict]
    clear: bool

    def to_dict(self) -> dict:
        """JSON-friendly: ``recommended``, ``reason``, ``criteria``, ``clear``, ``designs``."""
        return {
            "recommended": self.recommended,
            "reason": self.reason,
            "brief": self.brief,
            "criteria": {"max_harm": self.criteria.max_harm,
                         "min_improvement": self.criteria.min_improvement},
            "clear_of_noise": self.clear,
            "designs": {name: {key: (json_float(value) if isinstance(value, float) else value)
                               for key, value in verdict.items()}
                        for name, verdict in self.designs.items()},
        }


def judge_fresh(name: str, settings: FeedforwardSettings, iae_fb: np.ndarray,
                iae_fbff: np.ndarray, criteria: RecommendationSpec) -> DesignVerdict:
    """One design judged on one sample set (the report's rule).

    Parameters
    ----------
    name : str
        ``"robust"`` or ``"nominal"``.
    settings : FeedforwardSettings
    iae_fb, iae_fbff : ndarray, shape (n,)
        IAE without and with the design's feedforward on the same plants; ``inf`` marks a
        sample unstable with feedforward (samples unstable with feedback alone left out).
    criteria : RecommendationSpec
    """
    harm = probability_worse(iae_fb, iae_fbff).to_dict()
    ratio = paired_comparison(iae_fb, iae_fbff, (50.0, 90.0))["ratio_summary"].to_dict()
    unstable = int(np.sum(~np.isfinite(iae_fbff)))
    return judge_design(name, settings.structure, settings.gain_factor,
                        _typed_harm(harm), _typed_ratio(ratio), unstable, 0, criteria)


def _typed_harm(value: dict) -> HarmEstimateDict:
    return value  # type: ignore[return-value]  # HarmEstimate.to_dict has this shape


def _typed_ratio(value: dict) -> MetricStats:
    return value  # type: ignore[return-value]  # MetricSummary.to_dict has this shape


def _figures(verdict: DesignVerdict) -> str:
    """P(harm) with its interval and the median improvement of one design, in words."""
    probability, (low, high) = verdict["harm_probability"], verdict["harm_ci95"]
    if probability is None or low is None or high is None:
        harm = "P(harm) not available"
    else:
        harm = (f"P(harm) {percent(probability)} ({verdict['harm_count']} of "
                f"{verdict['harm_n']} plants, 95 % interval {percent(low)} to {percent(high)})")
    improvement = verdict["improvement_p50"]
    gain = ("median IAE improvement not available" if improvement is None
            else f"median IAE improvement {percent(improvement)}")
    return f"{harm}, {gain}"


def _judged(name: str, verdict: DesignVerdict) -> str:
    if verdict["passes"]:
        return f"the {DESIGN_WORDS[name]} meets them: {_figures(verdict)}"
    return (f"the {DESIGN_WORDS[name]} misses them ({'; '.join(verdict['reasons'])}): "
            f"{_figures(verdict)}")


def tune_verdict(robust: DesignVerdict, nominal: DesignVerdict, criteria: RecommendationSpec,
                 interval: tuple[float, float], interval_text: str,
                 same: bool = False) -> TuneVerdict:
    """Decide between the winner and the nominal design (the order of the module docstring).

    Parameters
    ----------
    robust, nominal : DesignVerdict
        From :func:`judge_fresh` on the fresh samples.
    criteria : RecommendationSpec
    interval : (float, float)
        90 % paired-bootstrap interval of objective(nominal) - objective(robust).
    interval_text : str
        That interval in words with its unit (e.g. ``"0.12 to 0.31 degC*s"``).
    same : bool
        The search's winner is the nominal design itself.

    Returns
    -------
    TuneVerdict
        Its reason: the decision, the criteria, each design's figures against them, and whether
        the winner's objective improvement is clear of Monte Carlo noise.
    """
    clear = bool(interval[0] > 0.0) and not same
    if robust["passes"] and clear:
        recommended, headline = "robust", "Recommended: the robust optimum"
    elif nominal["passes"]:
        recommended, headline = "nominal", "Recommended: keep the nominal design"
    elif robust["passes"]:
        recommended, headline = "robust", "Recommended: the robust optimum"
    else:
        recommended = "none"
        headline = "Not recommended: neither design meets the criteria"
    rule = (f"Criteria, on the fresh samples: upper 95 % bound of P(harm) at most "
            f"{percent(criteria.max_harm)}, median IAE improvement at least "
            f"{percent(criteria.min_improvement)}")
    order = ("nominal", "robust") if recommended == "nominal" else ("robust", "nominal")
    designs = {"robust": robust, "nominal": nominal}
    judged = "; ".join(_judged(name, designs[name]) for name in order)
    if same:
        noise = "The search ended at the nominal design"
    else:
        noise = (f"The robust optimum's objective improvement over the nominal design (90 % "
                 f"bootstrap interval {interval_text}) is "
                 f"{'clear of' if clear else 'within'} Monte Carlo noise")
    reason = f"{headline}. {rule}. {judged[0].upper()}{judged[1:]}. {noise}."
    return TuneVerdict(recommended, reason, _brief(headline, designs, order, criteria, noise),
                       criteria, designs, clear)


def _brief(headline: str, designs: dict[str, DesignVerdict], order: tuple[str, str],
           criteria: RecommendationSpec, noise: str) -> str:
    """Decision, criteria, what each failing design misses (once when both miss the same)."""
    rule = (f"upper 95 % bound of P(harm) at most {percent(criteria.max_harm)}, median IAE "
            f"improvement at least {percent(criteria.min_improvement)}, on the fresh samples")
    misses: list[str] = []
    previous: list[str] | None = None
    for name in order:
        reasons = designs[name]["reasons"]
        if not reasons:
            continue
        words = DESIGN_WORDS[name]
        text = "the same" if reasons == previous else "; ".join(reasons)
        misses.append(f"{words[0].upper()}{words[1:]}: {text}.")
        previous = reasons
    return " ".join([f"{headline} (criteria: {rule}).", *misses, f"{noise}."])
