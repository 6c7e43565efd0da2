"""The compiled simulation kernel: every sample, both arms, one pass over time.

Each sample runs its own loop over time, so results for a sample do not depend on which other
samples share the call (bit-identical whatever the chunking). Metrics are accumulated while
simulating; trajectories are written only for samples given a slot.

Signal conventions (all deviation variables from the initial steady state):
error ``e = setpoint - CV``; controller output ``u`` limited to ``[u_low, u_high]``.
Per step ``k`` (time ``k h``): measure CV and the disturbance, compute both controllers, update
metrics, then advance the plant over ``[k h, (k+1) h)`` with ``u[k]`` held.
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


@njit(cache=True, nogil=True)
def _random_u64(state: np.ndarray) -> np.uint64:
    # splitmix64: small, fast and reproducible per sample, independent of thread or chunk.
    state[0] += np.uint64(0x9E3779B97F4A7C15)
    z = state[0]
    z = (z ^ (z >> np.uint64(30))) * np.uint64(0xBF58476D1CE4E5B9)
    z = (z ^ (z >> np.uint64(27))) * np.uint64(0x94D049BB133111EB)
    return z ^ (z >> np.uint64(31))


@njit(cache=True, nogil=True)
def _random_normal(state: np.ndarray) -> float:
    u1 = (float(_random_u64(state) >> np.uint64(11)) + 1.0) * 2.0 ** -53
    u2 = float(_random_u64(state) >> np.uint64(11)) * 2.0 ** -53
    return math.sqrt(-2.0 * math.log(u1)) * math.cos(2.0 * math.pi * u2)


@njit(cache=True, nogil=True)
def _advance(c: np.ndarray, x: np.ndarray, at: int, u_new: float, u_old: float) -> None:
    # x[at], x[at + 1] are the two states of one path (flat storage avoids array views).
    x1 = x[at]
    x[at] = c[0] * x1 + c[3] * u_new + c[5] * u_old
    if c[7] == 2.0:
        x[at + 1] = c[1] * x1 + c[2] * x[at + 1] + c[4] * u_new + c[6] * u_old


@njit(cache=True, nogil=True)
def _output(c: np.ndarray, x: np.ndarray, at: int) -> float:
    return x[at + 1] if c[7] == 2.0 else x[at]


@njit(cache=True, nogil=True)
def _delayed_at(history: np.ndarray, at: int, k: int, m: int) -> float:
    if k - m < 0:
        return 0.0
    return history[at + k - m]


@njit(cache=True, nogil=True)
def _delayed(history: np.ndarray, k: int, m: int) -> float:
    # history[k] is the input at step k (a full-length line: cheaper than a ring's modulo).
    if k - m < 0:
        return 0.0
    return history[k - m]


@njit(cache=True, nogil=True)
def _probe_unstable(c: np.ndarray, m: int, kc: float, ti: float, td: float, tf: float,
                    h: float, n_steps: int) -> bool:
    """Linear loop (no limits) after a unit load at the process input: does the error fail to decay?"""
    x = np.zeros(2)
    hist = np.zeros(n_steps)
    integral = 0.0
    deriv = 0.0
    y_prev = 0.0
    first_half = 0.0
    second_half = 0.0
    q2 = n_steps // 2
    q3 = (3 * n_steps) // 4
    for k in range(n_steps):
        y = _output(c, x, 0)
        if not math.isfinite(y) or abs(y) > 1e12:
            return True
        e = -y
        if td > 0.0:
            deriv = tf / (tf + h) * deriv - kc * td / (tf + h) * (y - y_prev)
        u = kc * e + integral + deriv
        integral += kc * h / ti * e
        y_prev = y
        if k >= q3:
            second_half = max(second_half, abs(e))
        elif k >= q2:
            first_half = max(first_half, abs(e))
        hist[k] = u + 1.0
        _advance(c, x, 0, _delayed(hist, k, m), _delayed(hist, k, m + 1))
    return second_half > 0.995 * first_half and second_half > 1e-9


@njit(cache=True, nogil=True)
def simulate_kernel(
    kinds: np.ndarray,            # (2,) int: process kind, disturbance kind
    plant: np.ndarray,            # (N, 10): Kp, tp1, tp2, thp, Kd, td1, td2, thd, sensor tau, noise std
    seeds: np.ndarray,            # (N,) uint64 per-sample random seeds
    h: float,
    disturbance_profile: np.ndarray,  # (T,) deterministic disturbance, disturbance units
    setpoint_profile: np.ndarray,     # (T,) setpoint deviation, CV units
    noise_events: np.ndarray,     # (E, 3): start index, stationary std, filter time constant
    controller: np.ndarray,       # (8,): kc, ti, td, tf, tt, u_low, u_high, divergence limit
    feedforward: np.ndarray,      # (4,): gain, lead, lag, delay
    metric_setup: np.ndarray,     # (4,): event start time, settling band, direction, unused
    envelope_edges: np.ndarray,   # (B+1,) CV bin edges
    envelope_index: np.ndarray,   # (T,) int: envelope time point recorded at step k, or -1
    trajectory_slot: np.ndarray,  # (N,) int, -1 = do not keep
    accumulators: np.ndarray,     # out (N, 2, N_ACCUMULATORS)
    unstable: np.ndarray,         # out (N, 2) bool
    envelope_counts: np.ndarray,  # out (2, P, B) int64, added to
    trajectories: np.ndarray,     # out (S, 4, T): CV fb, CV fbff, output fb, output fbff
) -> None:
    n_samples = plant.shape[0]
    n_steps = disturbance_profile.shape[0]
    kc, ti, td, tf, tt = controller[0], controller[1], controller[2], controller[3], controller[4]
    u_low, u_high, limit = controller[5], controller[6], controller[7]
    ff_gain, ff_lead, ff_lag, ff_delay = feedforward[0], feedforward[1], feedforward[2], feedforward[3]
    t_start, band, direction = metric_setup[0], metric_setup[1], metric_setup[2]
    n_bins = envelope_edges.shape[0] - 1
    bin_low = envelope_edges[0]
    bin_width = (envelope_edges[-1] - envelope_edges[0]) / n_bins
    # Matched pole-zero compensator: exact inverse of ZOH first-order paths at the samples.
    ff_pole = decay(h, ff_lag)
    ff_zero = decay(h, ff_lead)
    ff_scale = ff_gain * (1.0 - ff_pole) / (1.0 - ff_zero) if ff_zero < 1.0 else ff_gain
    m_ff, f_ff = split_delay(ff_delay, h)
    n_noise = noise_events.shape[0]
    for i in range(n_samples):
        m_p, f_p = split_delay(plant[i, 3], h)
        m_d, f_d = split_delay(plant[i, 7], h)
        cp = block_coefficients(kinds[0], plant[i, 0], plant[i, 1], plant[i, 2], h, f_p)
        cd = block_coefficients(kinds[1], plant[i, 4], plant[i, 5], plant[i, 6], h, f_d)
        probe = _probe_unstable(cp, m_p, kc, ti, td, tf, h, n_steps)
        a_sensor = decay(h, plant[i, 8])
        noise_std = plant[i, 9]
        rng = np.empty(1, dtype=np.uint64)
        rng[0] = seeds[i]
        xp = np.zeros(4)
        xd = np.zeros(2)
        u_hist = np.zeros(2 * n_steps)
        d_hist = np.zeros(n_steps)
        v_hist = np.zeros(n_steps)
        noise_state = np.zeros(max(n_noise, 1))
        integral = np.zeros(2)
        deriv = np.zeros(2)
        y_prev = np.zeros(2)
        u_prev = np.zeros(2)
        acc = np.zeros((2, 9))
        last_outside = np.full(2, -1.0)
        alive = np.ones(2, dtype=np.bool_)
        sensor = 0.0
        ff_out = 0.0
        ff_in_prev = 0.0
        slot = trajectory_slot[i]
        for k in range(n_steps):
            t = k * h
            d = disturbance_profile[k]
            for j in range(n_noise):
                if k >= noise_events[j, 0]:
                    a_n = decay(h, noise_events[j, 2])
                    d += noise_state[j]
                    noise_state[j] = a_n * noise_state[j] + noise_events[j, 1] * math.sqrt(
                        1.0 - a_n * a_n) * _random_normal(rng)
            measured = d if plant[i, 8] <= 0.0 else sensor
            if noise_std > 0.0:
                measured += noise_std * _random_normal(rng)
            # feedforward (shared input; only the fbff arm uses it)
            v_hist[k] = measured
            ff_in = (1.0 - f_ff) * _delayed(v_hist, k, m_ff) + f_ff * _delayed(v_hist, k, m_ff + 1)
            ff_out = ff_pole * ff_out + ff_scale * (ff_in - ff_zero * ff_in_prev)
            ff_in_prev = ff_in
            yd = _output(cd, xd, 0)
            sp = setpoint_profile[k]
            for arm in range(2):
                if not alive[arm]:
                    continue
                y = _output(cp, xp, 2 * arm) + yd
                if not math.isfinite(y) or abs(y) > limit:
                    alive[arm] = False
                    continue
                e = sp - y
                if td > 0.0:
                    deriv[arm] = tf / (tf + h) * deriv[arm] - kc * td / (tf + h) * (
                        y - (y if k == 0 else y_prev[arm]))
                v = kc * e + integral[arm] + deriv[arm] + (ff_out if arm == 1 else 0.0)
                u = min(max(v, u_low), u_high)
                integral[arm] += kc * h / ti * e + h / tt * (u - v)
                y_prev[arm] = y
                # metrics
                ae = abs(e)
                acc[arm, 0] += e * h
                acc[arm, 1] += ae * h
                acc[arm, 2] += e * e * h
                acc[arm, 3] += max(t - t_start, 0.0) * ae * h
                acc[arm, 4] = max(acc[arm, 4], ae)
                acc[arm, 5] = max(acc[arm, 5], direction * e)
                if ae > band and t >= t_start:
                    last_outside[arm] = t
                acc[arm, 7] += abs(u - u_prev[arm])
                if u != v:
                    acc[arm, 8] += h
                u_prev[arm] = u
                if slot >= 0:
                    trajectories[slot, arm, k] = y
                    trajectories[slot, 2 + arm, k] = u
                if envelope_index[k] >= 0 and not probe:
                    b = int((y - bin_low) / bin_width)
                    b = min(max(b, 0), n_bins - 1)
                    envelope_counts[arm, envelope_index[k], b] += 1
                u_hist[arm * n_steps + k] = u
                _advance(cp, xp, 2 * arm, _delayed_at(u_hist, arm * n_steps, k, m_p),
                         _delayed_at(u_hist, arm * n_steps, k, m_p + 1))
            d_hist[k] = d
            _advance(cd, xd, 0, _delayed(d_hist, k, m_d), _delayed(d_hist, k, m_d + 1))
            sensor = a_sensor * sensor + (1.0 - a_sensor) * d
        t_end = n_steps * h
        for arm in range(2):
            if last_outside[arm] < 0.0:
                acc[arm, 6] = 0.0
            else:
                acc[arm, 6] = min(last_outside[arm] + h, t_end) - t_start
            acc[arm, 5] = max(acc[arm, 5], 0.0)
            for q in range(9):
                accumulators[i, arm, q] = acc[arm, q] if alive[arm] and not probe else math.nan
            unstable[i, arm] = probe or not alive[arm]
