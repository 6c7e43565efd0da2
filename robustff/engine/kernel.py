"""The compiled simulation kernel: every sample, both arms, one pass over time.

Each sample runs its own loop over time, so results for a sample do not depend on which other
samples share the call (bit-identical whatever the chunking). Metrics are accumulated while
simulating; trajectories are written only for samples given a slot.

Signal conventions (all deviation variables from the initial steady state):
error ``e = setpoint - CV``; controller output ``u`` limited to ``[u_low, u_high]``.
Per scan ``k`` (time ``k h``, ``h`` the controller's scan period): measure CV and the
disturbance, compute both controllers, then advance the plant over ``[k h, (k+1) h)`` with
``u[k]`` held, in ``S`` internal steps of ``h / S`` (each exact for the held input), the error
metrics updated at every internal step; events take effect at the nearest internal step.

Speed notes (measured, see the module's benchmark): states live in scalar locals (the named
tuples below, which LLVM keeps in registers like plain tuples), constants such as ``kc h / ti``
are computed once, delayed inputs come from power-of-two ring buffers sized by the sample's
longest delay (memory independent of the number of steps), and the stability probe runs inside
the main time loop as a third, unlimited linear chain so that its latency overlaps the two
arms. No fast-math: every sample's arithmetic is the same IEEE
sequence whatever the batch.
"""

from __future__ import annotations

import math
from collections import namedtuple

import numpy as np
from numba import njit

from robustff.engine.discretise import block_coefficients, decay, delay_weights, split_delay
from robustff.engine.random_draws import next_normal, normal_stream

__all__ = [
    "simulate_kernel", "ACCUMULATOR_NAMES", "N_ACCUMULATORS", "ACCUMULATOR_INIT", "Accumulators",
    "INITIAL_ACCUMULATORS", "accumulator_slot", "ArmState", "ProbeState", "ControllerParams",
    "MetricParams", "PathCoefficients", "FeedforwardParams", "BinGrid", "ValveParams",
    "ValveState", "SecondaryParams", "loop_setup", "feedforward_setup", "noise_setup", "open_loop",
    "feedforward_constants", "feedforward_step", "disturbance_inputs", "path_coefficients",
    "step_metric_params", "ring_size",
]

# Records. The kernel keeps its state in small tuples so that the compiler holds them in
# registers; these are collections.namedtuple types, which numba compiles exactly like plain
# tuples (same machine code) while every field is read by name. They live in this file on
# purpose: numba's on-disk cache is invalidated only by changes to the file of the compiled
# function, so constants defined in another module would be silently kept stale.

#: Per-arm accumulators written by the kernel, in the column order of its output.
ACCUMULATOR_NAMES: tuple[str, ...] = (
    "ie", "iae", "ise", "itae", "peak_deviation", "opposite_excursion",
    "settling_time", "valve_travel", "time_at_limit", "outside_band",
)
N_ACCUMULATORS = len(ACCUMULATOR_NAMES)

#: Value of each accumulator before the first step. During the run ``settling_time`` holds the
#: longest settling time of the events already followed by another one (the arm state holds the
#: last time outside the band since the latest event); the finishing step adds the last event.
ACCUMULATOR_INIT: dict[str, float] = {
    "ie": 0.0, "iae": 0.0, "ise": 0.0, "itae": 0.0, "peak_deviation": 0.0,
    "opposite_excursion": 0.0, "settling_time": 0.0, "valve_travel": 0.0,
    "time_at_limit": 0.0, "outside_band": 0.0,
}

#: One arm's running accumulators, fields named and ordered as :data:`ACCUMULATOR_NAMES`.
Accumulators = namedtuple("Accumulators", ACCUMULATOR_NAMES)


def _initial_record() -> Accumulators:
    # Keyword construction fails loudly on a missing or unknown name, so the table and the list
    # cannot drift apart silently; the order check catches a reordered table.
    if tuple(ACCUMULATOR_INIT) != ACCUMULATOR_NAMES:
        raise TypeError("ACCUMULATOR_INIT must list ACCUMULATOR_NAMES, in the same order")
    return Accumulators(**{name: float(value) for name, value in ACCUMULATOR_INIT.items()})


#: The record every arm starts from (a module constant: numba compiles it in).
INITIAL_ACCUMULATORS = _initial_record()


def accumulator_slot(name: str) -> int:
    """Column of accumulator ``name`` in the kernel's output (axis 2)."""
    return ACCUMULATOR_NAMES.index(name)


# Slots the finishing step rewrites; numba reads module-level ints as compile-time constants.
SETTLING_TIME = accumulator_slot("settling_time")
OPPOSITE_EXCURSION = accumulator_slot("opposite_excursion")

#: Controller state of one live arm: integral term, derivative term, the derivative's input
#: ``CV - c setpoint`` and the output at the previous scan (deviation units).
ArmState = namedtuple(
    "ArmState", ("integral", "derivative", "previous_derivative_input", "previous_output"))

#: Stability probe state: integral and derivative terms, previous CV, max |e| over
#: ``[T/2, 3T/4)`` and over ``[3T/4, T)``, and whether the probe has diverged.
ProbeState = namedtuple(
    "ProbeState",
    ("integral", "derivative", "previous_cv", "early_peak", "late_peak", "diverged"),
)

#: Controller constants, computed once: ``kc``; derivative filter pole ``tf / (tf + h)``;
#: derivative gain ``kc td / (tf + h)``; integral gain ``kc h / ti``; tracking gain ``h / tt``;
#: output limits (deviation units); whether the controller has a derivative term; setpoint
#: weights b (proportional) and c (derivative).
ControllerParams = namedtuple(
    "ControllerParams",
    ("kc", "derivative_pole", "derivative_gain", "integral_gain", "tracking_gain",
     "u_low", "u_high", "has_derivative", "setpoint_weight", "derivative_setpoint_weight"),
)

#: Metric conventions: controller sample time ``h``, event start ``t0`` (time units), settling
#: band (CV units), the sign of ``e`` that counts as an opposite excursion at this step, the
#: start of the settling segment before this step's (equal to it except at the first step
#: of an event, where the settling time of the previous event is complete), and the allowed
#: deviation ``[signals.controlled] band`` (CV units; infinite without one).
MetricParams = namedtuple(
    "MetricParams",
    ("h", "t_start", "band", "direction", "segment", "previous_segment", "cv_band"))

#: One path's exact step (see :func:`robustff.engine.discretise.block_coefficients`):
#: ``x1' = phi11 x1 + g1_new u_new + g1_old u_old``; for second-order paths also
#: ``x2' = phi21 x1 + phi22 x2 + g2_new u_new + g2_old u_old`` and the output is ``x2``.
PathCoefficients = namedtuple(
    "PathCoefficients",
    ("phi11", "phi21", "phi22", "g1_new", "g2_new", "g1_old", "g2_old", "second_order"),
)

