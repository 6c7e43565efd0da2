"""The compiled simulation kernel: every sample, both arms, one pass over time.

Each sample runs its own loop over time, so results for a sample do not depend on which other
samples share the call (bit-identical whatever the chunking). Metrics are accumulated while
simulating; trajectories are written only for samples given a slot.

Signal conventions (all deviation variables from the initial steady state):
error ``e = setpoint - CV``; controller output ``u`` limited to ``[u_low, u_high]``.
Per step ``k`` (time ``k h``): measure CV and the disturbance, compute both controllers, update
metrics, then advance the plant over ``[k h, (k+1) h)`` with ``u[k]`` held.

Speed notes (measured, see the module's benchmark): states live in scalar locals (tuples that
LLVM keeps in registers), constants such as ``kc h / ti`` are computed once, delayed inputs come
from power-of-two ring buffers sized by the sample's longest delay (memory independent of the
number of steps), and the stability probe runs inside the main time loop as a third, unlimited
linear chain so that its latency overlaps the two arms. No fast-math: every sample's arithmetic
is the same IEEE sequence whatever the batch.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

from robustff.engine.discretise import block_coefficients, decay, split_delay

__all__ = ["simulate_kernel", "N_ACCUMULATORS", "ACCUMULATOR_NAMES"]

#: Per-arm accumulators written by the kernel, in this order.
ACCUMULATOR_NAMES = (
    "ie", "iae", "ise", "itae", "peak_deviation", "opposite_excursion",
    "settling_time", "valve_travel", "time_at_limit",
)
N_ACCUMULATORS = len(ACCUMULATOR_NAMES)

# Ring rows: controller output of arm 0 and arm 1, probe input, disturbance, measured disturbance.
_RING_ROWS = 5


# Hot helpers take and return scalars and tuples only: an array argument would cost reference
# counting on every call inside the time loop.


@njit(cache=True, nogil=True, inline="always")
def _splitmix64(state: np.uint64) -> tuple[np.uint64, np.uint64]:
    # splitmix64: small, fast and reproducible per sample, independent of thread or chunk.
    state += np.uint64(0x9E3779B97F4A7C15)
    z = state
    z = (z ^ (z >> np.uint64(30))) * np.uint64(0xBF58476D1CE4E5B9)
    z = (z ^ (z >> np.uint64(27))) * np.uint64(0x94D049BB133111EB)
    return state, z ^ (z >> np.uint64(31))


@njit(cache=True, nogil=True, inline="always")
def _random_normal(state: np.uint64) -> tuple[np.uint64, float]:
    """Next standard normal draw (Box-Muller); returns ``(new state, draw)``."""
    state, z1 = _splitmix64(state)
    state, z2 = _splitmix64(state)
    u1 = (float(z1 >> np.uint64(11)) + 1.0) * 2.0 ** -53
    u2 = float(z2 >> np.uint64(11)) * 2.0 ** -53
    return state, math.sqrt(-2.0 * math.log(u1)) * math.cos(2.0 * math.pi * u2)


@njit(cache=True, nogil=True)
def _ring_size(longest_delay: int) -> int:
    # Power of two >= delay + 2: reads of u[k - m - 1] never meet the slot written at step k, and
    # slots not yet written read as zero (the input before the window starts).
    size = 2
    while size < longest_delay + 2:
        size *= 2
    return size


@njit(cache=True, nogil=True)
def _coefficients(kind: int, gain: float, tau1: float, tau2: float, h: float, f: float) -> tuple:
    """:func:`block_coefficients` as a tuple (kept in registers by the compiler)."""
    c = block_coefficients(kind, gain, tau1, tau2, h, f)
    return (c[0], c[1], c[2], c[3], c[4], c[5], c[6], c[7] == 2.0)


@njit(cache=True, nogil=True, inline="always")
def _output(x: tuple, c: tuple) -> float:
    return x[1] if c[7] else x[0]


@njit(cache=True, nogil=True, inline="always")
def _path_step(x: tuple, c: tuple, u_new: float, u_old: float) -> tuple[float, float]:
    """One exact step of a path; ``x = (x1, x2)``, ``c`` from :func:`_coefficients`."""
    first = c[0] * x[0] + c[3] * u_new + c[5] * u_old
    second = x[1]
    if c[7]:
        second = c[1] * x[0] + c[2] * x[1] + c[4] * u_new + c[6] * u_old
    return first, second


@njit(cache=True, nogil=True, inline="always")
def _arm_control(s: tuple, a: tuple, y: float, sp: float, ff: float, first: bool, t: float,
                 weight: float, p: tuple, mp: tuple) -> tuple:
    """Controller and metrics of one live arm at one step; returns ``(u, s, a)``.

    ``s = (integral, derivative state, previous CV, previous output)``;
    ``p = (kc, derivative pole, derivative gain, kc h / ti, h / tt, u_low, u_high, has_d)``;
    ``mp = (h, t_start, band, direction at this step)``; ``weight = max(t - t_start, 0)``;
    ``a`` holds the accumulators, slot 6 the last time outside the band (or -1).
    """
    e = sp - y
    deriv = s[1]
    if p[7]:
        deriv = p[1] * deriv - p[2] * (y - (y if first else s[2]))
    v = p[0] * e + s[0] + deriv + ff
    u = min(max(v, p[5]), p[6])
    integral = s[0] + (p[3] * e + p[4] * (u - v))
    h = mp[0]
    ae = abs(e)
    a = (
        a[0] + e * h, a[1] + ae * h, a[2] + e * e * h, a[3] + weight * ae * h,
        max(a[4], ae), max(a[5], mp[3] * e),
        t if (ae > mp[2] and t >= mp[1]) else a[6],
        a[7] + abs(u - s[3]), a[8] + h if u != v else a[8],
    )
    return u, (integral, deriv, y, u), a


@njit(cache=True, nogil=True, inline="always")
def _probe_control(s: tuple, y: float, k: int, p: tuple, q2: int, q3: int) -> tuple:
    """Stability probe: the linear loop (no limits) after a unit load at the process input.

    ``s = (integral, derivative state, previous CV, max |e| over [T/2, 3T/4), same over
    [3T/4, T), diverged)``; returns ``(u, s)``.
    """
    diverged = s[5] or not math.isfinite(y) or abs(y) > 1e12
    e = -y
    deriv = p[1] * s[1] - p[2] * (y - s[2]) if p[7] else s[1]
    u = p[0] * e + s[0] + deriv
    first, second = s[3], s[4]
    if k >= q3:
        second = max(second, abs(e))
    elif k >= q2:
        first = max(first, abs(e))
    return u, (s[0] + p[3] * e, deriv, y, first, second, diverged)


@njit(cache=True, nogil=True, inline="always")
def _envelope_bin(y: float, grid: tuple) -> int:
    """Histogram bin of ``y``; ``grid = (lowest edge, bin width, number of bins)``."""
    b = int((y - grid[0]) / grid[1])
    return min(max(b, 0), grid[2] - 1)


@njit(cache=True, nogil=True)
def _finish(i: int, arm: int, a: tuple, alive: bool, probe: bool, t_end: float, mp: tuple,
            accumulators: np.ndarray, unstable: np.ndarray) -> None:
    """Write one arm's accumulators (NaN when unstable) and its unstable flag."""
    last_outside = a[6]
    settling = 0.0 if last_outside < 0.0 else min(last_outside + mp[0], t_end) - mp[1]
    for q in range(9):
        value = a[q]
        if q == 6:
            value = settling
        elif q == 5:
            value = max(a[5], 0.0)
        accumulators[i, arm, q] = value if alive and not probe else math.nan
    unstable[i, arm] = probe or not alive


