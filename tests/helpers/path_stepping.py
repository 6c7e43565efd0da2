"""Test helper: one discretised path stepped by hand from the engine's block coefficients.

Shared by the discretisation and the model-kind contract tests (not a test module itself).
"""

from __future__ import annotations

import numpy as np

from robustff.engine.discretise import block_coefficients, split_delay
from robustff.plant.models import KIND_CODES


def step_path(kind: str, gain: float, tau1: float, tau2: float, dead_time: float, h: float,
              u: np.ndarray) -> np.ndarray:
    """Output of one path at the sample instants for a held input sequence ``u`` (from rest)."""
    m, f = split_delay(dead_time, h)
    c = block_coefficients(KIND_CODES[kind], gain, tau1, tau2, h, f)
    x1 = x2 = 0.0
    out = np.empty(u.size)
    for k in range(u.size):
        out[k] = x2 if c[7] == 2.0 else x1
        u_new = u[k - m] if k - m >= 0 else 0.0
        u_old = u[k - m - 1] if k - m - 1 >= 0 else 0.0
        x1, x2 = (c[0] * x1 + c[3] * u_new + c[5] * u_old,
                  c[1] * x1 + c[2] * x2 + c[4] * u_new + c[6] * u_old)
    return out