#: Discrete lead-lag feedforward: pole and zero per step, gain scale, and the weights of the
#: newer and older delayed samples (fractional delay).
FeedforwardParams = namedtuple(
    "FeedforwardParams", ("pole", "zero", "scale", "weight_new", "weight_old", "input_pole"),
)

#: Valve constants of one sample (see :mod:`robustff.plant.valve`): characteristic code (0: no
#: valve), rangeability and its log, stem travel allowed per internal step (% of travel, inf: no
#: limit), half the deadband, stiction S and J (% of travel), actuator lag pole per internal
#: step, nominal position x0 (%), output span (output units), flow fraction and slope at x0.
ValveParams = namedtuple(
    "ValveParams",
    ("kind", "rangeability", "log_rangeability", "max_step", "half_deadband", "stiction_s",
     "stiction_j", "lag_pole", "nominal", "span", "low", "flow0", "slope0"),
)

#: Valve state of one arm (all in % of travel): the previous command; whether the stem is
#: stuck, the command where it stuck and the direction it moved before; its direction of
#: motion; the position after stiction or deadband, after the rate limit and after the lag;
#: and the process input that position gave (output units, see _actuate).
ValveState = namedtuple(
    "ValveState",
    ("previous_command", "stuck", "stuck_at", "stop_direction", "direction", "held", "stem",
     "position", "drive"),
)

#: Secondary (flow) controller: whether there is one, gain, integral gain per secondary scan
#: ``kc hs / ti``, tracking gain ``hs / tt``, output limits (deviation units), and the number of
#: internal steps per secondary scan.
SecondaryParams = namedtuple(
    "SecondaryParams",
    ("present", "kc", "integral_gain", "tracking_gain", "u_low", "u_high", "every"),
)

#: Envelope histogram grid: lowest edge and bin width (CV units), number of bins.
BinGrid = namedtuple("BinGrid", ("low", "width", "n_bins"))

# Ring rows: process input of arm 0 and arm 1, probe input, then the secondary path's input of
# arm 0, arm 1 and the probe.
_RING_ROWS = 6
_SECONDARY_ROW = 3

# Disturbance columns (axis 2 of the kernel's ``disturbances``): path gain, lags, dead time,
# transmitter lag and noise.
D_GAIN, D_TAU1, D_TAU2, D_DELAY, D_SENSOR, D_NOISE = range(6)


# Hot helpers take and return scalars and tuples only: an array argument would cost reference
# counting on every call inside the time loop.


@njit(cache=True, nogil=True)
def ring_size(longest_delay: int) -> int:
    # Power of two >= delay + 2: reads of u[k - m - 1] never meet the slot written at step k, and
    # slots not yet written read as zero (the input before the window starts).
    size = 2
    while size < longest_delay + 2:
        size *= 2
    return size


@njit(cache=True, nogil=True)
def path_coefficients(kind: int, gain: float, tau1: float, tau2: float, h: float,
                  f: float) -> PathCoefficients:
    """:func:`block_coefficients` as a record (kept in registers by the compiler)."""
    c = block_coefficients(kind, gain, tau1, tau2, h, f)
    return PathCoefficients(c[0], c[1], c[2], c[3], c[4], c[5], c[6], c[7] == 2.0)


@njit(cache=True, nogil=True, inline="always")
def _output(x: tuple, c: PathCoefficients) -> float:
    return x[1] if c.second_order else x[0]


@njit(cache=True, nogil=True, inline="always")
def _path_step(x: tuple, c: PathCoefficients, u_new: float,
               u_old: float) -> tuple[float, float]:
    """One exact step of a path; ``x = (x1, x2)``, ``c`` from :func:`path_coefficients`."""
    first = c.phi11 * x[0] + c.g1_new * u_new + c.g1_old * u_old
    second = x[1]
    if c.second_order:
        second = c.phi21 * x[0] + c.phi22 * x[1] + c.g2_new * u_new + c.g2_old * u_old
    return first, second


@njit(cache=True, nogil=True, inline="always")
def _delayed_step(ring: np.ndarray, at: int, q: int, mask: int, m: int, x: tuple,
                  c: PathCoefficients, u: float) -> tuple[float, float]:
    """Write a path's input at internal step ``q`` into its ring row (from offset ``at``) and
    step the path on its input ``m`` steps ago: :func:`_path_step` with the dead time."""
    ring[at + (q & mask)] = u
    return _path_step(x, c, ring[at + ((q - m) & mask)], ring[at + ((q - m - 1) & mask)])


@njit(cache=True, nogil=True, inline="always")
def step_metric_params(mp: MetricParams, q: int, direction_profile: np.ndarray,
                       segment_profile: np.ndarray) -> MetricParams:
    """The metric conventions at internal step ``q``: the sign of an opposite excursion and
    the settling segments (this step's and the one before) from the profiles."""
    return MetricParams(mp.h, mp.t_start, mp.band, direction_profile[q], segment_profile[q],
                        segment_profile[q - 1] if q > 0 else segment_profile[0], mp.cv_band)


@njit(cache=True, nogil=True, inline="always")
def _arm_control(s: ArmState, a: Accumulators, y: float, sp: float, ff: float, first: bool,
                 p: ControllerParams, h: float) -> tuple:
    """Controller of one live arm at one scan; returns ``(u, s, a)``.

    Updates the accumulators that belong to the controller output (valve travel, time at a
    limit over the scan period ``h``); the error metrics follow in :func:`_arm_metrics`.
    """
    e = sp - y
    # Setpoint weights: proportional action on b sp - y, derivative on y - c sp (b = 1 and
    # c = 0 give exactly the error and the measurement, the same IEEE operations).
    yd = y - p.derivative_setpoint_weight * sp
    deriv = s.derivative
    if p.has_derivative:
        deriv = p.derivative_pole * deriv - p.derivative_gain * (
            yd - (yd if first else s.previous_derivative_input))
    v = p.kc * (p.setpoint_weight * sp - y) + s.integral + deriv + ff
    u = min(max(v, p.u_low), p.u_high)
    integral = s.integral + (p.integral_gain * e + p.tracking_gain * (u - v))
    a = Accumulators(
        ie=a.ie, iae=a.iae, ise=a.ise, itae=a.itae, peak_deviation=a.peak_deviation,
        opposite_excursion=a.opposite_excursion, settling_time=a.settling_time,
        valve_travel=a.valve_travel + abs(u - s.previous_output),
        time_at_limit=a.time_at_limit + h if u != v else a.time_at_limit,
        outside_band=a.outside_band,
    )
    return u, ArmState(integral, deriv, yd, u), a


