"""The compiled simulation kernel laid out across plants: the loop without a valve or a secondary
loop, many samples advanced together so the compiler vectorises across them.

:func:`simulate_lanes` takes the arguments of :func:`robustff.engine.kernel.simulate_kernel` and
writes the same outputs, bit for bit, for every case without a valve element and without a
secondary loop (the caller chooses; the general kernel runs the rest). Each sample's arithmetic
is the general kernel's, operation for operation and without fast-math, so the results do not
depend on which samples share a block.

Layout. Samples are advanced :data:`LANES` at a time (grouped only by the order of their
process path): the time loop is outside, the loop over the lanes of a block inside. Every state
and per-sample constant of a block lives in one flat buffer, field ``f`` of lane ``l`` at
``f * LANES + l``, so the compiler sees constant distances between fields and vectorises the
lane loops without run-time alias checks. Each lane's delayed process input is copied from the
ring (its own dead time) into the buffer before the loop that steps the path. Lanes of a block
beyond its last sample repeat its first sample and are never written out. The passes of a
step (measure, control, probe, record, advance) are inlined into the time loop, each arm's
called there without a branch around its arrays: as calls, or inside helpers that chose the
arms themselves, each took and released a reference to every array it was passed, atomic
updates at every step (8 % of the kernel's time, each time; numba's pruning pairs the counts
away only in code without such branches).

The open-loop signals (the disturbances' effect on the CV and the feedforward) advance across
the lanes too, from each sample's own inputs and noise (:mod:`robustff.engine.lane_open_loop`).
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

from robustff.engine.discretise import block_coefficients, split_delay
from robustff.engine.kernel import (
    D_DELAY,
    N_ACCUMULATORS,
    accumulator_slot,
    feedforward_setup,
    loop_setup,
    noise_setup,
    ring_size,
    step_metric_params,
)
from robustff.engine.lane_open_loop import LANES, open_loop_lanes, open_loop_scratch

__all__ = ["simulate_lanes", "LANES"]

# Fields of the block buffer (each LANES wide). Per-sample path coefficients of the process at
# the internal step (CP) and at the scan for the stability probe (CQ), as block_coefficients
# orders them: phi11, phi21, phi22, g1_new, g2_new, g1_old, g2_old.
_CP, _CQ = 0, 7
# Path states (x1, x2) of the feedback-only arm, the feedforward arm and the probe.
_X0, _X1, _XQ = 14, 16, 18
# Controller states (integral, derivative, previous derivative input, previous output) of the
# two arms, then their outputs, CVs and alive flags (1.0 / 0.0).
_S0, _S1 = 20, 24
_U0, _U1, _UQ, _Y0, _Y1, _ALIVE0, _ALIVE1 = 28, 29, 30, 31, 32, 33, 34
# Last time outside the settling band (-1: not since the latest event).
_LAST0, _LAST1 = 35, 36
# Probe: integral, derivative, previous CV, early and late peak, diverged (1.0 / 0.0).
_PQ = 37
# Accumulators of the two arms, in ACCUMULATOR_NAMES order, and each one's slot among them
# (a metric added to the list must be updated in _control_arm or _advance_arm too: the
# equality test with the general kernel fails until it is).
_IE, _IAE, _ISE, _ITAE, _PEAK, _OPPOSITE, _SETTLING, _TRAVEL, _AT_LIMIT, _OUTSIDE = (
    accumulator_slot(name) for name in (
        "ie", "iae", "ise", "itae", "peak_deviation", "opposite_excursion", "settling_time",
        "valve_travel", "time_at_limit", "outside_band"))
_A0 = 43
_A1 = _A0 + N_ACCUMULATORS
# The delayed inputs of the path being stepped (newer and older sample), copied from the ring.
_DELAYED = _A1 + N_ACCUMULATORS
_N_FIELDS = _DELAYED + 2


@njit(cache=True, nogil=True)
def _group_keys(plant: np.ndarray, kinds: np.ndarray, hi: float) -> np.ndarray:
    """Each sample's block key, its process path's order (1 or 2): the samples of a block
    share the code that steps the path."""
    keys = np.empty(plant.shape[0], dtype=np.int64)
    for i in range(plant.shape[0]):
        keys[i] = int(block_coefficients(kinds[0], plant[i, 0], plant[i, 1], plant[i, 2], hi,
                                         0.0)[7])
    return keys


@njit(cache=True, nogil=True)
def _load_lane(w: np.ndarray, lane: int, kind: int, plant_row: np.ndarray, h: float,
               hi: float, substeps: int) -> None:
    """Reset lane ``lane`` of the block buffer to rest with the coefficients of one sample."""
    L = LANES
    for f in range(_N_FIELDS):
        w[f * L + lane] = 0.0
    _, f_p = split_delay(plant_row[3], hi)
    cp = block_coefficients(kind, plant_row[0], plant_row[1], plant_row[2], hi, f_p)
    cq = cp
    if substeps > 1:  # the probe runs at the scan (see the general kernel)
        _, f_q = split_delay(plant_row[3], h)
        cq = block_coefficients(kind, plant_row[0], plant_row[1], plant_row[2], h, f_q)
    for c in range(7):
        w[(_CP + c) * L + lane] = cp[c]
        w[(_CQ + c) * L + lane] = cq[c]
    w[_ALIVE0 * L + lane] = 1.0
    w[_ALIVE1 * L + lane] = 1.0
    w[_LAST0 * L + lane] = -1.0
    w[_LAST1 * L + lane] = -1.0


@njit(cache=True, nogil=True, inline="always")
def _control_arm(w: np.ndarray, ff: np.ndarray, with_ff: bool, s: int, a: int, yf: int,
                 uf: int, k: int, sp: float, first: bool, p: tuple,
                 h: float) -> None:
    """The controller of one arm in every lane at scan ``k`` (the general kernel's
    ``_arm_control``, the same operations per lane), inlined with constant field offsets (see
    :func:`_advance_arm`)."""
    L = LANES
    # offsets, not slices (a slice is a new array view, reference-counted), unsigned (see
    # _store_and_fetch)
    ff_now = np.uint64(k * L)
    for lane in range(L):
        # Every lane computes, a lane whose arm ran away too (no branch, so the loop stays
        # vectorised): its values are never used again (its CV is no longer recorded and its
        # accumulators are written as NaN), and its alive flag stays 0.
        y = w[yf * L + lane]
        ffk = ff[ff_now + np.uint64(lane)] if with_ff else 0.0
        e = sp - y
        yd = y - p.derivative_setpoint_weight * sp
        deriv = w[(s + 1) * L + lane]
        if p.has_derivative:
            deriv = p.derivative_pole * deriv - p.derivative_gain * (
                yd - (yd if first else w[(s + 2) * L + lane]))
        v = p.kc * (p.setpoint_weight * sp - y) + w[s * L + lane] + deriv + ffk
        u = min(max(v, p.u_low), p.u_high)
        integral = w[s * L + lane] + (p.integral_gain * e + p.tracking_gain * (u - v))
        travel = (a + _TRAVEL) * L + lane
        at_limit = (a + _AT_LIMIT) * L + lane
        moved = w[travel] + abs(u - w[(s + 3) * L + lane])
        # Unconditional stores (see _advance_arm): time at the limits is >= +0, so adding 0.0
        # leaves it bit for bit as it was.
        limited = w[at_limit] + (h if u != v else 0.0)
        w[s * L + lane] = integral
        w[travel] = moved
        w[at_limit] = limited
        w[(s + 1) * L + lane] = deriv
        w[(s + 2) * L + lane] = yd
        w[(s + 3) * L + lane] = u
        w[uf * L + lane] = u


@njit(cache=True, nogil=True, inline="always")
def _store_and_fetch(w: np.ndarray, ring: np.ndarray, field: int, unit_load: bool, base: int,
                     q: int, segments: np.ndarray, size: int) -> None:
    # Write the field (plus 1 with unit_load: the probe's load) into the ring row of step q,
    # then copy each lane's delayed inputs (steps q - m and q - m - 1, m its own dead time)
    # into the _DELAYED fields: the loop that steps the path then touches the buffer alone, at
    # constant offsets. The lanes come sorted by dead time, so they fall in a few runs of
    # equal delay (segments[s] = (first lane, delay), see _delay_runs), each copied as one
    # contiguous row.
    L = LANES
    mask = size - 1
    # Offsets rather than slices (a slice is a new, reference-counted array view), unsigned:
    # a signed index gets numba's negative-index wrap-around, which keeps LLVM from
    # vectorising these copies (it left them scalar, one value at a time).
    new = np.uint64((base + (q & mask)) * L)
    for lane in range(L):
        at = new + np.uint64(lane)
        ring[at] = w[field * L + lane] + 1.0 if unit_load else w[field * L + lane]
    for s in range(segments.shape[0] - 1):
        first, stop, m = segments[s, 0], segments[s + 1, 0], segments[s, 1]
        if first == stop:
            break
        now = np.uint64((base + ((q - m) & mask)) * L)
        old = np.uint64((base + ((q - m - 1) & mask)) * L)
        for lane in range(first, stop):
            offset = np.uint64(lane)
            w[np.uint64(_DELAYED * L) + offset] = ring[now + offset]
            w[np.uint64((_DELAYED + 1) * L) + offset] = ring[old + offset]


@njit(cache=True, nogil=True)
def _delay_runs(delays: np.ndarray, segments: np.ndarray) -> None:
    """Runs of equal delay among the lanes: ``segments[s] = (first lane, delay)`` for each run,
    then ``(LANES, 0)`` rows (a run ends where the next begins)."""
    L = LANES
    s = 0
    for lane in range(L):
        if lane == 0 or delays[lane] != delays[lane - 1]:
            segments[s, 0], segments[s, 1] = lane, delays[lane]
            s += 1
    for rest in range(s, segments.shape[0]):
        segments[rest, 0], segments[rest, 1] = L, 0


@njit(cache=True, nogil=True, inline="always")
def _probe(w: np.ndarray, ring: np.ndarray, k: int, p: tuple, second_order: bool, size: int,
           runs_q: np.ndarray, q2: int, q3: int) -> None:
    # The stability probe of every lane at scan k (the general kernel's _probe_control, the
    # same operations per lane): the controller, then (after the ring is written in a loop of
    # its own) the process step at the scan.
    L = LANES
    # Which peak this scan counts for (the window's third and last quarter), decided once.
    late, early = k >= q3, k < q3 and k >= q2
    for lane in range(L):
        x1, x2 = w[_XQ * L + lane], w[(_XQ + 1) * L + lane]
        y = x2 if second_order else x1
        # | rather than or: no branch per lane, so the loop stays vectorised
        diverged = (w[(_PQ + 5) * L + lane] != 0.0) | (not math.isfinite(y)) | (abs(y) > 1e12)
        e = -y
        deriv = (p.derivative_pole * w[(_PQ + 1) * L + lane]
                 - p.derivative_gain * (y - w[(_PQ + 2) * L + lane])
                 if p.has_derivative else w[(_PQ + 1) * L + lane])
        u = p.kc * e + w[_PQ * L + lane] + deriv
        late_peak, early_peak = w[(_PQ + 4) * L + lane], w[(_PQ + 3) * L + lane]
        # (+ 0.0 on peaks >= +0: the same numbers, unconditional stores, see _advance_arm)
        w[(_PQ + 4) * L + lane] = (max(late_peak, abs(e)) if late else late_peak) + 0.0
        w[(_PQ + 3) * L + lane] = (max(early_peak, abs(e)) if early else early_peak) + 0.0
        w[_PQ * L + lane] = w[_PQ * L + lane] + p.integral_gain * e
        w[(_PQ + 1) * L + lane] = deriv
        w[(_PQ + 2) * L + lane] = y
        w[(_PQ + 5) * L + lane] = 1.0 if diverged else 0.0
        w[_UQ * L + lane] = u
    _store_and_fetch(w, ring, _UQ, True, 2 * size, k, runs_q, size)
    for lane in range(L):
        _step_path(w, lane, _CQ, _XQ, second_order)


@njit(cache=True, nogil=True, inline="always")
def _measure_arm(w: np.ndarray, effect: np.ndarray, x: int, yf: int, af: int, q: int,
                 limit: float, second_order: bool) -> None:
    # One arm's CV in every lane at internal step q and whether the arm is still alive.
    L = LANES
    now = np.uint64(q * L)  # an unsigned offset, not a slice (see _store_and_fetch)
    for lane in range(L):
        y = ((w[(x + 1) * L + lane] if second_order else w[x * L + lane])
             + effect[now + np.uint64(lane)])
        alive = (w[af * L + lane] != 0.0) & math.isfinite(y) & (not abs(y) > limit)
        w[yf * L + lane] = y
        w[af * L + lane] = 1.0 if alive else 0.0


@njit(cache=True, nogil=True, inline="always")
def _advance_arm(w: np.ndarray, ring: np.ndarray, x: int, a: int, yf: int, uf: int, lf: int,
                 base: int, q: int, sp: float, t: float, weight: float, mp: tuple,
                 second_order: bool, size: int, runs_p: np.ndarray) -> None:
    # Error metrics and the process step of one arm in every lane over internal step q (the
    # general kernel's _arm_metrics and _path_step, the same operations per lane). Inlined with
    # constant field offsets, so the compiler knows how far apart the fields are; the ring is
    # written in a loop of its own, so the loop that reads it does not write it.
    L = LANES
    h = mp.h
    new_event = mp.segment != mp.previous_segment
    _store_and_fetch(w, ring, uf, False, base, q, runs_p, size)
    for lane in range(L):
        # every lane, a run-away one too (see _control_arm)
        e = sp - w[yf * L + lane]
        ae = abs(e)
        last = w[lf * L + lane]
        longest = w[(a + _SETTLING) * L + lane]
        if new_event:  # the previous event's settling is known
            if last >= 0.0:
                longest = max(longest, last + h - mp.previous_segment)
            last = -1.0
        if ae > mp.band and t >= mp.t_start:
            last = t
        outside = (a + _OUTSIDE) * L + lane
        # A field that keeps its old value on some lanes (a max, a conditional sum) would be
        # compiled as a masked store, microcoded and slow on some x86 cores (AMD Zen 1 and 2):
        # adding 0.0 makes every store unconditional and, on these fields (all >= +0, never
        # -0.0), leaves every value bit for bit as it was.
        beyond = w[outside] + (h if ae > mp.cv_band else 0.0)
        w[lf * L + lane] = last
        w[(a + _IE) * L + lane] = w[(a + _IE) * L + lane] + e * h
        w[(a + _IAE) * L + lane] = w[(a + _IAE) * L + lane] + ae * h
        w[(a + _ISE) * L + lane] = w[(a + _ISE) * L + lane] + e * e * h
        w[(a + _ITAE) * L + lane] = w[(a + _ITAE) * L + lane] + weight * ae * h
        w[(a + _PEAK) * L + lane] = max(w[(a + _PEAK) * L + lane], ae) + 0.0
        # starts at +0.0 and max keeps the first of equals: never -0.0
        w[(a + _OPPOSITE) * L + lane] = max(w[(a + _OPPOSITE) * L + lane],
                                            mp.direction * e) + 0.0
        w[(a + _SETTLING) * L + lane] = longest
        w[outside] = beyond
        _step_path(w, lane, _CP, x, second_order)


@njit(cache=True, nogil=True, inline="always")
def _step_path(w: np.ndarray, lane: int, c: int, x: int, second_order: bool) -> None:
    # One exact step of a lane's process path (coefficients from field c, states at field x)
    # on its delayed inputs (the _DELAYED fields): the general kernel's _path_step.
    L = LANES
    x1, x2 = w[x * L + lane], w[(x + 1) * L + lane]
    u_new, u_old = w[_DELAYED * L + lane], w[(_DELAYED + 1) * L + lane]
    first_state = (w[c * L + lane] * x1 + w[(c + 3) * L + lane] * u_new
                   + w[(c + 5) * L + lane] * u_old)
    if second_order:
        x2 = (w[(c + 1) * L + lane] * x1 + w[(c + 2) * L + lane] * x2
              + w[(c + 4) * L + lane] * u_new + w[(c + 6) * L + lane] * u_old)
    w[x * L + lane] = first_state
    w[(x + 1) * L + lane] = x2


@njit(cache=True, nogil=True, inline="always")
def _bin(y: float, grid: tuple) -> int:
    # The general kernel's envelope bin: outside the grid, the first or last bin.
    return min(max(int((y - grid.low) / grid.width), 0), grid.n_bins - 1)


@njit(cache=True, nogil=True, inline="always")
def _record_scan(w: np.ndarray, k: int, lanes: np.ndarray, count: int, slots: np.ndarray,
                 trajectories: np.ndarray, env: np.ndarray, point: int, grid: tuple,
                 keep: bool) -> None:
    """The envelope bins at scan ``k`` (``point >= 0``) and the trajectories of the kept
    samples (``keep``: the block has one)."""
    L = LANES
    if point >= 0:
        _bin_arm(w, env[(2 * point) * L:(2 * point + 1) * L], _Y0, _ALIVE0, grid)
        _bin_arm(w, env[(2 * point + 1) * L:(2 * point + 2) * L], _Y1, _ALIVE1, grid)
    if not keep:
        return
    for lane in range(count):
        slot = slots[lanes[lane]]
        if slot >= 0:
            if w[_ALIVE0 * L + lane] != 0.0:
                trajectories[slot, 0, k], trajectories[slot, 2, k] = (w[_Y0 * L + lane],
                                                                       w[_U0 * L + lane])
            if w[_ALIVE1 * L + lane] != 0.0:
                trajectories[slot, 1, k], trajectories[slot, 3, k] = (w[_Y1 * L + lane],
                                                                       w[_U1 * L + lane])


@njit(cache=True, nogil=True, inline="always")
def _bin_arm(w: np.ndarray, row: np.ndarray, yf: int, af: int, grid: tuple) -> None:
    # Every lane's bin, -1 where the arm ran away (spare lanes too: never counted).
    L = LANES
    for lane in range(L):
        b = _bin(w[yf * L + lane], grid)
        row[lane] = b if w[af * L + lane] != 0.0 else -1


@njit(cache=True, nogil=True)
def _write_out(w: np.ndarray, env: np.ndarray, lanes: np.ndarray, count: int, feedback_arm: bool,
               t_end: float, last_segment: float, h: float, accumulators: np.ndarray,
               unstable: np.ndarray, loop_unstable: np.ndarray,
               envelope_counts: np.ndarray) -> None:
    """Each real lane's accumulators, run-away flags, probe verdict and envelope bins (the
    general kernel's ``_finish`` and ``_commit_envelope``)."""
    L = LANES
    n_points = envelope_counts.shape[1]
    for lane in range(count):
        i = lanes[lane]
        early, late = w[(_PQ + 3) * L + lane], w[(_PQ + 4) * L + lane]
        probe = feedback_arm and (
            w[(_PQ + 5) * L + lane] != 0.0 or (late > early and late > 1e-9))
        loop_unstable[i] = probe
        for arm in range(2):
            a, lf, af = (_A0, _LAST0, _ALIVE0) if arm == 0 else (_A1, _LAST1, _ALIVE1)
            alive = w[af * L + lane] != 0.0
            last = w[lf * L + lane]
            final = 0.0 if last < 0.0 else min(last + h, t_end) - last_segment
            for c in range(N_ACCUMULATORS):
                value = w[(a + c) * L + lane]
                if c == _SETTLING:
                    value = max(value, final)
                elif c == _OPPOSITE:
                    value = max(value, 0.0)
                accumulators[i, arm, c] = value if alive else math.nan
            unstable[i, arm] = not alive
    # The envelope point by point, every lane of a point together: the counts of one point are
    # one short row, where the lane-by-lane order would jump across the whole histogram.
    for arm in range(2):
        for point in range(n_points):
            row = (2 * point + arm) * L
            for lane in range(count):
                b = env[row + lane]
                if b >= 0 and not loop_unstable[lanes[lane]]:
                    envelope_counts[arm, point, b] += 1
                env[row + lane] = -1
            for lane in range(count, L):
                env[row + lane] = -1


