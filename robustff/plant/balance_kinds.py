"""The registry of plant kinds built from material and energy balances (``[process] model``)."""

from __future__ import annotations

from robustff.plant.balance_plant import BalancePlant
from robustff.plant.blending_tank import BlendingTank
from robustff.plant.heated_tank import HeatedTank

__all__ = ["BALANCE_KINDS", "balance_kind", "balance_kind_names"]

#: Every balance plant kind by the name a case file gives as ``[process] model``.
BALANCE_KINDS: dict[str, type[BalancePlant]] = {
    kind.KIND: kind for kind in (BlendingTank, HeatedTank)
}


def balance_kind(name: str) -> type[BalancePlant]:
    """The plant class of ``name`` (KeyError when it is not a balance kind)."""
    return BALANCE_KINDS[name]


def balance_kind_names() -> tuple[str, ...]:
    """Names of the balance plant kinds."""
    return tuple(BALANCE_KINDS)