@njit(cache=True, nogil=True, inline="always")
def _arm_metrics(a: Accumulators, last: float, e: float, t: float, weight: float,
                 mp: MetricParams) -> tuple:
    """Error metrics of one live arm over one internal step; returns ``(a, last)``.

    ``mp.h`` is the internal step; ``weight = max(t - t_start, 0)``; ``last`` is the last time
    outside the settling band since the latest event (-1: not since then), and
    ``a.settling_time`` the longest settling time of the completed events until
    :func:`_finish` adds the last one.
    """
    h = mp.h
    ae = abs(e)
    longest = a.settling_time
    if mp.segment != mp.previous_segment:  # a new event: the previous one's settling is known
        if last >= 0.0:
            longest = max(longest, last + h - mp.previous_segment)
        last = -1.0
    if ae > mp.band and t >= mp.t_start:
        last = t
    # Keyword construction: a name added to ACCUMULATOR_NAMES but updated neither here nor in
    # _arm_control fails to compile instead of being carried along unchanged.
    a = Accumulators(
        ie=a.ie + e * h, iae=a.iae + ae * h, ise=a.ise + e * e * h,
        itae=a.itae + weight * ae * h,
        peak_deviation=max(a.peak_deviation, ae),
        opposite_excursion=max(a.opposite_excursion, mp.direction * e),
        settling_time=longest,
        valve_travel=a.valve_travel,
        time_at_limit=a.time_at_limit,
        outside_band=a.outside_band + h if ae > mp.cv_band else a.outside_band,
    )
    return a, last


@njit(cache=True, nogil=True)
def _flow_fraction(vp: ValveParams, table: np.ndarray, position: float) -> float:
    """Flow fraction of a stem position (% of travel) for characteristic codes 1-3."""
    x = min(max(position / 100.0, 0.0), 1.0)
    if vp.kind == 1:
        return x
    if vp.kind == 2:
        return math.exp(vp.log_rangeability * (x - 1.0))
    for r in range(table.shape[0] - 1):
        if x <= table[r + 1, 0] or r == table.shape[0] - 2:
            span = table[r + 1, 0] - table[r, 0]
            return table[r, 1] + (table[r + 1, 1] - table[r, 1]) * (x - table[r, 0]) / span
    return table[0, 1]


@njit(cache=True, nogil=True)
def _valve_params(kind: int, plant: np.ndarray, i: int, hi: float, u_low: float,
                  u_high: float, table: np.ndarray) -> ValveParams:
    """Valve constants of sample ``i`` (plant columns 4-9), internal step ``hi``."""
    span = u_high - u_low
    nominal = 100.0 * (-u_low) / span
    rate, rangeability = plant[i, 5], plant[i, 4]
    vp = ValveParams(kind, rangeability, math.log(max(rangeability, 1.0 + 1e-12)),
                     rate * hi if rate > 0.0 else math.inf, 0.5 * plant[i, 6], plant[i, 7],
                     plant[i, 8], decay(hi, plant[i, 9]), nominal, span, u_low, 0.0, 1.0)
    if kind == 0:
        return vp
    x0 = nominal / 100.0
    if kind == 1:
        slope = 1.0
    elif kind == 2:
        slope = vp.log_rangeability * math.exp(vp.log_rangeability * (x0 - 1.0))
    else:
        r = 0
        while r < table.shape[0] - 2 and x0 >= table[r + 1, 0]:
            r += 1
        slope = (table[r + 1, 1] - table[r, 1]) / (table[r + 1, 0] - table[r, 0])
    return ValveParams(vp.kind, vp.rangeability, vp.log_rangeability, vp.max_step,
                       vp.half_deadband, vp.stiction_s, vp.stiction_j, vp.lag_pole, nominal,
                       span, u_low, _flow_fraction(vp, table, nominal), slope)


@njit(cache=True, nogil=True, inline="always")
def _valve_at_rest(vp: ValveParams) -> ValveState:
    x0 = vp.nominal
    return ValveState(x0, True, x0, 0.0, 0.0, x0, x0, x0, 0.0)


@njit(cache=True, nogil=True, inline="always")
def _valve_scan(vs: ValveState, u: float, vp: ValveParams) -> ValveState:
    """The stem's response to a new controller output ``u`` (deviation, output units) at a
    scan: stiction (Choudhury, Thornhill and Shah 2005) or deadband, else the command."""
    x = min(max(100.0 * (u - vp.low) / vp.span, 0.0), 100.0)
    held, stuck, stuck_at = vs.held, vs.stuck, vs.stuck_at
    stop_direction, direction = vs.stop_direction, vs.direction
    if vp.stiction_s > 0.0:
        change = x - vs.previous_command
        moving = 1.0 if change > 0.0 else (-1.0 if change < 0.0 else 0.0)
        if not stuck and (moving == 0.0 or moving != direction):
            # The stem stops when the command stops or reverses.
            stuck, stuck_at, stop_direction = True, vs.previous_command, direction
        offset = 0.5 * (vp.stiction_s - vp.stiction_j)
        if stuck:
            away = x - stuck_at
            sign = 1.0 if away > 0.0 else -1.0
            # Moving on in the same direction needs J; a reversal needs S (deadband + stickband).
            threshold = vp.stiction_j if sign == stop_direction else vp.stiction_s
            if away != 0.0 and abs(away) > threshold:
                stuck, direction = False, sign
                held = x - direction * offset
        else:
            held = x - direction * offset
    elif vp.half_deadband > 0.0:
        held = min(max(held, x - vp.half_deadband), x + vp.half_deadband)
    else:
        held = x
    return ValveState(x, stuck, stuck_at, stop_direction, direction, held, vs.stem,
                      vs.position, vs.drive)


@njit(cache=True, nogil=True, inline="always")
def _valve_motion(vs: ValveState, vp: ValveParams) -> tuple:
    """Rate limit and actuator lag over one internal step; returns ``(state, position)``,
    the stem position in % of travel."""
    stem = vs.stem + min(max(vs.held - vs.stem, -vp.max_step), vp.max_step)
    position = vp.lag_pole * vs.position + (1.0 - vp.lag_pole) * stem
    return ValveState(vs.previous_command, vs.stuck, vs.stuck_at, vs.stop_direction,
                      vs.direction, vs.held, stem, position, vs.drive), position


@njit(cache=True, nogil=True, inline="always")
def _valve_input(vp: ValveParams, position: float) -> float:
    """The process input (deviation, output units) a stem position gives, for the linear and
    the equal-percentage characteristic (codes 1 and 2; :func:`_installed_input` for 3)."""
    if vp.kind == 1:
        return vp.span * (position - vp.nominal) / 100.0
    x = min(max(position / 100.0, 0.0), 1.0)
    return vp.span * (math.exp(vp.log_rangeability * (x - 1.0)) - vp.flow0) / vp.slope0


