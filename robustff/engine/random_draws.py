"""Reproducible normal draws for the compiled kernels, one stream per sample.

Each sample's noise comes from its own seed, so a sample's draws do not depend on the thread,
the chunk or the machine that simulates it. The uniform source is splitmix64 (Steele, Lea and
Flood, "Fast splittable pseudorandom number generators", OOPSLA 2014); the normal draws are
Box-Muller pairs (Box and Muller, "A note on the generation of random normal deviates", Annals
of Mathematical Statistics 29, 1958), both members used: the second is kept as the stream's
spare, which halves the logarithms, roots and cosines per draw.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

__all__ = ["normal_stream", "next_normal"]


@njit(cache=True, nogil=True, inline="always")
def _splitmix64(state: np.uint64) -> tuple[np.uint64, np.uint64]:
    state += np.uint64(0x9E3779B97F4A7C15)
    z = state
    z = (z ^ (z >> np.uint64(30))) * np.uint64(0xBF58476D1CE4E5B9)
    z = (z ^ (z >> np.uint64(27))) * np.uint64(0x94D049BB133111EB)
    return state, z ^ (z >> np.uint64(31))


@njit(cache=True, nogil=True, inline="always")
def normal_stream(seed: np.uint64) -> tuple[np.uint64, float, bool]:
    """A new stream ``(splitmix64 state, spare draw, whether the spare is unused)``."""
    return np.uint64(seed), 0.0, False


@njit(cache=True, nogil=True, inline="always")
def next_normal(stream: tuple[np.uint64, float, bool]) -> tuple[tuple[np.uint64, float, bool],
                                                                  float]:
    """The next standard normal draw; returns ``(new stream, draw)``."""
    state, spare, has_spare = stream
    if has_spare:
        return (state, 0.0, False), spare
    state, z1 = _splitmix64(state)
    state, z2 = _splitmix64(state)
    u1 = (float(z1 >> np.uint64(11)) + 1.0) * 2.0 ** -53  # in (0, 1]: the logarithm is finite
    u2 = float(z2 >> np.uint64(11)) * 2.0 ** -53
    radius, angle = math.sqrt(-2.0 * math.log(u1)), 2.0 * math.pi * u2
    return (state, radius * math.sin(angle), True), radius * math.cos(angle)
