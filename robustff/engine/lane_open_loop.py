"""The open-loop signals of the lane kernel, across lanes of samples.

For a block of :data:`LANES` samples: the disturbances' summed effect on the CV at every
internal step and the summed feedforward at every scan, laid out ``t * LANES + lane``, each
sample's the same numbers as the general kernel's ``open_loop`` (see
:mod:`robustff.engine.lane_kernel`, which runs the closed loop on them).
"""

from __future__ import annotations

import numpy as np
from numba import njit

from robustff.engine.discretise import block_coefficients, decay, split_delay
from robustff.engine.kernel import (
    D_DELAY,
    D_GAIN,
    D_NOISE,
    D_SENSOR,
    D_TAU1,
    D_TAU2,
    disturbance_inputs,
    feedforward_constants,
    ring_size,
)

__all__ = ["LANES", "SCRATCH_LIMIT", "scratch_bytes", "open_loop_lanes", "open_loop_scratch"]

#: Samples advanced together. 32 lets the vectoriser pay for the few alias checks left between
#: the buffers (16 was judged not worth vectorising).
LANES = 32
#: Largest scratch (bytes) of one call of the lane layout; a longer window (or more
#: disturbances) runs in the general kernel, whose scratch is one sample's signals.
SCRATCH_LIMIT = 128 * 2**20


def scratch_bytes(n_disturbances: int, n_internal: int) -> int:
    """Bytes of :func:`open_loop_scratch` (at most) for a window of ``n_internal`` internal
    steps and ``n_disturbances`` disturbances: (3 J + 4) T S LANES numbers."""
    return 8 * LANES * (3 * n_disturbances + 4) * n_internal


@njit(cache=True, nogil=True)
def open_loop_lanes(lanes: np.ndarray, count: int, seeds: np.ndarray, kinds: np.ndarray,
                    disturbances: np.ndarray, disturbance_profile: np.ndarray,
                    noise: np.ndarray, hi: float, substeps: int, ffp: np.ndarray,
                    ff_delays: np.ndarray, noise_record: np.ndarray, noise_replay: np.ndarray,
                    scratch: tuple) -> None:
    """The open-loop signals of a block across its lanes: the disturbances' summed effect on
    the CV at every internal step (``effect_lanes``) and the summed feedforward at every scan
    (``ff_lanes``), simulated, or replayed from ``noise_replay`` (and kept in
    ``noise_record``) when those have columns; the general kernel's ``open_loop``, the same
    operations per sample. ``scratch`` is :func:`open_loop_scratch`'s.

    Each lane's inputs and noise come from its own seed (``disturbance_inputs``); without any
    noise every lane sees the case's profile and nothing is drawn. The paths, transmitters and
    feedforwards then advance with time outside and the lanes inside.
    """
    (inputs, measured, held, inputs_lanes, measured_lanes, effect_lanes, ff_lanes, filtered,
     ff_state, path_buffer, path_ring) = scratch
    L = LANES
    n_d, n_internal, n_steps = inputs.shape[1], inputs.shape[2], measured.shape[2]
    replay = noise_replay.shape[1] > 0
    noisy = noise.shape[0] > 0
    for lane in range(count):
        for j in range(n_d):
            noisy = noisy or disturbances[lanes[lane], j, D_NOISE] > 0.0
    if noisy and not replay:
        for lane in range(L):
            source = lanes[lane] if lane < count else lanes[0]  # a spare lane repeats the first
            disturbance_inputs(source, seeds[source], disturbances, disturbance_profile, noise,
                               substeps, inputs[lane], measured[lane], held)
    for j in range(n_d):
        if replay:  # straight from the recorded rows, each lane its own sample's
            _gather_lanes(noise_replay, lanes, count, n_internal + j * n_steps, n_steps,
                          measured_lanes[j])
        elif noisy:  # each lane's own measurement noise
            _gather_lanes(measured[:, j, :], _EVERY_LANE, L, 0, n_steps, measured_lanes[j])
        else:
            measured_lanes[j, :] = 0.0
    if replay:
        _gather_lanes(noise_replay, lanes, count, 0, n_internal, effect_lanes)
    else:
        effect_lanes[:] = 0.0
        for j in range(n_d):
            if noisy:
                _gather_lanes(inputs[:, j, :], _EVERY_LANE, L, 0, n_internal, inputs_lanes)
            else:
                _broadcast(disturbance_profile[j], inputs_lanes)
            _disturbance_lanes(j, lanes, count, kinds[j], disturbances, hi, substeps,
                               inputs_lanes, measured_lanes[j], effect_lanes, path_buffer,
                               path_ring)
    if noise_record.shape[1] > 0:  # straight into each sample's row
        _scatter_lanes(effect_lanes, lanes, count, 0, n_internal, noise_record)
        for j in range(n_d):
            _scatter_lanes(measured_lanes[j], lanes, count, n_internal + j * n_steps, n_steps,
                           noise_record)
    ff_lanes[:] = 0.0
    for j in range(n_d):
        if ffp[j, 6] != 0.0:
            _feedforward_lanes(feedforward_constants(ffp, j), ff_delays[j], measured_lanes[j],
                               filtered, ff_state, ff_lanes)