@njit(cache=True, nogil=True)
def _installed_input(vp: ValveParams, table: np.ndarray, position: float) -> float:
    """:func:`_valve_input` for the installed characteristic (code 3) from its table."""
    return vp.span * (_flow_fraction(vp, table, position) - vp.flow0) / vp.slope0


@njit(cache=True, nogil=True)
def _valve_step(vs: ValveState, vp: ValveParams, table: np.ndarray) -> tuple:
    """One internal step of the valve element alone: ``(state, w)``, ``w`` the process input
    (deviation, output units) the stem position gives (what the kernel does in
    :func:`_actuate` and, for the installed characteristic, its caller)."""
    vs, position = _valve_motion(vs, vp)
    if vp.kind == 3:
        return vs, _installed_input(vp, table, position)
    return vs, _valve_input(vp, position)


@njit(cache=True, nogil=True, inline="always")
def _secondary_control(state: tuple, e: float, sec: SecondaryParams) -> tuple:
    """Secondary PI (ideal form, back-calculation anti-windup) at its scan; ``state`` and the
    result are ``(integral, output)``, deviation units."""
    v = sec.kc * e + state[0]
    u = min(max(v, sec.u_low), sec.u_high)
    return state[0] + sec.integral_gain * e + sec.tracking_gain * (u - v), u


@njit(cache=True, nogil=True, inline="always")
def _actuate(u: float, vs: ValveState, ss: tuple, xs: tuple, cs: PathCoefficients,
             vp: ValveParams, valve_kind: int, sec: SecondaryParams,
             secondary_scan: bool) -> tuple:
    """What the primary output ``u`` drives over one internal step; returns ``(drive,
    position, flow, valve state, secondary state)``. ``secondary_scan``: the secondary
    controller scans at this step (``q % sec.every == 0``, counted once per step by the
    caller: an integer division per arm and step took about a tenth of the run).

    Without a secondary loop ``drive`` is ``u`` through the valve (if any), the process input.
    With one, ``u`` is the flow setpoint of the secondary controller, whose output goes through
    the valve: ``drive`` is the secondary path's new input and ``flow`` its output (the
    secondary path's state ``xs`` before this step), the process input. The caller writes
    ``drive`` into the ring and steps the path. With the installed characteristic (code 3)
    ``drive`` is left to the caller, from the stem ``position`` (% of travel) and the table
    (:func:`_installed_input`). No array passes through here: with the ring and the table
    passed in, every call took and released references to them, atomic updates at every
    internal step (27 % of the steam heater's run; numba's pruning removes the pairs in
    straight-line helpers such as :func:`_delayed_step`, not across this one's branches).
    """
    flow = 0.0
    drive = u
    if sec.present:
        flow = _output(xs, cs)
        if secondary_scan:
            ss = _secondary_control(ss, u - flow, sec)
            if valve_kind > 0:
                vs = _valve_scan(vs, ss[1], vp)
        drive = ss[1]
    position = 0.0
    if valve_kind > 0:
        moved_from = vs.position
        vs, position = _valve_motion(vs, vp)
        if valve_kind < 3:
            # A stem that has not moved gives the input it gave (a stuck valve, most steps:
            # the equal-percentage curve's exp was a quarter of the run). At rest the input
            # is exactly 0.0, what the characteristic gives at the nominal position.
            drive = vs.drive if position == moved_from else _valve_input(vp, position)
            vs = ValveState(vs.previous_command, vs.stuck, vs.stuck_at, vs.stop_direction,
                            vs.direction, vs.held, vs.stem, position, drive)
    return drive, position, flow, vs, ss


@njit(cache=True, nogil=True, inline="always")
def _probe_actuate(u: float, lag: float, ss: tuple, xs: tuple, cs: PathCoefficients,
                   pole: float, sec: SecondaryParams, secondary_scan: bool) -> tuple:
    """The stability probe's drive over one internal step: the loop linearised at the nominal
    position (valve slope 1, the actuator lag with pole ``pole`` per internal step, no
    stiction, deadband, rate limit or limits); returns ``(lag, flow, secondary state)``: the
    lag's output is the drive, and ``flow`` as in :func:`_actuate`."""
    if not sec.present:
        return pole * lag + (1.0 - pole) * u, 0.0, ss
    flow = _output(xs, cs)
    if secondary_scan:
        ss = _secondary_control(ss, u - flow, sec)
    return pole * lag + (1.0 - pole) * ss[1], flow, ss


@njit(cache=True, nogil=True, inline="always")
def _probe_control(s: ProbeState, y: float, k: int, p: ControllerParams, q2: int,
                   q3: int) -> tuple:
    """Stability probe: the linear loop (no limits) after a unit load at the process input.

    Returns ``(u, s)``; the peaks of ``s`` cover ``[T/2, 3T/4)`` (from step ``q2``) and
    ``[3T/4, T)`` (from step ``q3``).
    """
    diverged = s.diverged or not math.isfinite(y) or abs(y) > 1e12
    e = -y
    deriv = (p.derivative_pole * s.derivative - p.derivative_gain * (y - s.previous_cv)
             if p.has_derivative else s.derivative)
    u = p.kc * e + s.integral + deriv
    first, second = s.early_peak, s.late_peak
    if k >= q3:
        second = max(second, abs(e))
    elif k >= q2:
        first = max(first, abs(e))
    return u, ProbeState(s.integral + p.integral_gain * e, deriv, y, first, second, diverged)


@njit(cache=True, nogil=True, inline="always")
def _envelope_bin(y: float, grid: BinGrid) -> int:
    """Histogram bin of ``y``; values outside the grid fall in the first or last bin."""
    b = int((y - grid.low) / grid.width)
    return min(max(b, 0), grid.n_bins - 1)


@njit(cache=True, nogil=True)
def _finish(i: int, arm: int, a: Accumulators, last_outside: float, segment: float,
            alive: bool, probe: bool, t_end: float, mp: MetricParams,
            accumulators: np.ndarray, unstable: np.ndarray) -> None:
    """Write one arm's accumulators (NaN when the arm ran away) and whether it ran away.

    The stability probe's verdict is written apart (``loop_unstable``): the caller confirms it
    and blanks the samples it keeps as unstable. Every column of :data:`ACCUMULATOR_NAMES` is
    written; only the slots named here are rewritten, the others are the running value as it
    stands. ``last_outside`` and ``segment`` (time units) are the arm's last time outside the
    band and the start of the last event: the settling time is the longest over the events.
    """
    final = 0.0 if last_outside < 0.0 else min(last_outside + mp.h, t_end) - segment
    settling = max(a.settling_time, final)
    for q in range(N_ACCUMULATORS):
        value = a[q]
        if q == SETTLING_TIME:
            value = settling
        elif q == OPPOSITE_EXCURSION:
            value = max(a.opposite_excursion, 0.0)
        accumulators[i, arm, q] = value if alive else math.nan
    unstable[i, arm] = not alive


