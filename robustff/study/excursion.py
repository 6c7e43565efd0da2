"""Operating-point excursions: the same study at growing throughput changes.

How a feedforward design degrades with the size of the operating-point move is the question a
plant built from balances can answer: the case's events on one input are scaled so that the
first one moves it by each fraction of its operating value, and the whole study (every design,
the same plants and noise: same seed) runs once per fraction. Linear designs, whose gains are
the nominal operating point's, drift with the excursion; the balance law need not.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, replace

import numpy as np

from robustff.case import Case, case_to_toml, parse_case
from robustff.errors import CaseError
from robustff.percentile import percentile_with_inf
from robustff.stats.harm import probability_worse
from robustff.study.runner import run_study

__all__ = ["ExcursionRow", "scaled_events", "excursion_study"]


@dataclass(frozen=True)
class ExcursionRow:
    """One design at one excursion.

    Attributes
    ----------
    fraction : float
        The first event's change of the input as a fraction of its operating value (signed as
        in the case), dimensionless.
    change : float
        That change in the input's unit.
    design : str
        ``"case"`` or a ``[[design]]`` name.
    iae_ratio_p50, iae_ratio_p90 : float
        Median and 90th percentile over the plants of IAE with over IAE without feedforward,
        dimensionless (inf where a loop with feedforward is unstable).
    harm : float
        Share of plants where feedforward makes the IAE worse, fraction 0..1.
    harm_high : float
        Upper end of its 95 % Wilson interval, fraction 0..1.
    samples : int
        Plants simulated.
    """

    fraction: float
    change: float
    design: str
    iae_ratio_p50: float
    iae_ratio_p90: float
    harm: float
    harm_high: float
    samples: int


def scaled_events(case: Case, input_name: str, fraction: float) -> tuple[Case, float]:
    """The case with its step and ramp events on ``input_name`` scaled so that the first
    (earliest) moves it by ``fraction`` of its nominal operating value; returns the case and
    that change (in the input's unit). The sign is the first event's; ``fraction`` must be
    > 0. Filtered noise is left as it is.

    Raises
    ------
    CaseError
        If the case has no balance plant, the plant no such input, or no event moves it.
    """
    if case.balance is None:
        raise CaseError("an excursion study needs a plant built from balances ([process] "
                        "model = \"blending-tank\" or \"heated-tank\")")
    plant = case.balance.plant
    if input_name not in plant.DISTURBANCES:
        names = ", ".join(plant.DISTURBANCES)
        raise CaseError(f"--input: a {plant.KIND} has the disturbance inputs {names} "
                        f"(got {input_name!r})")
    steps = ("disturbance-step", "disturbance-ramp")
    moving = sorted((e for e in case.events if e.disturbance == input_name and e.size != 0.0
                     and e.kind in steps), key=lambda e: e.at)
    if not moving:
        raise CaseError(f"--input: no step or ramp event of the case moves {input_name}")
    if not fraction > 0.0:
        raise CaseError(f"--fractions: every fraction must be > 0 (got {fraction:g})")
    operating = plant.parameters()[input_name]
    change = math.copysign(fraction * abs(operating), moving[0].size)
    factor = change / moving[0].size
    events = tuple(replace(e, size=e.size * factor)
                   if e.disturbance == input_name and e.kind in steps else e
                   for e in case.events)
    return replace(case, events=events), change


def _rows(fraction: float, change: float, result) -> list[ExcursionRow]:
    fb = result.metrics["iae"][:, 0]
    rows = []
    for arm in result.design_arms():
        fbff = arm.metrics["iae"]
        with np.errstate(divide="ignore", invalid="ignore"):
            ratio = np.where(fb > 0.0, fbff / fb, np.where(fbff > 0.0, np.inf, 1.0))
        ratio = np.where(np.isnan(fbff) & ~np.isnan(fb), np.inf, ratio)
        finite = ratio[~np.isnan(ratio)]
        harm = probability_worse(fb, fbff)
        rows.append(ExcursionRow(
            fraction, change, arm.name,
            percentile_with_inf(finite, 50.0) if finite.size else math.nan,
            percentile_with_inf(finite, 90.0) if finite.size else math.nan,
            harm.probability, harm.high, int(fb.size)))
    return rows


def excursion_study(case: Case, input_name: str, fractions: Sequence[float], *,
                    samples: int | None = None, seed: int | None = None,
                    jobs: int | None = None,
                    progress: Callable[[int, int], None] | None = None) -> list[ExcursionRow]:
    """Run the study once per excursion fraction; one row per fraction and design.

    Parameters
    ----------
    case : Case
        With a balance plant and at least one event on ``input_name``.
    input_name : str
        A disturbance input of the plant (``"wild_flow"``, ``"process_flow"``, ...).
    fractions : sequence of float
        Excursions as fractions of the input's operating value (0.4 = 40 %), each > 0.
    samples, seed, jobs : int, optional
        As :func:`robustff.study.runner.run_study`; the same seed at every fraction, so the
        plants and noise are the same (common random numbers).
    progress : callable(done, total), optional
        Called after each fraction with counts of fractions.

    Raises
    ------
    CaseError
        As :func:`scaled_events`, or when a scaled case is not valid (a flow stepped to zero
        or below, the steady flow beyond the output range).
    KeyboardInterrupt
        When a study was stopped part-way: an excursion row from part of the plants would
        not compare with the others.
    """
    cases = [scaled_events(case, input_name, fraction) for fraction in fractions]
    rows: list[ExcursionRow] = []
    for done, (fraction, (scaled, change)) in enumerate(zip(fractions, cases, strict=True)):
        # Re-read: the loader's checks (flows above zero at every sampled value) apply.
        try:
            checked = replace(parse_case(case_to_toml(scaled)), source_path=case.source_path)
        except CaseError as exc:
            raise CaseError([f"--fractions {fraction:g}: {line}" for line in exc.problems]
                            ) from None
        result = run_study(checked, samples=samples, seed=seed, jobs=jobs, margins=False)
        if result.partial:  # stopped (Ctrl-C): no table from part of the plants
            raise KeyboardInterrupt
        rows += _rows(fraction, change, result)
        if progress is not None:
            progress(done + 1, len(fractions))
    return rows