@njit(cache=True, nogil=True)
def _commit_envelope(env_buf: np.ndarray, envelope_counts: np.ndarray, keep: bool) -> None:
    """Add a sample's buffered envelope bins (when it is stable) and clear the buffer."""
    for arm in range(2):
        for point in range(env_buf.shape[1]):
            if keep and env_buf[arm, point] >= 0:
                envelope_counts[arm, point, env_buf[arm, point]] += 1
            env_buf[arm, point] = -1


@njit(cache=True, nogil=True)
def _simulate_sample(
    i: int, kinds: np.ndarray, plant: np.ndarray, seed: np.uint64,
    disturbance_profile: np.ndarray, setpoint_profile: np.ndarray,
    direction_profile: np.ndarray, noise: np.ndarray,
    p: tuple, mp: tuple, ffp: tuple, m_ff: int, limit: float, grid: tuple,
    envelope_index: np.ndarray, slot: int, ring: np.ndarray, env_buf: np.ndarray,
    trajectories: np.ndarray,
) -> tuple:
    """Simulate sample ``i``; returns ``(acc fb, acc fbff, alive fb, alive fbff, unstable)``.

    ``noise`` rows: start step, filter pole, innovation scale, state (updated in place).
    """
    n_steps, h = disturbance_profile.shape[0], mp[0]
    m_p, f_p = split_delay(plant[i, 3], h)
    m_d, f_d = split_delay(plant[i, 7], h)
    m_p, m_d = min(m_p, n_steps), min(m_d, n_steps)  # longer delays only ever read zeros
    cp = _coefficients(kinds[0], plant[i, 0], plant[i, 1], plant[i, 2], h, f_p)
    cd = _coefficients(kinds[1], plant[i, 4], plant[i, 5], plant[i, 6], h, f_d)
    size = _ring_size(max(m_p, m_d, m_ff))
    mask = size - 1
    ring[:_RING_ROWS * size] = 0.0  # rows: u fb, u fbff, probe input, disturbance, measured
    noise[:, 3] = 0.0
    a_sensor = decay(h, plant[i, 8])
    gain_sensor, direct, noise_std = 1.0 - a_sensor, plant[i, 8] <= 0.0, plant[i, 9]
    acc0 = acc1 = (0.0, 0.0, 0.0, 0.0, 0.0, 0.0, -1.0, 0.0, 0.0)
    s0 = s1 = (0.0, 0.0, 0.0, 0.0)
    alive0 = alive1 = True
    x0 = x1 = xq = xd = (0.0, 0.0)
    sq = (0.0, 0.0, 0.0, 0.0, 0.0, False)
    q2, q3 = n_steps // 2, (3 * n_steps) // 4
    sensor = ff_out = ff_in_prev = u0 = u1 = 0.0
    for k in range(n_steps):
        t = k * h
        weight = max(t - mp[1], 0.0)
        mpk = (mp[0], mp[1], mp[2], direction_profile[k])
        d = disturbance_profile[k]
        for j in range(noise.shape[0]):
            if k >= noise[j, 0]:
                d += noise[j, 3]
                seed, draw = _random_normal(seed)
                noise[j, 3] = noise[j, 1] * noise[j, 3] + noise[j, 2] * draw
        measured = d if direct else sensor
        if noise_std > 0.0:
            seed, draw = _random_normal(seed)
            measured += noise_std * draw
        ring[4 * size + (k & mask)] = measured
        ff_in = (ffp[3] * ring[4 * size + ((k - m_ff) & mask)]
                 + ffp[4] * ring[4 * size + ((k - m_ff - 1) & mask)])
        ff_out = ffp[0] * ff_out + ffp[2] * (ff_in - ffp[1] * ff_in_prev)
        ff_in_prev = ff_in
        yd, sp = _output(xd, cd), setpoint_profile[k]
        y0, y1, yq = _output(x0, cp) + yd, _output(x1, cp) + yd, _output(xq, cp)
        alive0 = alive0 and math.isfinite(y0) and not abs(y0) > limit
        alive1 = alive1 and math.isfinite(y1) and not abs(y1) > limit
        if alive0:
            u0, s0, acc0 = _arm_control(s0, acc0, y0, sp, 0.0, k == 0, t, weight, p, mpk)
            ring[k & mask] = u0
            x0 = _path_step(x0, cp, ring[(k - m_p) & mask], ring[(k - m_p - 1) & mask])
        if alive1:
            u1, s1, acc1 = _arm_control(s1, acc1, y1, sp, ff_out, k == 0, t, weight, p, mpk)
            ring[size + (k & mask)] = u1
            x1 = _path_step(x1, cp, ring[size + ((k - m_p) & mask)],
                            ring[size + ((k - m_p - 1) & mask)])
        uq, sq = _probe_control(sq, yq, k, p, q2, q3)
        ring[2 * size + (k & mask)] = uq + 1.0
        xq = _path_step(xq, cp, ring[2 * size + ((k - m_p) & mask)],
                        ring[2 * size + ((k - m_p - 1) & mask)])
        if slot >= 0:
            _record(trajectories, slot, k, alive0, alive1, y0, y1, u0, u1)
        if envelope_index[k] >= 0:
            env_buf[0, envelope_index[k]] = _envelope_bin(y0, grid) if alive0 else -1
            env_buf[1, envelope_index[k]] = _envelope_bin(y1, grid) if alive1 else -1
        ring[3 * size + (k & mask)] = d
        xd = _path_step(xd, cd, ring[3 * size + ((k - m_d) & mask)],
                        ring[3 * size + ((k - m_d - 1) & mask)])
        sensor = a_sensor * sensor + gain_sensor * d
    unstable = sq[5] or (sq[4] > 0.995 * sq[3] and sq[4] > 1e-9)
    return acc0, acc1, alive0, alive1, unstable