@njit(cache=True, nogil=True)
def _commit_envelope(env_buf: np.ndarray, envelope_counts: np.ndarray, keep: bool) -> None:
    """Add a sample's buffered envelope bins (when it is stable) and clear the buffer."""
    for arm in range(2):
        for point in range(env_buf.shape[1]):
            if keep and env_buf[arm, point] >= 0:
                envelope_counts[arm, point, env_buf[arm, point]] += 1
            env_buf[arm, point] = -1


@njit(cache=True, nogil=True)
def disturbance_inputs(i: int, seed: np.uint64, disturbances: np.ndarray,
                        disturbance_profile: np.ndarray, noise: np.ndarray, substeps: int,
                        inputs: np.ndarray, measured: np.ndarray, held: np.ndarray) -> None:
    """Every disturbance's input at every internal step (``inputs``, shape (J, T S)) and its
    transmitter noise at every scan (written into ``measured``, shape (J, T)).

    ``noise`` rows: start scan, filter pole, innovation scale, state (updated in place),
    stationary standard deviation, disturbance index; ``held`` (J,) is scratch for the noise
    each disturbance holds over a scan. Per scan the filtered-noise events draw
    first (in order), then each noisy transmitter (in disturbance order); filtered noise is drawn
    once per scan and held over it, so it does not change with ``substeps``.
    """
    n_d, n_steps = inputs.shape[0], measured.shape[1]
    noise[:, 3] = 0.0
    draws = normal_stream(seed)
    noisy = noise.shape[0] > 0
    for j in range(n_d):
        noisy = noisy or disturbances[i, j, D_NOISE] > 0.0
    if not noisy:  # the common case: the deterministic profile, no draws
        inputs[:, :] = disturbance_profile
        measured[:, :] = 0.0
        return
    for k in range(n_steps):
        held[:] = 0.0
        for e in range(noise.shape[0]):
            if k >= noise[e, 0]:
                if k == noise[e, 0]:
                    # Start from the stationary distribution: the noise is already running.
                    draws, draw = next_normal(draws)
                    noise[e, 3] = noise[e, 4] * draw
                held[int(noise[e, 5])] += noise[e, 3]
                draws, draw = next_normal(draws)
                noise[e, 3] = noise[e, 1] * noise[e, 3] + noise[e, 2] * draw
        for j in range(n_d):
            for sub in range(substeps):
                q = k * substeps + sub
                inputs[j, q] = disturbance_profile[j, q] + held[j]
        for j in range(n_d):
            measured[j, k] = 0.0
            if disturbances[i, j, D_NOISE] > 0.0:
                draws, draw = next_normal(draws)
                measured[j, k] = disturbances[i, j, D_NOISE] * draw


@njit(cache=True, nogil=True, inline="always")
def feedforward_constants(ffp: np.ndarray, j: int) -> tuple:
    """Row ``j`` of the feedforward set-up as the tuple :func:`feedforward_step` reads."""
    return ffp[j, 0], ffp[j, 1], ffp[j, 2], ffp[j, 3], ffp[j, 4], ffp[j, 5]


@njit(cache=True, nogil=True, inline="always")
def feedforward_step(state: tuple, d: float, k: int, filtered: np.ndarray, row: int,
                     c: tuple, m_ff: int) -> tuple:
    """One scan of one disturbance's feedforward: its input filter on the measurement ``d``
    (written to ``filtered[row, k]``), the fractional delay and the discrete lead-lag.

    ``c`` is :func:`feedforward_constants`' tuple (pole, zero and gain scale of the lead-lag,
    the weights of the newer and older delayed sample, the input filter's pole); ``state`` and
    the result are ``(filter, lead-lag output, previous lead-lag input)``.
    """
    pole, zero, scale, weight_new, weight_old, input_pole = c
    smoothed = input_pole * state[0] + (1.0 - input_pole) * d
    filtered[row, k] = smoothed
    newer = filtered[row, k - m_ff] if k >= m_ff else 0.0
    older = filtered[row, k - m_ff - 1] if k >= m_ff + 1 else 0.0
    ff_in = weight_new * newer + weight_old * older
    return smoothed, pole * state[1] + scale * (ff_in - zero * state[2]), ff_in


@njit(cache=True, nogil=True)
def _feedforward_output(measured: np.ndarray, ffp: np.ndarray, delays: np.ndarray,
                        filtered: np.ndarray, out: np.ndarray) -> None:
    """The summed feedforward at every scan from every measured disturbance.

    ``ffp`` rows (one per disturbance): pole, zero and gain scale of the discrete lead-lag, the
    weights of the newer and older delayed sample, the input filter's pole, and whether the
    disturbance has a feedforward (1) or not (0); ``delays`` the whole scans of each delay.
    The input filter is a control system's digital first-order filter on the measurement.
    """
    out[:] = 0.0
    for j in range(measured.shape[0]):
        if ffp[j, 6] == 0.0:
            continue
        state = (0.0, 0.0, 0.0)
        c = feedforward_constants(ffp, j)
        for k in range(out.shape[0]):
            state = feedforward_step(state, measured[j, k], k, filtered, 0, c, delays[j])
            out[k] += state[1]


@njit(cache=True, nogil=True)
def _disturbances_and_feedforward(i: int, kinds: np.ndarray, disturbances: np.ndarray,
                                  hi: float, substeps: int, inputs: np.ndarray,
                                  effect: np.ndarray, measured: np.ndarray, ffp: np.ndarray,
                                  delays: np.ndarray, filtered: np.ndarray,
                                  out: np.ndarray) -> None:
    """The disturbances' summed effect on the CV at every internal step (``effect``, (T S,)),
    each one's measurement at every scan added to its transmitter noise in ``measured``, and
    the summed feedforward at every scan (``out``, as :func:`_feedforward_output`).

    Each path is stepped exactly for its input held over an internal step (the plant's own
    discretisation, fractional dead time included); the transmitter is a first-order lag, or
    reads the disturbance directly when its time constant is zero. The path, its transmitter
    and its feedforward are independent recursions: one loop lets their latencies overlap."""
    n_steps = measured.shape[1]
    n_internal = inputs.shape[1]
    effect[:] = 0.0
    out[:] = 0.0
    for j in range(inputs.shape[0]):
        m_d, f_d = split_delay(disturbances[i, j, D_DELAY], hi)
        m_d = min(m_d, n_internal)
        cd = path_coefficients(kinds[j], disturbances[i, j, D_GAIN], disturbances[i, j, D_TAU1],
                           disturbances[i, j, D_TAU2], hi, f_d)
        a_sensor = decay(hi, disturbances[i, j, D_SENSOR])
        gain_sensor, direct = 1.0 - a_sensor, disturbances[i, j, D_SENSOR] <= 0.0
        with_ff = ffp[j, 6] != 0.0
        c = feedforward_constants(ffp, j)
        xd = (0.0, 0.0)
        sensor = 0.0
        state = (0.0, 0.0, 0.0)
        for k in range(n_steps):
            for sub in range(substeps):
                q = k * substeps + sub
                effect[q] += _output(xd, cd)
                d = inputs[j, q]
                if sub == 0:
                    measured[j, k] += d if direct else sensor
                new = inputs[j, q - m_d] if q >= m_d else 0.0
                old = inputs[j, q - m_d - 1] if q >= m_d + 1 else 0.0
                xd = _path_step(xd, cd, new, old)
                sensor = a_sensor * sensor + gain_sensor * d
            if with_ff:
                state = feedforward_step(state, measured[j, k], k, filtered, 0, c, delays[j])
                out[k] += state[1]


