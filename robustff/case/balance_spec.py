"""A case's plant built from material and energy balances (``[process] model = ...``)."""

from __future__ import annotations

from dataclasses import dataclass

from robustff.plant.balance_plant import PATH_PROCESS, BalancePlant
from robustff.plant.models import TransferModel

__all__ = ["BalanceSpec"]


@dataclass(frozen=True)
class BalanceSpec:
    """The balance plant of a case and which of its inputs the feedforward measures.

    Parameters
    ----------
    plant : BalancePlant
        Physical parameters and the operating point (nominal values).
    measured : tuple of str
        The plant's disturbance inputs that are measured (seen by the feedforward), in the
        order of ``plant.DISTURBANCES``.
    """

    plant: BalancePlant
    measured: tuple[str, ...]

    @property
    def kind(self) -> str:
        """The case file's ``model`` name."""
        return self.plant.KIND

    @property
    def feedforward_input(self) -> str:
        """The headline input (the case's ``[signals] disturbance``): the first measured one
        (the first disturbance when none is measured)."""
        return (self.measured or self.plant.DISTURBANCES)[0]

    def paths(self) -> dict[str, TransferModel]:
        """The linearisation at the nominal operating point, ``"process"`` and each
        disturbance by name."""
        return self.plant.linear_paths()

    def process_model(self) -> TransferModel:
        """Manipulated input -> measured CV, linearised at the operating point."""
        return self.paths()[PATH_PROCESS]