@njit(cache=True, nogil=True)
def open_loop_scratch(n_d: int, n_internal: int, n_steps: int, longest_path: int) -> tuple:
    """The arrays :func:`_open_loop_lanes` works in (memory about (3 J + 4) T S LANES numbers
    for J disturbances, independent of the number of samples); ``longest_path`` is the longest
    disturbance dead time in internal steps."""
    L = LANES
    return (np.zeros((L, n_d, n_internal)), np.zeros((L, n_d, n_steps)), np.zeros(n_d),
            np.zeros(n_internal * L), np.zeros((n_d, n_steps * L)),
            np.zeros(n_internal * L), np.zeros(n_steps * L), np.zeros(n_steps * L),
            np.zeros(2 * L), np.zeros(_PATH_FIELDS * L),
            np.zeros(ring_size(longest_path) * L))


#: Row l for lane l: a block's own rows (its inputs and measurements) across its lanes.
_EVERY_LANE = np.arange(LANES)

# Fields of the disturbance path buffer (each LANES wide): the path's coefficients as
# block_coefficients orders them (phi11, phi21, phi22, g1_new, g2_new, g1_old, g2_old), 1.0
# for a second-order path, the transmitter's pole and gain, 1.0 for a transmitter without lag,
# then the states x1, x2 and the transmitter's.
_PC, _P_SECOND, _P_POLE, _P_GAIN, _P_DIRECT, _P_X1, _P_X2, _P_SENSOR = 0, 7, 8, 9, 10, 11, 12, 13
_PATH_FIELDS = 14