@njit(cache=True, nogil=True)
def _simulate_sample(
    i: int, kinds: np.ndarray, plant: np.ndarray, effect: np.ndarray, ff_total: np.ndarray,
    setpoint_profile: np.ndarray, direction_profile: np.ndarray, segment_profile: np.ndarray,
    p: ControllerParams, mp: MetricParams, limit: float, grid: BinGrid,
    envelope_index: np.ndarray, slot: int, ring: np.ndarray, env_buf: np.ndarray,
    trajectories: np.ndarray, feedback_arm: bool, h: float, substeps: int,
    valve_kind: int, valve_table: np.ndarray, sec: SecondaryParams,
) -> tuple:
    """Simulate sample ``i``; returns ``(acc fb, acc fbff, last outside fb, last outside fbff,
    alive fb, alive fbff, unstable)``.

    ``effect`` is the disturbances' summed effect on the CV at every internal step and
    ``ff_total`` the summed feedforward at every scan (see
    :func:`_disturbances_and_feedforward`): the disturbance paths and the feedforward are open
    loop, so they are computed before the loop. The controller and the stability probe run once per
    scan ``h`` (``envelope_index`` has one entry per scan); the process paths and the error
    metrics run ``substeps`` times per scan at ``mp.h = h / substeps``, the controller output
    held. Without ``feedback_arm`` only the feedforward arm runs (another design on the same
    plant and noise): the feedback-only arm and the stability probe are skipped, arm 0 keeps
    its initial values and ``unstable`` is False.
    """
    n_steps, hi = envelope_index.shape[0], mp.h
    n_internal = n_steps * substeps
    m_p, f_p = split_delay(plant[i, 3], hi)
    m_q, f_q = split_delay(plant[i, 3], h)
    # longer delays only ever read zeros
    m_p, m_q = min(m_p, n_internal), min(m_q, n_steps)
    cp = path_coefficients(kinds[0], plant[i, 0], plant[i, 1], plant[i, 2], hi, f_p)
    # The probe's actuator lag (the valve linearised at its nominal position: slope 1).
    pole_q = decay(hi, plant[i, 9]) if valve_kind > 0 and plant[i, 9] > 0.0 else 0.0
    fine_q = sec.present or pole_q > 0.0
    # The probe runs at the scan: the process stepped exactly over a scan with its input held
    # (with a secondary loop or an actuator lag it runs with them, at the internal step).
    cq = cp if substeps == 1 or fine_q else path_coefficients(
        kinds[0], plant[i, 0], plant[i, 1], plant[i, 2], h, f_q)
    m_s, f_s = split_delay(plant[i, 13], hi)
    m_s = min(m_s, n_internal)
    cs = path_coefficients(kinds[1], plant[i, 10], plant[i, 11], plant[i, 12], hi, f_s)
    # The probe's secondary loop is linear: no output limits.
    secq = SecondaryParams(sec.present, sec.kc, sec.integral_gain, 0.0, -math.inf, math.inf,
                           sec.every)
    size = ring_size(max(m_p, m_q, m_s))
    mask = size - 1
    ring[:_RING_ROWS * size] = 0.0
    vp = _valve_params(valve_kind, plant, i, hi, sec.u_low if sec.present else p.u_low,
                       sec.u_high if sec.present else p.u_high, valve_table)
    ss0 = ss1 = ssq = (0.0, 0.0)  # secondary controllers: (integral, output)
    xs0 = xs1 = xsq = (0.0, 0.0)  # secondary paths
    lag_q = 0.0  # the probe's actuator lag
    v0 = v1 = _valve_at_rest(vp)
    w0 = w1 = 0.0  # process inputs (the controller outputs through the valve)
    acc0 = acc1 = INITIAL_ACCUMULATORS
    s0 = s1 = ArmState(0.0, 0.0, 0.0, 0.0)
    last0 = last1 = -1.0
    alive0 = alive1 = True
    x0 = x1 = xq = (0.0, 0.0)  # path states (x1, x2)
    sq = ProbeState(0.0, 0.0, 0.0, 0.0, 0.0, False)
    q2, q3 = n_steps // 2, (3 * n_steps) // 4
    phase = 0  # internal steps since the secondary controller's last scan
    u0 = u1 = uq = 0.0
    row_s = _SECONDARY_ROW
    for k in range(n_steps):
        ff_out = ff_total[k]
        for sub in range(substeps):
            q = k * substeps + sub
            t = q * hi
            weight = max(t - mp.t_start, 0.0)
            mpk = step_metric_params(mp, q, direction_profile, segment_profile)
            # q % sec.every == 0, counted rather than divided
            secondary_scan = sec.present and phase == 0
            phase = phase + 1 if phase + 1 < sec.every else 0
            yd = effect[q]
            sp = setpoint_profile[q]
            y0, y1 = _output(x0, cp) + yd, _output(x1, cp) + yd
            alive0 = alive0 and math.isfinite(y0) and not abs(y0) > limit
            alive1 = alive1 and math.isfinite(y1) and not abs(y1) > limit
            if sub == 0:  # the scan: controllers, probe
                if feedback_arm and alive0:
                    u0, s0, acc0 = _arm_control(s0, acc0, y0, sp, 0.0, k == 0, p, h)
                    if valve_kind > 0 and not sec.present:
                        v0 = _valve_scan(v0, u0, vp)
                if alive1:
                    u1, s1, acc1 = _arm_control(s1, acc1, y1, sp, ff_out, k == 0, p, h)
                    if valve_kind > 0 and not sec.present:
                        v1 = _valve_scan(v1, u1, vp)
                if feedback_arm:
                    uq, sq = _probe_control(sq, _output(xq, cq), k, p, q2, q3)
                    if not fine_q:  # at the scan
                        xq = _delayed_step(ring, 2 * size, k, mask, m_q, xq, cq, uq + 1.0)
                if slot >= 0:
                    _record(trajectories, slot, k, alive0, alive1, y0, y1, u0, u1)
                if envelope_index[k] >= 0:
                    env_buf[0, envelope_index[k]] = _envelope_bin(y0, grid) if alive0 else -1
                    env_buf[1, envelope_index[k]] = _envelope_bin(y1, grid) if alive1 else -1
            if feedback_arm and alive0:
                acc0, last0 = _arm_metrics(acc0, last0, sp - y0, t, weight, mpk)
                w0, at0, flow0, v0, ss0 = _actuate(u0, v0, ss0, xs0, cs, vp,
                                                        valve_kind, sec, secondary_scan)
                if valve_kind == 3:
                    w0 = _installed_input(vp, valve_table, at0)
                if sec.present:  # the secondary path, its input delayed through the ring
                    xs0 = _delayed_step(ring, row_s * size, q, mask, m_s, xs0, cs, w0)
                    w0 = flow0
                x0 = _delayed_step(ring, 0, q, mask, m_p, x0, cp, w0)
            if alive1:
                acc1, last1 = _arm_metrics(acc1, last1, sp - y1, t, weight, mpk)
                w1, at1, flow1, v1, ss1 = _actuate(u1, v1, ss1, xs1, cs, vp,
                                                        valve_kind, sec, secondary_scan)
                if valve_kind == 3:
                    w1 = _installed_input(vp, valve_table, at1)
                if sec.present:
                    xs1 = _delayed_step(ring, (row_s + 1) * size, q, mask, m_s, xs1, cs, w1)
                    w1 = flow1
                x1 = _delayed_step(ring, size, q, mask, m_p, x1, cp, w1)
            if feedback_arm and fine_q:  # the probe with its (linear) secondary loop and lag
                lag_q, flowq, ssq = _probe_actuate(uq + 1.0, lag_q, ssq, xsq, cs, pole_q, secq,
                                                   secondary_scan)
                wq = lag_q
                if sec.present:
                    xsq = _delayed_step(ring, (row_s + 2) * size, q, mask, m_s, xsq, cs, wq)
                    wq = flowq
                xq = _delayed_step(ring, 2 * size, q, mask, m_p, xq, cp, wq)
    # Unstable only when the probe's error grows from the third to the last quarter of the
    # window: a stable loop that recovers slowly (a very long integral time) decays, however
    # little, and is not flagged; not settling within the window is the settling time's finding.
    unstable = feedback_arm and (
        sq.diverged or (sq.late_peak > sq.early_peak and sq.late_peak > 1e-9))
    return acc0, acc1, last0, last1, alive0, alive1, unstable