@njit(cache=True, nogil=True)
def _record(trajectories: np.ndarray, slot: int, k: int, alive0: bool, alive1: bool,
            y0: float, y1: float, u0: float, u1: float) -> None:
    if alive0:
        trajectories[slot, 0, k], trajectories[slot, 2, k] = y0, u0
    if alive1:
        trajectories[slot, 1, k], trajectories[slot, 3, k] = y1, u1


@njit(cache=True, nogil=True)
def simulate_kernel(
    kinds: np.ndarray,            # (2,) int: process kind, disturbance kind
    plant: np.ndarray,            # (N, 10): Kp, tp1, tp2, thp, Kd, td1, td2, thd, sensor tau,
                                  # noise std
    seeds: np.ndarray,            # (N,) uint64 per-sample random seeds
    h: float,
    disturbance_profile: np.ndarray,  # (T,) deterministic disturbance, disturbance units
    setpoint_profile: np.ndarray,     # (T,) setpoint deviation, CV units
    noise_events: np.ndarray,     # (E, 3): start index, stationary std, filter time constant
    controller: np.ndarray,       # (8,): kc, ti, td, tf, tt, u_low, u_high, divergence limit
    feedforward: np.ndarray,      # (4,): gain, lead, lag, delay
    metric_setup: np.ndarray,     # (4,): event start time, settling band, unused, unused
    direction_profile: np.ndarray,  # (T,): sign of e that counts as an opposite excursion
    envelope_edges: np.ndarray,   # (B+1,) CV bin edges
    envelope_index: np.ndarray,   # (T,) int: envelope time point recorded at step k, or -1
    trajectory_slot: np.ndarray,  # (N,) int, -1 = do not keep
    accumulators: np.ndarray,     # out (N, 2, N_ACCUMULATORS)
    unstable: np.ndarray,         # out (N, 2) bool
    envelope_counts: np.ndarray,  # out (2, P, B) int64, added to
    trajectories: np.ndarray,     # out (S, 4, T): CV fb, CV fbff, output fb, output fbff
) -> None:
    n_steps = disturbance_profile.shape[0]
    kc, ti, td, tf, tt = controller[0], controller[1], controller[2], controller[3], controller[4]
    # The textbook expressions, evaluated once in the same operation order.
    p = (kc, tf / (tf + h), kc * td / (tf + h), kc * h / ti, h / tt, controller[5],
         controller[6], td > 0.0)
    mp = (h, metric_setup[0], metric_setup[1], metric_setup[2])
    n_bins = envelope_edges.shape[0] - 1
    grid = (envelope_edges[0], (envelope_edges[-1] - envelope_edges[0]) / n_bins, n_bins)
    # Matched pole-zero compensator: exact inverse of ZOH first-order paths at the samples.
    ff_pole, ff_zero = decay(h, feedforward[2]), decay(h, feedforward[1])
    ff_gain = feedforward[0]
    ff_scale = ff_gain * (1.0 - ff_pole) / (1.0 - ff_zero) if ff_zero < 1.0 else ff_gain
    m_ff, f_ff = split_delay(feedforward[3], h)
    ffp = (ff_pole, ff_zero, ff_scale, 1.0 - f_ff, f_ff)
    noise = np.zeros((noise_events.shape[0], 4))
    for j in range(noise_events.shape[0]):
        pole = decay(h, noise_events[j, 2])
        noise[j, 0], noise[j, 1] = noise_events[j, 0], pole
        noise[j, 2] = noise_events[j, 1] * math.sqrt(1.0 - pole * pole)
    ring = np.zeros(_RING_ROWS * _ring_size(n_steps))
    env_buf = np.full((2, envelope_counts.shape[1]), -1, dtype=np.int64)
    for i in range(plant.shape[0]):
        acc0, acc1, alive0, alive1, probe = _simulate_sample(
            i, kinds, plant, seeds[i], disturbance_profile, setpoint_profile, direction_profile,
            noise, p, mp,
            ffp, min(m_ff, n_steps), controller[7], grid, envelope_index, trajectory_slot[i],
            ring, env_buf, trajectories)
        _commit_envelope(env_buf, envelope_counts, not probe)
        _finish(i, 0, acc0, alive0, probe, n_steps * h, mp, accumulators, unstable)
        _finish(i, 1, acc1, alive1, probe, n_steps * h, mp, accumulators, unstable)
