"""The physical numbers of a batch of sampled balance plants, as the compiled simulation reads
them (one row per sample)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["BalanceBatch", "BALANCE_COLUMNS"]

#: Columns of :attr:`BalanceBatch.rows`: hold-up (kg), pipe hold-up (kg), measurement dead time
#: (time units), the kind's constant, the manipulated input and both disturbance inputs at the
#: sample's operating point, the steady output there, the flow loop's lag and the transmitter
#: time constant of the measured inputs (time units).
BALANCE_COLUMNS: tuple[str, ...] = (
    "holdup", "pipe_holdup", "measurement_dead_time", "constant", "manipulated",
    "disturbance_1", "disturbance_2", "output", "flow_lag", "transmitter_time_constant",
)


@dataclass
class BalanceBatch:
    """Sampled balance plants of one kind.

    Parameters
    ----------
    code : int
        The kind's code (``BalancePlant.CODE``: 0 blending tank, 1 heated tank).
    rows : ndarray, shape (N, 10)
        One row per sample, columns :data:`BALANCE_COLUMNS`.
    """

    code: int
    rows: np.ndarray

    @property
    def size(self) -> int:
        """Number of samples."""
        return int(self.rows.shape[0])

    def subset(self, index: np.ndarray | slice) -> BalanceBatch:
        """The plants selected by ``index``."""
        return BalanceBatch(self.code, np.ascontiguousarray(self.rows[index]))