@njit(cache=True, nogil=True)
def _record(trajectories: np.ndarray, slot: int, k: int, alive0: bool, alive1: bool,
            y0: float, y1: float, u0: float, u1: float) -> None:
    if alive0:
        trajectories[slot, 0, k], trajectories[slot, 2, k] = y0, u0
    if alive1:
        trajectories[slot, 1, k], trajectories[slot, 3, k] = y1, u1


@njit(cache=True, nogil=True)
def loop_setup(controller: np.ndarray, metric_setup: np.ndarray, envelope_edges: np.ndarray,
                h: float, hi: float) -> tuple:
    """The controller's, the metrics' and the envelope grid's constants, computed once:
    ``(ControllerParams, MetricParams, BinGrid)`` for scan ``h`` and internal step ``hi``."""
    kc, ti, td, tf, tt = controller[0], controller[1], controller[2], controller[3], controller[4]
    # The textbook expressions, evaluated once in the same operation order.
    p = ControllerParams(kc, tf / (tf + h), kc * td / (tf + h), kc * h / ti, h / tt,
                         controller[5], controller[6], td > 0.0, controller[8], controller[9])
    # The direction slot is filled per step from direction_profile (metric_setup[2] is unused).
    mp = MetricParams(hi, metric_setup[0], metric_setup[1], metric_setup[2], 0.0, 0.0,
                      metric_setup[3])
    n_bins = envelope_edges.shape[0] - 1
    grid = BinGrid(envelope_edges[0], (envelope_edges[-1] - envelope_edges[0]) / n_bins, n_bins)
    return p, mp, grid


@njit(cache=True, nogil=True)
def feedforward_setup(feedforward: np.ndarray, h: float, n_steps: int) -> tuple:
    """Each disturbance's discrete feedforward (rows as :func:`_feedforward_output` reads
    them) and the whole scans of its delay."""
    n_d = feedforward.shape[0]
    # Matched pole-zero compensators: exact inverse of ZOH first-order paths at the samples.
    ffp = np.zeros((n_d, 7))
    ff_delays = np.zeros(n_d, dtype=np.int64)
    for j in range(n_d):
        ff_pole, ff_zero = decay(h, feedforward[j, 2]), decay(h, feedforward[j, 1])
        ff_gain = feedforward[j, 0]
        ff_scale = ff_gain * (1.0 - ff_pole) / (1.0 - ff_zero) if ff_zero < 1.0 else ff_gain
        m_ff, f_ff = split_delay(feedforward[j, 3], h)
        ff_delays[j] = min(m_ff, n_steps)
        ffp[j, 0], ffp[j, 1], ffp[j, 2] = ff_pole, ff_zero, ff_scale
        ffp[j, 3], ffp[j, 4] = delay_weights(f_ff, h, feedforward[j, 6])
        ffp[j, 5] = decay(h, feedforward[j, 4])
        ffp[j, 6] = feedforward[j, 5]
    return ffp, ff_delays


@njit(cache=True, nogil=True)
def noise_setup(noise_events: np.ndarray, h: float) -> np.ndarray:
    """The filtered-noise events' rows as :func:`disturbance_inputs` reads them."""
    noise = np.zeros((noise_events.shape[0], 6))
    for e in range(noise_events.shape[0]):
        pole = decay(h, noise_events[e, 2])
        noise[e, 0], noise[e, 1] = noise_events[e, 0], pole
        noise[e, 2] = noise_events[e, 1] * math.sqrt(1.0 - pole * pole)
        noise[e, 4], noise[e, 5] = noise_events[e, 1], noise_events[e, 3]
    return noise


