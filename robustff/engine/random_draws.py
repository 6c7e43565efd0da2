"""Reproducible normal draws for the compiled kernels, one stream per sample.

Each sample's noise comes from its own seed, so a sample's draws do not depend on the thread,
the chunk or the machine that simulates it. The uniform source is splitmix64 (Steele, Lea and
Flood, "Fast splittable pseudorandom number generators", OOPSLA 2014); the normal draws come
from the ziggurat method with 256 strips (Marsaglia and Tsang, "The ziggurat method for
generating random variables", Journal of Statistical Software 5(8), 2000): one 64-bit word
gives the strip (8 bits), the sign (1 bit) and the abscissa (52 bits), and about 99 % of the
draws need nothing more than a comparison and a multiplication, where a Box-Muller pair needs a
logarithm, a square root and a sine and cosine (about five times slower here).
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

__all__ = ["normal_stream", "next_normal", "ziggurat_tables", "STRIPS"]

#: Strips of the ziggurat (a power of two: the strip is the low bits of a draw).
STRIPS = 256
_MANTISSA = 2.0 ** 52


def _strip_edges(r: float, strips: int) -> tuple[float, list[float]]:
    """The common strip area ``v`` and the strips' outer edges from the base edge ``r`` up,
    for f(x) = exp(-x^2 / 2): each strip above the base holds ``v`` (Marsaglia and Tsang,
    2000, section 2)."""
    f = math.exp(-0.5 * r * r)
    v = r * f + math.sqrt(math.pi / 2.0) * math.erfc(r / math.sqrt(2.0))
    edges = [r]
    for _ in range(strips - 2):
        x = edges[-1]
        level = v / x + math.exp(-0.5 * x * x)
        if level >= 1.0:  # the strips reached the top before the last one
            return v, []
        edges.append(math.sqrt(-2.0 * math.log(level)))
    return v, edges


def _top_gap(r: float, strips: int) -> float:
    """The top strip's area less ``v`` (-inf when the strips overflow the top): zero for the
    right base edge, positive for a base edge too far out (strips too thin)."""
    v, edges = _strip_edges(r, strips)
    if not edges:
        return -math.inf
    x1 = edges[-1]
    return x1 * (1.0 - math.exp(-0.5 * x1 * x1)) - v


def ziggurat_tables(strips: int = STRIPS) -> tuple[np.ndarray, np.ndarray, np.ndarray, float]:
    """The ziggurat's tables ``(k, w, f)`` and its base edge ``r``.

    Strip 0 is the base (a rectangle of width ``v / f(r)`` plus the tail beyond ``r``), strip
    ``i >= 1`` the rectangle under f between heights ``f[i]`` (at its outer edge) and
    ``f[i - 1]``; ``w[i]`` turns a 52-bit abscissa into ``x`` and a draw is accepted at once when
    its abscissa is below ``k[i]`` (``x`` inside the strip above). ``r`` is found by bisection so
    that the top strip holds the same area as the others.
    """
    low, high = 2.0, 5.0
    for _ in range(200):
        middle = 0.5 * (low + high)
        if not low < middle < high:  # the bracket is one ulp wide: nothing changes any more
            break
        # A base edge too far out leaves the top strip too much area, and the other way round.
        if _top_gap(middle, strips) > 0.0:
            high = middle
        else:
            low = middle
    r = 0.5 * (low + high)
    v, edges = _strip_edges(r, strips)
    x = [0.0, *reversed(edges)]  # x[i]: outer edge of strip i, x[0] = 0 (the top), x[n-1] = r
    base_width = v / math.exp(-0.5 * r * r)
    k = np.zeros(strips, dtype=np.uint64)
    w = np.empty(strips)
    f = np.empty(strips)
    k[0] = np.uint64(math.floor(r / base_width * _MANTISSA))
    w[0] = base_width / _MANTISSA
    f[0] = 1.0
    for i in range(1, strips):
        w[i] = x[i] / _MANTISSA
        f[i] = math.exp(-0.5 * x[i] * x[i])
        k[i] = np.uint64(math.floor(x[i - 1] / x[i] * _MANTISSA)) if i > 1 else np.uint64(0)
    return k, w, f, r


_K, _W, _F, _R = ziggurat_tables()
_INV_R = 1.0 / _R


@njit(cache=True, nogil=True, inline="always")
def _splitmix64(state: np.uint64) -> tuple[np.uint64, np.uint64]:
    state += np.uint64(0x9E3779B97F4A7C15)
    z = state
    z = (z ^ (z >> np.uint64(30))) * np.uint64(0xBF58476D1CE4E5B9)
    z = (z ^ (z >> np.uint64(27))) * np.uint64(0x94D049BB133111EB)
    return state, z ^ (z >> np.uint64(31))


@njit(cache=True, nogil=True, inline="always")
def normal_stream(seed: np.uint64) -> np.uint64:
    """A new stream: its splitmix64 state."""
    return np.uint64(seed)


@njit(cache=True, nogil=True, inline="always")
def _uniform(state: np.uint64) -> tuple[np.uint64, float]:
    """The next uniform draw in [0, 1)."""
    state, z = _splitmix64(state)
    return state, float(z >> np.uint64(11)) * 2.0 ** -53


@njit(cache=True, nogil=True)
def _slow_draw(state: np.uint64, z: np.uint64) -> tuple[np.uint64, float]:
    """A draw that fell outside its strip's inner rectangle: the wedge test or the tail, then
    fresh words until one is accepted (Marsaglia and Tsang, 2000, the nfix routine)."""
    while True:
        strip = int(z & np.uint64(STRIPS - 1))
        negative = (z >> np.uint64(8)) & np.uint64(1)
        j = z >> np.uint64(12)
        if j < _K[strip]:
            x = float(j) * _W[strip]
            return state, -x if negative else x
        if strip == 0:  # the tail beyond r (Marsaglia, 1964)
            while True:
                state, u1 = _uniform(state)
                state, u2 = _uniform(state)
                xx = -_INV_R * math.log1p(-u1)
                yy = -math.log1p(-u2)
                if yy + yy > xx * xx:
                    return state, -(_R + xx) if negative else _R + xx
        x = float(j) * _W[strip]
        state, u = _uniform(state)
        if _F[strip] + u * (_F[strip - 1] - _F[strip]) < math.exp(-0.5 * x * x):
            return state, -x if negative else x
        state, z = _splitmix64(state)


@njit(cache=True, nogil=True, inline="always")
def next_normal(stream: np.uint64) -> tuple[np.uint64, float]:
    """The next standard normal draw; returns ``(new stream, draw)``."""
    state, z = _splitmix64(stream)
    strip = int(z & np.uint64(STRIPS - 1))
    j = z >> np.uint64(12)
    if j < _K[strip]:
        x = float(j) * _W[strip]
        return state, -x if (z >> np.uint64(8)) & np.uint64(1) else x
    return _slow_draw(state, z)