@njit(cache=True, nogil=True)
def simulate_lanes(
    kinds: np.ndarray, plant: np.ndarray, disturbance_kinds: np.ndarray,
    disturbances: np.ndarray, seeds: np.ndarray, h: float, disturbance_profile: np.ndarray,
    setpoint_profile: np.ndarray, noise_events: np.ndarray, controller: np.ndarray,
    feedforward: np.ndarray, metric_setup: np.ndarray, direction_profile: np.ndarray,
    segment_profile: np.ndarray, envelope_edges: np.ndarray, envelope_index: np.ndarray,
    trajectory_slot: np.ndarray, accumulators: np.ndarray, unstable: np.ndarray,
    envelope_counts: np.ndarray, trajectories: np.ndarray, loop_unstable: np.ndarray,
    feedback_arm: bool, substeps: int, valve_kind: int, valve_table: np.ndarray,
    secondary: np.ndarray, noise_record: np.ndarray, noise_replay: np.ndarray,
) -> None:
    """:func:`robustff.engine.kernel.simulate_kernel` for loops with no valve element
    (``valve_kind`` 0) and no secondary loop (``secondary[0]`` 0), across lanes of samples.

    Same arguments, same outputs bit for bit; ``valve_table`` and ``secondary`` are not read.
    """
    L = LANES
    n, n_steps, n_internal = plant.shape[0], envelope_index.shape[0], setpoint_profile.shape[0]
    n_d = disturbances.shape[1]
    hi = h / substeps
    p, mp, grid = loop_setup(controller, metric_setup, envelope_edges, h, hi)
    ffp, ff_delays = feedforward_setup(feedforward, h, n_steps)
    noise = noise_setup(noise_events, h)
    limit = controller[7]
    q2, q3 = n_steps // 2, (3 * n_steps) // 4
    keys = _group_keys(plant, kinds, hi)
    # By path order, and by dead time within an order: a block's lanes then share a few delays.
    by_delay = np.argsort(plant[:, 3], kind="mergesort")
    order = by_delay[np.argsort(keys[by_delay], kind="mergesort")]
    # Rings as long as the longest delay needs, not the window: memory the pages of which are
    # touched anyway (a window-long ring costs page faults on every call).
    # Each sample's dead time in whole internal steps and in whole scans (the probe), once.
    delay_p, delay_q = np.zeros(n, dtype=np.int64), np.zeros(n, dtype=np.int64)
    longest_process, longest_path = 0, 0
    for i in range(n):
        delay_p[i] = min(split_delay(plant[i, 3], hi)[0], n_internal)
        delay_q[i] = min(split_delay(plant[i, 3], h)[0], n_steps)
        longest_process = max(longest_process, delay_p[i])
        for j in range(n_d):
            longest_path = max(longest_path,
                               min(split_delay(disturbances[i, j, D_DELAY], hi)[0], n_internal))
    scratch = open_loop_scratch(n_d, n_internal, n_steps, longest_path)
    effect_lanes, ff_lanes = scratch[5], scratch[6]
    w = np.zeros(_N_FIELDS * L)
    ring = np.zeros(3 * ring_size(longest_process) * L)
    n_points = envelope_counts.shape[1]
    env = np.full(2 * n_points * L, -1, dtype=np.int64)
    lanes = np.zeros(L, dtype=np.int64)
    m_p = np.zeros(L, dtype=np.int64)  # the block's lanes' delay_p and delay_q
    m_q = np.zeros(L, dtype=np.int64)
    runs_p = np.zeros((L + 1, 2), dtype=np.int64)  # their runs (see _delay_runs)
    runs_q = np.zeros((L + 1, 2), dtype=np.int64)
    last_segment = segment_profile[n_internal - 1]
    start = 0
    while start < n:
        key = keys[order[start]]
        count = 0
        while start + count < n and count < L and keys[order[start + count]] == key:
            lanes[count] = order[start + count]
            count += 1
        start += count
        keep = False
        for lane in range(L):
            i = lanes[lane] if lane < count else lanes[0]  # a spare lane repeats the first
            keep = keep or (lane < count and trajectory_slot[i] >= 0)
            _load_lane(w, lane, kinds[0], plant[i], h, hi, substeps)
        open_loop_lanes(lanes, count, seeds, disturbance_kinds, disturbances,
                        disturbance_profile, noise, hi, substeps, ffp, ff_delays, noise_record,
                        noise_replay, scratch)
        longest = 0
        for lane in range(L):
            i = lanes[lane] if lane < count else lanes[0]
            m_p[lane], m_q[lane] = delay_p[i], delay_q[i]
            longest = max(longest, m_p[lane], m_q[lane])
        size = ring_size(longest)
        _delay_runs(m_p, runs_p)
        _delay_runs(m_q, runs_q)
        ring[:3 * size * L] = 0.0
        second_order = key == 2
        for k in range(n_steps):
            for sub in range(substeps):
                q = k * substeps + sub
                t = q * hi
                weight = max(t - mp.t_start, 0.0)
                mpk = step_metric_params(mp, q, direction_profile, segment_profile)
                sp = setpoint_profile[q]
                # The arms' passes are called here, each without a branch around its arrays:
                # a helper choosing the arms itself took and released a reference to every
                # array it was passed at each call (atomic updates at every step).
                if feedback_arm:
                    _measure_arm(w, effect_lanes, _X0, _Y0, _ALIVE0, q, limit, second_order)
                _measure_arm(w, effect_lanes, _X1, _Y1, _ALIVE1, q, limit, second_order)
                if sub == 0:
                    if feedback_arm:
                        _control_arm(w, ff_lanes, False, _S0, _A0, _Y0, _U0, k, sp, k == 0, p,
                                     h)
                    _control_arm(w, ff_lanes, True, _S1, _A1, _Y1, _U1, k, sp, k == 0, p, h)
                    if feedback_arm:
                        _probe(w, ring, k, p, second_order, size, runs_q, q2, q3)
                    if keep or envelope_index[k] >= 0:
                        _record_scan(w, k, lanes, count, trajectory_slot, trajectories, env,
                                     envelope_index[k], grid, keep)
                if feedback_arm:
                    _advance_arm(w, ring, _X0, _A0, _Y0, _U0, _LAST0, 0, q, sp, t, weight, mpk,
                                 second_order, size, runs_p)
                _advance_arm(w, ring, _X1, _A1, _Y1, _U1, _LAST1, size, q, sp, t, weight, mpk,
                             second_order, size, runs_p)
        _write_out(w, env, lanes, count, feedback_arm, n_steps * h, last_segment, mp.h,
                   accumulators, unstable, loop_unstable, envelope_counts)
