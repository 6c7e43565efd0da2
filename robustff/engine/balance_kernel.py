"""The compiled simulation of plants built from balances: nonlinear tank, plug-flow pipe.

Every sample runs both arms (feedback only, feedback plus feedforward) through one pass over
time, as :mod:`robustff.engine.kernel` does for transfer-function plants, and writes the same
per-arm accumulators. The plant (see :mod:`robustff.plant.balance_plant`) is

    m dy/dt = S(u, d) - w(u, d) y

in absolute values: blending tank ``w = u + d1``, ``S = u x2 + d1 d2``; heated tank ``w = d1``,
``S = d1 d2 + u lambda / c_p``. Over each internal step the inputs are held (the controller
output over the scan, the events' inputs over the internal step), and the step is the exact
solution ``y(t) = S/w + (y0 - S/w) exp(-w t / m)``, so the accuracy does not depend on the step.

The measurement sees the fluid that left the tank when the cumulative outflow was the pipe's
hold-up less than it is now (plug flow with a varying flow: the delay is the time the
integrated flow takes to fill the pipe), ``measurement dead time`` earlier. The kernel keeps
every internal step's cumulative outflow, tank state and held rates, so that the fluid's
leaving time is found exactly inside its step and its composition or temperature from the
exact solution there: no interpolation error, whatever the flows do.

Why its own helpers: numba's on-disk cache of a function is invalidated only by changes to the
file that defines it. This kernel is cached (``cache=True``), so it imports no compiled helper
from another file: the controller and the metrics follow the same definitions as
:mod:`robustff.engine.kernel` (checked in the tests against
:func:`robustff.engine.metrics.trajectory_metrics`), written here, and the accumulators are
written to the caller's columns through ``slots`` (:data:`BALANCE_ACCUMULATORS`).
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

from robustff.engine.random_draws import next_normal, normal_stream

__all__ = ["balance_kernel", "BALANCE_ACCUMULATORS", "LAW_NONE", "LAW_LINEAR", "LAW_BALANCE"]

#: The accumulators this kernel computes, in its own order (the caller maps them to the
#: columns of :data:`robustff.engine.kernel.ACCUMULATOR_NAMES`).
BALANCE_ACCUMULATORS: tuple[str, ...] = (
    "ie", "iae", "ise", "itae", "peak_deviation", "opposite_excursion",
    "settling_time", "valve_travel", "time_at_limit", "outside_band",
)
LAW_NONE, LAW_LINEAR, LAW_BALANCE = 0, 1, 2
# Accumulator positions (module constants are compile-time constants in numba).
_IE, _IAE, _ISE, _ITAE, _PEAK, _OPPOSITE, _SETTLING, _TRAVEL, _AT_LIMIT, _OUTSIDE = range(10)


@njit(cache=True, nogil=True)
def _decay(h: float, tau: float) -> float:
    """``exp(-h / tau)``, 0 without a lag."""
    return math.exp(-h / tau) if tau > 0.0 else 0.0


@njit(cache=True, nogil=True)
def _rates(kind: int, constant: float, u: float, d1: float, d2: float) -> tuple[float, float]:
    """Outflow ``w`` (kg per time unit) and inflow ``S`` of the balanced quantity; flows below
    zero are taken as zero (a stream cannot run backwards)."""
    u = max(u, 0.0)
    d1 = max(d1, 0.0)
    if kind == 0:
        return u + d1, u * constant + d1 * d2
    return d1, d1 * d2 + u * constant


@njit(cache=True, nogil=True)
def _advance(y: float, inflow: float, outflow: float, m: float, t: float) -> float:
    """The exact state after ``t`` with the rates held."""
    if outflow > 0.0:
        return y + (inflow / outflow - y) * -math.expm1(-outflow * t / m)
    return y + inflow * t / m


@njit(cache=True, nogil=True)
def _step(y: float, inflow: float, outflow: float, m: float, t: float) -> tuple[float, float]:
    """The exact state after ``t`` with the rates held and ``integral of y`` over ``t`` (one
    exponential for both)."""
    if outflow > 0.0:
        steady = inflow / outflow
        approach = -math.expm1(-outflow * t / m)
        return (y + (steady - y) * approach,
                steady * t + (y - steady) * approach * m / outflow)
    return y + inflow * t / m, y * t + 0.5 * inflow * t * t / m


@njit(cache=True, nogil=True)
def _law(kind: int, constant: float, setpoint: float, d1: float, d2: float) -> float:
    """The steady-state balance solved for the manipulated input (nominal constant)."""
    if kind == 0:
        gap = constant - setpoint
        if gap == 0.0:
            return math.inf if d1 * (setpoint - d2) > 0.0 else 0.0
        return d1 * (setpoint - d2) / gap
    return d1 * (setpoint - d2) / constant


@njit(cache=True, nogil=True)
def _measured_value(q: int, t_now: float, hi: float, dead: float, pipe: float,
                    cumulative: np.ndarray, state: np.ndarray, inflows: np.ndarray,
                    outflows: np.ndarray, m: float, y0: float, pointer: int) -> tuple:
    """The measured output at internal step ``q`` (time ``t_now``); returns ``(y, pointer)``.

    The measurement at ``t`` shows the fluid at the pipe's end at ``t - dead``, which left the
    tank at the time ``s`` when the cumulative outflow was ``pipe`` less. Rows ``0 .. q`` of
    ``cumulative`` and ``state`` hold the cumulative outflow and the tank state at the start of
    each step, rows ``0 .. q-1`` of ``inflows``/``outflows`` the rates held over it.
    """
    if dead == 0.0 and pipe == 0.0:
        return state[q], pointer
    seen = t_now - dead
    if seen < 0.0:
        return y0, pointer
    j = min(int(seen / hi), q)
    passed = cumulative[j]
    if j < q:
        passed += outflows[j] * (seen - j * hi)
    target = passed - pipe
    if target < 0.0:
        return y0, pointer  # fluid from before the window: the initial steady state
    while pointer < q and cumulative[pointer + 1] <= target:
        pointer += 1
    if pointer >= q or outflows[pointer] <= 0.0:
        return state[pointer], pointer
    inside = (target - cumulative[pointer]) / outflows[pointer]
    return _advance(state[pointer], inflows[pointer], outflows[pointer], m, inside), pointer


@njit(cache=True, nogil=True)
def _control(y: float, sp: float, first: bool, s: np.ndarray, arm: int, base: float,
             scale: float, bias: float, settings: np.ndarray) -> tuple[float, bool]:
    """The PI/PID of one arm at a scan (the definitions of :mod:`robustff.engine.kernel`):
    returns the absolute manipulated input and whether it is at a limit.

    ``s[arm]`` holds integral, derivative, previous derivative input. The output is
    ``base + scale v`` with ``v`` the controller's (ideal form, deviation units): ``base`` is
    the feedforward's flow (the bias without one), ``scale`` 1 for an added trim and the
    static computed flow over the nominal one for a multiplying trim (at least 0.001: with no
    throughput a ratio trim has no authority).
    """
    kc, pole, dgain, igain, tgain = settings[0], settings[1], settings[2], settings[3], settings[4]
    low, high, b, c = settings[5], settings[6], settings[8], settings[9]
    e = sp - y
    yd = y - c * sp
    deriv = s[arm, 1]
    if settings[10] > 0.0:
        deriv = pole * deriv - dgain * (yd - (yd if first else s[arm, 2]))
    v = kc * (b * sp - y) + s[arm, 0] + deriv
    unlimited = base + scale * v
    u = min(max(unlimited, bias + low), bias + high)
    s[arm, 0] += igain * e + tgain * (u - unlimited) / scale
    s[arm, 1], s[arm, 2] = deriv, yd
    return u, u != unlimited


@njit(cache=True, nogil=True)
def _metrics(acc: np.ndarray, arm: int, last: float, e: float, t: float, h: float,
             t_start: float, band: float, direction: float, segment: float,
             previous_segment: float, cv_band: float) -> float:
    """The error metrics of one arm over one internal step (:mod:`robustff.engine.metrics`);
    returns the last time outside the settling band since the latest event (-1: none)."""
    ae = abs(e)
    if segment != previous_segment:
        if last >= 0.0:
            acc[arm, _SETTLING] = max(acc[arm, _SETTLING], last + h - previous_segment)
        last = -1.0
    if ae > band and t >= t_start:
        last = t
    acc[arm, _IE] += e * h
    acc[arm, _IAE] += ae * h
    acc[arm, _ISE] += e * e * h
    acc[arm, _ITAE] += max(t - t_start, 0.0) * ae * h
    acc[arm, _PEAK] = max(acc[arm, _PEAK], ae)
    acc[arm, _OPPOSITE] = max(acc[arm, _OPPOSITE], direction * e)
    if ae > cv_band:
        acc[arm, _OUTSIDE] += h
    return last


@njit(cache=True, nogil=True)
def _feedforward_flow(law: int, kind: int, measured: np.ndarray, initial: np.ndarray,
                      ff: np.ndarray, sp_abs: float, bias: float, low: float,
                      high: float) -> float:
    """The feedforward's flow before its lead-lag: the bias plus the linear compensators, or
    the balance law on the measured inputs (the others at their nominal values), limited to
    the output range. ``ff``: gain 1 and 2, gain factor, nominal constant, nominal inputs 1
    and 2, whether input 1 and 2 are measured."""
    if law == LAW_LINEAR:
        return bias + ff[0] * (measured[0] - initial[0]) + ff[1] * (measured[1] - initial[1])
    d1 = measured[0] if ff[6] > 0.0 else ff[4]
    d2 = measured[1] if ff[7] > 0.0 else ff[5]
    flow = ff[2] * _law(kind, ff[3], sp_abs, d1, d2)
    return min(max(flow, bias + low), bias + high)


@njit(cache=True, nogil=True)
def _simulate_sample(i: int, kind: int, row: np.ndarray, h: float, substeps: int,
                     inputs: np.ndarray, setpoint: np.ndarray, direction: np.ndarray,
                     segments: np.ndarray, settings: np.ndarray, bias: float, law: int,
                     trim: int, ff: np.ndarray, dynamics: np.ndarray, metric: np.ndarray,
                     edges: np.ndarray, envelope_index: np.ndarray, slot: int,
                     history: np.ndarray, acc: np.ndarray, closure: np.ndarray,
                     alive: np.ndarray, env_buf: np.ndarray, trajectories: np.ndarray,
                     feedback_arm: bool, limit: float, seed: np.uint64,
                     noise: np.ndarray) -> tuple[float, float]:
    """Both arms of sample ``i``; returns the last times outside the band (fb, fbff).

    ``noise`` rows (filtered-noise events on an input): start scan, filter pole per scan,
    innovation scale, state (updated in place), stationary standard deviation, input row.
    The noise is drawn once per scan and held, the same for both arms.
    """
    n_steps = envelope_index.shape[0]
    hi = h / substeps
    m, pipe, dead, constant = row[0], row[1], row[2], row[3]
    u_steady, y0 = row[4], row[7]
    d_initial = np.array([row[5], row[6]])
    a_flow = _decay(hi, row[8])
    a_sensor = _decay(hi, row[9])
    sensor = d_initial.copy()
    ff_measured = d_initial.copy()
    input_pole = _decay(h, dynamics[2])
    ff_pole, ff_zero = _decay(h, dynamics[1]), _decay(h, dynamics[0])
    ff_scale = (1.0 - ff_pole) / (1.0 - ff_zero) if ff_zero < 1.0 else 1.0
    low, high = settings[5], settings[6]
    s = np.zeros((2, 3))
    y = np.array([y0, y0])
    u = np.array([u_steady, u_steady])
    flow = np.array([u_steady, u_steady])  # the manipulated stream's actual flow
    pointer = np.zeros(2, dtype=np.int64)
    last = np.array([-1.0, -1.0])
    flow0 = 0.0
    ff_out = ff_in_prev = 0.0
    base = scale = 1.0
    for arm in range(2):
        history[arm, 0, 0], history[arm, 1, 0] = 0.0, y0
        alive[arm] = arm == 1 or feedback_arm
    n_bins = edges.shape[0] - 1
    width = (edges[-1] - edges[0]) / n_bins
    noise[:, 3] = 0.0
    draws = normal_stream(seed)
    for k in range(n_steps):
        held = np.zeros(2)
        for j in range(noise.shape[0]):
            if k >= noise[j, 0]:
                if k == noise[j, 0]:  # start from the stationary distribution
                    draws, draw = next_normal(draws)
                    noise[j, 3] = noise[j, 4] * draw
                held[int(noise[j, 5])] += noise[j, 3]
                draws, draw = next_normal(draws)
                noise[j, 3] = noise[j, 1] * noise[j, 3] + noise[j, 2] * draw
        for sub in range(substeps):
            q = k * substeps + sub
            t = q * hi
            d1 = row[5] + inputs[0, q] + held[0]
            d2 = row[6] + inputs[1, q] + held[1]
            sp = setpoint[q]
            if sub == 0:
                # Feedforward: the transmitters' readings (the input itself without a
                # transmitter lag), the input filter, the law.
                for j in range(2):
                    reading = sensor[j] if a_sensor > 0.0 else (d1 if j == 0 else d2)
                    ff_measured[j] = input_pole * ff_measured[j] + (1.0 - input_pole) * reading
                if law != LAW_NONE:
                    computed = _feedforward_flow(law, kind, ff_measured, d_initial, ff, y0 + sp,
                                                 bias, low, high)
                    if k == 0:
                        flow0 = computed
                    ff_in = computed - flow0
                    ff_out = ff_pole * ff_out + ff_scale * (ff_in - ff_zero * ff_in_prev)
                    ff_in_prev = ff_in
                    # The computed flow with its dynamics, within the flow range; a ratio
                    # trim scales with the static computed flow (the throughput), so the
                    # lead-lag's transient does not swing the feedback's gain.
                    base = min(max(flow0 + ff_out, bias + low), bias + high)
                    scale = max(computed / bias, 1e-3) if trim == 1 else 1.0
            for arm in range(2):
                if not alive[arm]:
                    continue
                measured, pointer[arm] = _measured_value(
                    q, t, hi, dead, pipe, history[arm, 0], history[arm, 1], history[arm, 2],
                    history[arm, 3], m, y0, pointer[arm])
                cv = measured - y0
                if not (math.isfinite(cv) and abs(cv) <= limit):
                    alive[arm] = False
                    continue
                if sub == 0:
                    arm_base = base if arm == 1 and law != LAW_NONE else bias
                    arm_scale = scale if arm == 1 and law != LAW_NONE else 1.0
                    if k == 0:  # at rest: the integral holds the sample's steady input
                        s[arm, 0] = (u_steady - arm_base) / arm_scale
                    previous = u[arm]
                    u[arm], limited = _control(cv, sp, k == 0, s, arm, arm_base, arm_scale,
                                               bias, settings)
                    acc[arm, _TRAVEL] += abs(u[arm] - previous)
                    if limited:
                        acc[arm, _AT_LIMIT] += h
                    if slot >= 0:
                        trajectories[slot, arm, k] = cv
                        trajectories[slot, 2 + arm, k] = u[arm] - bias
                    if envelope_index[k] >= 0:
                        b = min(max(int((cv - edges[0]) / width), 0), n_bins - 1)
                        env_buf[arm, envelope_index[k]] = b
                last[arm] = _metrics(acc, arm, last[arm], sp - cv, t, hi, metric[0], metric[1],
                                     direction[q], segments[q],
                                     segments[q - 1] if q > 0 else segments[0], metric[2])
                # The flow loop's lag, exact for the held setpoint; the tank takes its mean
                # over the step as the held flow (exact without a lag).
                mean_flow = u[arm] + (flow[arm] - u[arm]) * (
                    (1.0 - a_flow) * row[8] / hi if a_flow > 0.0 else 0.0)
                flow[arm] = a_flow * flow[arm] + (1.0 - a_flow) * u[arm]
                outflow, inflow = _rates(kind, constant, mean_flow, d1, d2)
                history[arm, 2, q], history[arm, 3, q] = inflow, outflow
                closure[i, arm, 0] += inflow * hi
                y[arm], integral = _step(y[arm], inflow, outflow, m, hi)
                closure[i, arm, 1] += outflow * integral
                history[arm, 0, q + 1] = history[arm, 0, q] + outflow * hi
                history[arm, 1, q + 1] = y[arm]
            for j in range(2):  # the transmitters of the disturbance inputs
                value = d1 if j == 0 else d2
                sensor[j] = a_sensor * sensor[j] + (1.0 - a_sensor) * value
    for arm in range(2):
        closure[i, arm, 2] = m * (y[arm] - y0)
    return last[0], last[1]


@njit(cache=True, nogil=True)
def balance_kernel(
    kind: int,                   # plant kind code (0 blending tank, 1 heated tank)
    rows: np.ndarray,            # (N, 9) BalanceBatch rows
    h: float,                    # the controller's scan period
    substeps: int,               # internal steps per scan
    inputs: np.ndarray,          # (2, T S) disturbance inputs' deviation from the operating point
    setpoint: np.ndarray,        # (T S,) setpoint deviation, CV units
    direction: np.ndarray,       # (T S,) sign of e counting as an opposite excursion
    segments: np.ndarray,        # (T S,) start of the latest event, time units
    controller: np.ndarray,      # (10,) kc, ti, td, tf, tt, u_low, u_high (deviation from the
                                 # bias), divergence limit, setpoint weights b and c
    bias: float,                 # the controller output at the nominal steady state
    law: int,                    # LAW_NONE, LAW_LINEAR or LAW_BALANCE (the fbff arm)
    trim: int,                   # 0 the feedback adds, 1 it multiplies (balance law)
    ff: np.ndarray,              # (8,) see _feedforward_flow
    dynamics: np.ndarray,        # (3,) lead, lag, input filter time constant
    metric: np.ndarray,          # (3,) event start, settling band, CV band
    edges: np.ndarray,           # (B+1,) envelope bin edges, CV units
    envelope_index: np.ndarray,  # (T,) envelope point of scan k, or -1
    slots: np.ndarray,           # (N,) trajectory slot or -1
    accumulator_slots: np.ndarray,  # (10,) output column of each BALANCE_ACCUMULATORS entry
    accumulators: np.ndarray,    # out (N, 2, A)
    unstable: np.ndarray,        # out (N, 2) bool: the arm ran away
    envelope_counts: np.ndarray,  # out (2, P, B) int64, added to
    trajectories: np.ndarray,    # out (S, 4, T): CV fb, CV fbff, output fb, output fbff
    closure: np.ndarray,         # out (N, 2, 3): in, out, accumulation of the balanced quantity
    feedback_arm: bool,          # False: only the feedforward arm
    seeds: np.ndarray,           # (N,) uint64 per-sample seeds of the filtered noise
    noise_events: np.ndarray,    # (E, 4): start scan, stationary std, filter time constant, row
) -> None:
    n_steps = envelope_index.shape[0]
    n_internal = n_steps * substeps
    kc, ti, td, tf, tt = controller[0], controller[1], controller[2], controller[3], controller[4]
    settings = np.array([kc, tf / (tf + h), kc * td / (tf + h), kc * h / ti, h / tt,
                         controller[5], controller[6], controller[7], controller[8],
                         controller[9], 1.0 if td > 0.0 else 0.0])
    history = np.zeros((2, 4, n_internal + 1))
    noise = np.zeros((noise_events.shape[0], 6))
    for j in range(noise_events.shape[0]):
        pole = _decay(h, noise_events[j, 2])
        noise[j, 0], noise[j, 1] = noise_events[j, 0], pole
        noise[j, 2] = noise_events[j, 1] * math.sqrt(1.0 - pole * pole)
        noise[j, 4], noise[j, 5] = noise_events[j, 1], noise_events[j, 3]
    env_buf = np.full((2, envelope_counts.shape[1]), -1, dtype=np.int64)
    acc = np.zeros((2, 10))
    alive = np.zeros(2, dtype=np.bool_)
    t_end = n_steps * h
    hi = h / substeps
    for i in range(rows.shape[0]):
        acc[:, :] = 0.0
        closure[i, :, :] = 0.0
        last0, last1 = _simulate_sample(
            i, kind, rows[i], h, substeps, inputs, setpoint, direction, segments, settings,
            bias, law, trim, ff, dynamics, metric, edges, envelope_index, slots[i], history,
            acc, closure, alive, env_buf, trajectories, feedback_arm, controller[7], seeds[i],
            noise)
        final_segment = segments[n_internal - 1]
        for arm in range(2):
            last = last0 if arm == 0 else last1
            final = 0.0 if last < 0.0 else min(last + hi, t_end) - final_segment
            acc[arm, _SETTLING] = max(acc[arm, _SETTLING], final)
            acc[arm, _OPPOSITE] = max(acc[arm, _OPPOSITE], 0.0)
            for q in range(10):
                accumulators[i, arm, accumulator_slots[q]] = (acc[arm, q] if alive[arm]
                                                              else math.nan)
            unstable[i, arm] = not alive[arm]
            for point in range(env_buf.shape[1]):
                if alive[arm] and env_buf[arm, point] >= 0:
                    envelope_counts[arm, point, env_buf[arm, point]] += 1
                env_buf[arm, point] = -1
