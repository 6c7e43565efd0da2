"""Which disturbance's model uncertainty drives the risk, from the sensitivity ranking.

The ranking (:mod:`robustff.stats.sensitivity`) correlates each uncertain parameter with the
IAE ratio; with several disturbances the engineer also asks which disturbance matters. Each
disturbance is credited with the strongest rank correlation among its own parameters (its path
and its transmitter; for a plant built from balances, the input's operating value): the
parameter a better model or a better test of that disturbance would pin down.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass

from robustff.case import Case

__all__ = ["DisturbanceDriver", "disturbance_drivers", "driver_sentence"]


@dataclass(frozen=True)
class DisturbanceDriver:
    """One disturbance's strongest uncertain parameter.

    Attributes
    ----------
    disturbance : str
        Its name.
    key : str or None
        The parameter with the largest ``|rho|`` among its own; None when none is uncertain.
    rho : float or None
        That parameter's Spearman rank correlation with the IAE ratio, dimensionless.
    """

    disturbance: str
    key: str | None
    rho: float | None


def disturbance_drivers(case: Case, ranking: Sequence[Mapping[str, object]]
                        ) -> list[DisturbanceDriver]:
    """Every disturbance with its strongest parameter, the strongest disturbance first.

    Parameters
    ----------
    case : Case
    ranking : sequence of mapping
        ``summary.json``'s ``sensitivity`` rows (``name``, ``rho``).
    """
    best: dict[str, tuple[str, float]] = {}
    for row in ranking:
        rho = row.get("rho")
        if not isinstance(rho, float | int):
            continue
        _, item, _ = case.split_key(str(row["name"]))
        if item is None and case.balance is not None:
            # A plant built from balances: an input's own parameter is its operating value.
            item = next((i for i in case.disturbance_inputs
                         if row["name"] == f"process.{i.name}"), None)
        if item is None:
            continue
        if item.label not in best or abs(rho) > abs(best[item.label][1]):
            best[item.label] = (str(row["name"]), float(rho))
    drivers = [DisturbanceDriver(item.label, *best.get(item.label, (None, None)))
               for item in case.disturbance_inputs]
    return sorted(drivers, key=lambda d: -abs(d.rho) if d.rho is not None else 1.0)


def driver_sentence(drivers: Sequence[Mapping[str, object]]) -> str | None:
    """One line for the console and the report from ``summary.json``'s
    ``sensitivity_by_disturbance``; None with a single disturbance."""
    if len(drivers) < 2:
        return None
    parts = [f"{d['disturbance']} {float(d['rho']):+.2f} ({d['parameter']})"  # type: ignore[arg-type]
             if d["parameter"] is not None
             else f"{d['disturbance']}: none of its parameters is uncertain" for d in drivers]
    return ("By disturbance, the strongest rank correlation of its own parameters with the "
            "IAE ratio: " + "; ".join(parts))