@njit(cache=True, nogil=True)
def _disturbance_lanes(j: int, lanes: np.ndarray, count: int, kind: int,
                       disturbances: np.ndarray, hi: float, substeps: int,
                       inputs_lanes: np.ndarray, measured_lanes: np.ndarray,
                       effect_lanes: np.ndarray, buffer: np.ndarray, ring: np.ndarray) -> None:
    """Disturbance ``j`` of every lane: its effect added to ``effect_lanes`` at every internal
    step, its transmitter's reading added to ``measured_lanes`` at every scan (the general
    kernel's ``_disturbances_and_feedforward``, the same values per sample).

    The path is stepped on its undelayed input, across contiguous lanes (vectorised), and its
    output kept in a ring; each lane then adds the output of its own dead time earlier. With
    the input zero before the window this is the delayed path's output exactly: the path's
    state stays exactly zero until the input arrives, then repeats the undelayed sequence.
    """
    L = LANES
    n_steps, n_internal = measured_lanes.shape[0] // L, inputs_lanes.shape[0] // L
    delay = np.zeros(L, dtype=np.int64)
    longest = 0
    for lane in range(L):
        i = lanes[lane] if lane < count else lanes[0]
        m_d, f_d = split_delay(disturbances[i, j, D_DELAY], hi)
        delay[lane] = min(m_d, n_internal)
        longest = max(longest, delay[lane])
        c = block_coefficients(kind, disturbances[i, j, D_GAIN], disturbances[i, j, D_TAU1],
                               disturbances[i, j, D_TAU2], hi, f_d)
        for f in range(7):
            buffer[(_PC + f) * L + lane] = c[f]
        buffer[_P_SECOND * L + lane] = 1.0 if c[7] == 2.0 else 0.0
        pole = decay(hi, disturbances[i, j, D_SENSOR])
        buffer[_P_POLE * L + lane] = pole
        buffer[_P_GAIN * L + lane] = 1.0 - pole
        buffer[_P_DIRECT * L + lane] = 1.0 if disturbances[i, j, D_SENSOR] <= 0.0 else 0.0
        buffer[_P_X1 * L + lane] = 0.0
        buffer[_P_X2 * L + lane] = 0.0
        buffer[_P_SENSOR * L + lane] = 0.0
    mask = ring_size(longest) - 1
    # Unsigned offsets rather than slices: a slice is a reference-counted view, and a signed
    # index gets numba's negative-index wrap-around, which keeps LLVM from vectorising.
    u = np.uint64
    for k in range(n_steps):
        reading = u(k * L)
        for sub in range(substeps):
            q = k * substeps + sub
            now = u(q * L)
            before = u((q - 1) * L) if q > 0 else u(0)
            out = u((q & mask) * L)
            _path_lanes(buffer, inputs_lanes, now, before, q > 0, ring, out, measured_lanes,
                        reading, sub == 0)
            for lane in range(L):
                m_d = delay[lane]
                effect_lanes[now + u(lane)] += (ring[u(((q - m_d) & mask) * L + lane)]
                                                if q >= m_d else 0.0)


@njit(cache=True, nogil=True, inline="always")
def _path_lanes(b: np.ndarray, inputs: np.ndarray, now: np.uint64, before: np.uint64,
                has_before: bool, ring: np.ndarray, out: np.uint64, measured: np.ndarray,
                reading: np.uint64, scan: bool) -> None:
    # One internal step of the undelayed path and its transmitter across the lanes: the output
    # before the step into ring[out:], the transmitter's reading (at a scan) added to
    # measured[reading:]; the inputs at inputs[now:] and (has_before) inputs[before:].
    L = LANES
    u = np.uint64
    if scan:  # a loop of its own: inside the next one it became a slow masked store
        for lane in range(L):
            # Both values loaded, then one chosen: a load under the condition made the loop
            # scalar (the address chosen lane by lane).
            sensor, direct = b[_P_SENSOR * L + lane], inputs[now + u(lane)]
            measured[reading + u(lane)] += direct if b[_P_DIRECT * L + lane] != 0.0 else sensor
    for lane in range(L):
        x1, x2 = b[_P_X1 * L + lane], b[_P_X2 * L + lane]
        second_order = b[_P_SECOND * L + lane] != 0.0
        ring[out + u(lane)] = x2 if second_order else x1
        d = inputs[now + u(lane)]
        old = inputs[before + u(lane)] if has_before else 0.0
        first = (b[_PC * L + lane] * x1 + b[(_PC + 3) * L + lane] * d
                 + b[(_PC + 5) * L + lane] * old)
        second = (b[(_PC + 1) * L + lane] * x1 + b[(_PC + 2) * L + lane] * x2
                  + b[(_PC + 4) * L + lane] * d + b[(_PC + 6) * L + lane] * old)
        b[_P_X1 * L + lane] = first
        b[_P_X2 * L + lane] = second if second_order else x2
        b[_P_SENSOR * L + lane] = (b[_P_POLE * L + lane] * b[_P_SENSOR * L + lane]
                                   + b[_P_GAIN * L + lane] * d)


@njit(cache=True, nogil=True)
def _broadcast(row: np.ndarray, lanes: np.ndarray) -> None:
    """Every lane the same signal: ``lanes[t * LANES + l] = row[t]``."""
    L = LANES
    for t in range(row.shape[0]):
        value = row[t]
        for lane in range(L):
            lanes[t * L + lane] = value