@njit(cache=True, nogil=True)
def open_loop(i: int, seeds: np.ndarray, disturbance_kinds: np.ndarray,
              disturbances: np.ndarray, disturbance_profile: np.ndarray, noise: np.ndarray,
              hi: float, substeps: int, ffp: np.ndarray, ff_delays: np.ndarray,
              noise_record: np.ndarray, noise_replay: np.ndarray, inputs: np.ndarray,
              effect: np.ndarray, measured: np.ndarray, held: np.ndarray,
              filtered: np.ndarray, ff_total: np.ndarray) -> None:
    """Sample ``i``'s open-loop signals: the disturbances' summed effect on the CV at every
    internal step (``effect``) and the summed feedforward at every scan (``ff_total``),
    simulated or replayed from ``noise_replay`` (and kept in ``noise_record``) when those have
    columns. The rest of the arrays are scratch (see :func:`simulate_kernel`)."""
    n_internal, n_steps = effect.shape[0], measured.shape[1]
    if noise_replay.shape[1] > 0:
        effect[:] = noise_replay[i, :n_internal]
        for j in range(measured.shape[0]):
            measured[j, :] = noise_replay[i, n_internal + j * n_steps:
                                          n_internal + (j + 1) * n_steps]
        _feedforward_output(measured, ffp, ff_delays, filtered, ff_total)
    else:
        disturbance_inputs(i, seeds[i], disturbances, disturbance_profile, noise, substeps,
                            inputs, measured, held)
        _disturbances_and_feedforward(i, disturbance_kinds, disturbances, hi, substeps, inputs,
                                      effect, measured, ffp, ff_delays, filtered, ff_total)
    if noise_record.shape[1] > 0:
        noise_record[i, :n_internal] = effect
        for j in range(measured.shape[0]):
            noise_record[i, n_internal + j * n_steps:
                         n_internal + (j + 1) * n_steps] = measured[j, :]



@njit(cache=True, nogil=True)
def simulate_kernel(
    kinds: np.ndarray,            # (2,) int: process and secondary path kinds
    plant: np.ndarray,            # (N, 14): Kp, tp1, tp2, thp, valve: rangeability, rate limit,
                                  # deadband, S, J, actuator lag; secondary path: K, t1, t2, theta
    disturbance_kinds: np.ndarray,  # (J,) int: each disturbance path's kind
    disturbances: np.ndarray,     # (N, J, 6): Kd, td1, td2, thd, transmitter lag, noise std
    seeds: np.ndarray,            # (N,) uint64 per-sample random seeds
    h: float,                     # the controller's scan period
    disturbance_profile: np.ndarray,  # (J, T S) deterministic disturbances, their units
    setpoint_profile: np.ndarray,     # (T S,) setpoint deviation, CV units
    noise_events: np.ndarray,     # (E, 4): start scan, stationary std, filter time constant,
                                  # disturbance index
    controller: np.ndarray,       # (10,): kc, ti, td, tf, tt, u_low, u_high, divergence limit,
                                  # setpoint weights b and c
    feedforward: np.ndarray,      # (J, 7): gain, lead, lag, delay, input filter time constant,
                                  # has a feedforward (1) or not (0: unmeasured or none),
                                  # lag the delay's fraction rides on (see delay_weights)
    metric_setup: np.ndarray,     # (4,): event start time, settling band, unused, CV band
    direction_profile: np.ndarray,  # (T S,): sign of e that counts as an opposite excursion
    segment_profile: np.ndarray,  # (T S,): start time of the latest event (settling segments)
    envelope_edges: np.ndarray,   # (B+1,) CV bin edges
    envelope_index: np.ndarray,   # (T,) int: envelope time point recorded at scan k, or -1
    trajectory_slot: np.ndarray,  # (N,) int, -1 = do not keep
    accumulators: np.ndarray,     # out (N, 2, N_ACCUMULATORS)
    unstable: np.ndarray,         # out (N, 2) bool
    envelope_counts: np.ndarray,  # out (2, P, B) int64, added to
    trajectories: np.ndarray,     # out (S, 4, T): CV fb, CV fbff, output fb, output fbff
    loop_unstable: np.ndarray,    # out (N,) bool: the feedback loop itself is unstable (probe)
    feedback_arm: bool,           # False: only the feedforward arm (see _simulate_sample)
    substeps: int,                # S internal steps per scan (profiles: one entry per step)
    valve_kind: int,              # 0: no valve; 1 linear, 2 equal-percentage, 3 installed
    valve_table: np.ndarray,      # (P, 2): installed characteristic, travel and flow fractions
    secondary: np.ndarray,        # (7,): present, kc, ti, tt, u_low, u_high, scans per primary
    noise_record: np.ndarray,     # out (N, T S + J T) or (0, 0): the disturbances' summed
                                  # effect on the CV per internal step, then each one's
                                  # measurement per scan
    noise_replay: np.ndarray,     # (N, T S + J T) to replay instead of simulating, or (0, 0)
) -> None:
    n_steps, n_internal = envelope_index.shape[0], setpoint_profile.shape[0]
    n_d = disturbances.shape[1]
    hi = h / substeps
    p, mp, grid = loop_setup(controller, metric_setup, envelope_edges, h, hi)
    ffp, ff_delays = feedforward_setup(feedforward, h, n_steps)
    scans = max(int(secondary[6]), 1)
    h_s = h / scans
    sec = SecondaryParams(
        secondary[0] > 0.0, secondary[1],
        secondary[1] * h_s / secondary[2] if secondary[0] > 0.0 else 0.0,
        h_s / secondary[3] if secondary[0] > 0.0 else 0.0,
        secondary[4], secondary[5], max(substeps // scans, 1))
    noise = noise_setup(noise_events, h)
    ring = np.zeros(_RING_ROWS * ring_size(n_internal))
    env_buf = np.full((2, envelope_counts.shape[1]), -1, dtype=np.int64)
    # Per-sample scratch: each disturbance's input, the summed effect, the measurements, the
    # summed feedforward (memory T S (J + 1) + T (J + 2), independent of N).
    inputs = np.zeros((n_d, n_internal))
    effect = np.zeros(n_internal)
    measured = np.zeros((n_d, n_steps))
    filtered = np.zeros((1, n_steps))
    ff_total = np.zeros(n_steps)
    held = np.zeros(n_d)
    for i in range(plant.shape[0]):
        open_loop(i, seeds, disturbance_kinds, disturbances, disturbance_profile, noise, hi,
                  substeps, ffp, ff_delays, noise_record, noise_replay, inputs, effect,
                  measured, held, filtered, ff_total)
        acc0, acc1, last0, last1, alive0, alive1, probe = _simulate_sample(
            i, kinds, plant, effect, ff_total, setpoint_profile, direction_profile,
            segment_profile, p, mp, controller[7], grid, envelope_index, trajectory_slot[i],
            ring, env_buf, trajectories, feedback_arm, h, substeps, valve_kind, valve_table, sec)
        loop_unstable[i] = probe
        _commit_envelope(env_buf, envelope_counts, not probe)
        last_segment = segment_profile[n_internal - 1]
        _finish(i, 0, acc0, last0, last_segment, alive0, probe, n_steps * h, mp,
                accumulators, unstable)
        _finish(i, 1, acc1, last1, last_segment, alive1, probe, n_steps * h, mp,
                accumulators, unstable)