@njit(cache=True, nogil=True)
def _feedforward_lanes(c: tuple, m_ff: int, measured_lanes: np.ndarray, filtered: np.ndarray,
                       state: np.ndarray, ff_lanes: np.ndarray) -> None:
    """One disturbance's feedforward of every lane added to ``ff_lanes`` at every scan (the
    general kernel's ``feedforward_step``, the same operations per sample): the input filter
    over the whole window first, then the delay and the lead-lag. Every lane has the same
    delay (a design setting), so both loops run across contiguous lanes and vectorise;
    ``state`` (2 LANES) is scratch."""
    L = LANES
    pole, zero, scale, weight_new, weight_old, input_pole = c
    n_steps = ff_lanes.shape[0] // L
    # Unsigned offsets rather than slices (see _disturbance_lanes): a slice per scan is a
    # reference-counted view, and its atomic count updates cost more than the arithmetic.
    u = np.uint64
    for lane in range(L):
        state[lane] = 0.0
    for k in range(n_steps):
        now = u(k * L)
        if k > 0:
            before = u((k - 1) * L)
            for lane in range(L):
                filtered[now + u(lane)] = (input_pole * filtered[before + u(lane)]
                                           + (1.0 - input_pole) * measured_lanes[now + u(lane)])
        else:
            for lane in range(L):
                filtered[u(lane)] = (input_pole * state[lane]
                                     + (1.0 - input_pole) * measured_lanes[u(lane)])
    state[:] = 0.0  # the lead-lag's output and input at the previous scan
    for k in range(n_steps):
        out = u(k * L)
        if k >= m_ff + 1:
            newer, older = u((k - m_ff) * L), u((k - m_ff - 1) * L)
            for lane in range(L):
                ff_in = weight_new * filtered[newer + u(lane)] + weight_old * filtered[
                    older + u(lane)]
                _lead_lag_lane(state, ff_lanes, out, lane, ff_in, pole, zero, scale)
        elif k == m_ff:
            newer = u((k - m_ff) * L)
            for lane in range(L):
                ff_in = weight_new * filtered[newer + u(lane)] + weight_old * 0.0
                _lead_lag_lane(state, ff_lanes, out, lane, ff_in, pole, zero, scale)
        else:
            for lane in range(L):
                ff_in = weight_new * 0.0 + weight_old * 0.0
                _lead_lag_lane(state, ff_lanes, out, lane, ff_in, pole, zero, scale)


@njit(cache=True, nogil=True, inline="always")
def _lead_lag_lane(state: np.ndarray, ff_lanes: np.ndarray, out: np.uint64, lane: int,
                   ff_in: float, pole: float, zero: float, scale: float) -> None:
    L = LANES
    ff_out = pole * state[lane] + scale * (ff_in - zero * state[L + lane])
    state[lane] = ff_out
    state[L + lane] = ff_in
    ff_lanes[out + np.uint64(lane)] += ff_out


@njit(cache=True, nogil=True)
def _gather_lanes(source: np.ndarray, rows: np.ndarray, count: int, start: int, n: int,
                  lanes: np.ndarray) -> None:
    """``lanes[t * LANES + l] = source[rows[l], start + t]`` for ``t < n``, a spare lane
    (``l >= count``) repeating the first: one sample's row per lane laid across the lanes.

    In tiles of 64 time steps, so the strided writes stay within the first-level cache (a plain
    loop over each sample's row misses on every write).
    """
    L = LANES
    for first in range(0, n, 64):
        stop = min(first + 64, n)
        for lane in range(L):
            row = rows[lane] if lane < count else rows[0]
            for t in range(first, stop):
                lanes[t * L + lane] = source[row, start + t]


@njit(cache=True, nogil=True)
def _scatter_lanes(lanes: np.ndarray, rows: np.ndarray, count: int, start: int, n: int,
                   dest: np.ndarray) -> None:
    """``dest[rows[l], start + t] = lanes[t * LANES + l]`` for ``t < n`` and the block's
    ``count`` real lanes: the inverse of :func:`_gather_lanes`, in tiles of 64 steps."""
    L = LANES
    for first in range(0, n, 64):
        stop = min(first + 64, n)
        for lane in range(count):
            row = rows[lane]
            for t in range(first, stop):
                dest[row, start + t] = lanes[t * L + lane]
