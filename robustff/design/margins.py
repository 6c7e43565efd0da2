"""Stability margins of the feedback loop for every perturbed plant, with the exact dead time.

Two loops can be analysed:

* the continuous loop ``L(jw) = C(jw) Gp(jw)`` with the process ``Gp`` of each sample (FOPDT,
  SOPDT or IPDT, delay ``exp(-j w theta)`` evaluated exactly, no Pade approximation) and the
  nominal controller in ideal form ``C = Kc (1 + 1/(j w Ti) + j w Td / (j w Tf + 1))`` (what a
  continuous-time tuning rule promises);
* with ``sample_time`` given, the loop as the simulation runs it: the controller sampled every
  ``h`` with a zero-order hold on its output, analysed exactly as the discrete-time loop
  ``L(exp(j w h))``, ``0 < w <= pi/h`` (:mod:`robustff.design.sampled_loop`). The hold and the
  sampling add about half a sample of delay, so its margins are a little smaller and its
  stability verdict is that of the simulated loop.

The loop as installed is linearised at the nominal operating point: a valve's slope there is 1
(the process gain is the bump-test gain at the nominal position) and its actuator lag
``Va = 1/(tau_a s + 1)`` is in the path; with a secondary (flow) loop the primary controller
drives its closed loop ``T = Cs Ps Va / (1 + Cs Ps Va)`` (its PI ``Cs``, its path ``Ps``, the
actuator lag), in series with the process. ``arg T`` is taken as ``arg Ls - arg(1 + Ls)``, the
latter's principal value, continuous while the secondary loop ``Ls`` crosses the negative real
axis only right of -1; samples whose secondary loop is unstable or does not (conditionally
stable) are reported unstable with NaN margins. In the sampled loop an actuator lag on a
process with at most one lag becomes its second lag (exact); otherwise, and for ``T``, the
continuous response ``X(jw)`` multiplies the sampled loop at the same frequency (its aliased
terms neglected, and ``T`` without the secondary's own scan): an approximation, close while the
crossovers lie well below ``pi/h`` and the secondary loop is much faster than the primary.
With a secondary loop, phase crossovers more than three decades above the grid are sought only
while the bound of ``|L|`` allows one (no bound of ``arg T`` is used).

The derivative acts on the measurement, which changes the set-point response but not the loop
seen by the feedback. Per sample this module computes

* the gain margin, the smallest ``1/|L|`` over all phase crossovers, the frequencies where ``L``
  crosses the negative real axis (``arg L = -180 deg`` mod 360; for the sampled loop also
  ``w = pi/h`` when ``L`` is negative there); ``inf`` only when there is no such crossing. This
  is the factor by which the loop gain may grow before the Nyquist curve reaches -1 (Astrom and
  Murray, "Feedback Systems", 2008, section 9.3, from memory, which takes the crossing at the
  lowest frequency; with several crossings this module takes the smallest ``1/|L|`` of all,
  the minimum of what python-control's ``stability_margins(..., returnall=True)`` lists);
* the phase margin in degrees, smallest over the gain crossovers, ``(arg L mod 360) - 180``
  (the convention of python-control's ``stability_margins``);
* the delay margin, smallest ``PM (rad, in [0, 2 pi)) / w_c`` over the gain crossovers (time
  units; ``inf`` without crossover, NaN for an unstable loop; for the sampled loop it is exact
  for an added delay of whole samples);
* ``Ms = max |1/(1 + L)|`` (``inf`` for an unstable loop: its sensitivity is unbounded);
* a stability verdict from the Nyquist criterion (see :func:`_closed_loop_rhp_count`).

Method: each sample gets its own log-spaced grid from well below the lowest crossover (where
``|L|`` exceeds 100 and its phase sits on its low-frequency asymptote) to where an upper bound of
``|L|`` has fallen below 0.05 (the sampled loop: or ``pi/h``, with 40 points per decade more
than 2.5 decades below the top, where ``|L| >> 1``). Crossovers found on the grid are
refined by vectorised bisection on the analytic ``L`` (to ~1e-12 in log frequency) and ``Ms`` by
a golden-section search. Phase crossovers above the grid (gain margins above about 20) are
searched on a second grid above it: with a dead time the phase must pass the next -180 deg level
before a frequency that follows from a bound of the delay-free phase, and the search goes on
while the bound of ``|L|`` still exceeds ``|L|`` at the best crossing found. Samples are
processed in blocks of about 20 MB of complex arrays. Only numpy is imported. The result type
and its JSON summary live in :mod:`robustff.design.margins_result`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from robustff.design.margins_result import (
    GAIN_MARGIN_LIMIT,
    MS_LIMIT,
    PHASE_MARGIN_LIMIT,
    MarginResult,
)
from robustff.design.sampled_loop import SampledLoop
from robustff.design.tuning import FeedbackSettings
from robustff.errors import DataError, DesignError
from robustff.plant.kinds import model_kind
from robustff.plant.models import PlantBatch, SensorModel, TransferModel
from robustff.plant.valve import ValveModel

__all__ = [
    "MarginResult",
    "loop_margins",
    "loop_response",
    "actuation_response",
    "model_margins",
    "MS_LIMIT",
    "GAIN_MARGIN_LIMIT",
    "PHASE_MARGIN_LIMIT",
]

_POINTS_PER_DECADE = 160
_BLOCK_BYTES = 20_000_000
_BYTES_PER_POINT = 96  # about six float64/complex128 (n, F) work arrays live at once
_LOW_GAIN = 100.0  # |L| at the bottom of the grid
_HIGH_BOUND = 0.05  # bound of |L| at the top of the grid
_BISECTIONS = 40
_GOLDEN_STEPS = 40
_MAX_DECADES = 14.0
_MAX_DENSITY = 4000.0
_FAR_ROUNDS = 4  # extensions of the search for phase crossovers above the grid
_FAR_DECADES = 3.0  # no dead time: how far above the grid phase crossovers are sought
_FINE_DECADES = 2.5  # sampled loops: decades below the grid top with the full density
_COARSE_DENSITY = 40.0  # sampled loops: points per decade further down


@dataclass(frozen=True)
class _Loop:
    """Loop parameters: process arrays (n,) and scalar controller settings (time units)."""

    gain: np.ndarray
    tau1: np.ndarray
    tau2: np.ndarray
    theta: np.ndarray
    integrating: bool
    kc: float
    ti: float  # math.inf: no integral action
    td: float
    tf: float
    #: Actuator lag of the valve in this loop's path, time units (n,); None: no lag.
    actuator: np.ndarray | None = None
    #: The secondary loop inside this one (its path, PI and the actuator lag), None without.
    inner: _Loop | None = None
    #: The secondary loop's peak sensitivity (n,), for the bound of ``|T|``.
    inner_ms: np.ndarray | None = None

    def pick(self, rows: np.ndarray | slice) -> _Loop:
        return _Loop(self.gain[rows], self.tau1[rows], self.tau2[rows], self.theta[rows],
                     self.integrating, self.kc, self.ti, self.td, self.tf,
                     None if self.actuator is None else self.actuator[rows],
                     None if self.inner is None else self.inner.pick(rows),
                     None if self.inner_ms is None else self.inner_ms[rows])

    @property
    def slow_times(self) -> np.ndarray:
        """Sum of the loop's times (lags, dead times, Ti, Td, Tf; the inner loop's too), (n,)."""
        total = self.tau1 + self.tau2 + self.theta + self.td + self.tf
        total = total + (self.ti if math.isfinite(self.ti) else 0.0)
        if self.actuator is not None:
            total = total + self.actuator
        if self.inner is not None:
            total = total + self.inner.slow_times
        return total

    @property
    def total_delay(self) -> np.ndarray:
        """Dead time of the path including the inner loop's, (n,)."""
        return self.theta + (0.0 if self.inner is None else self.inner.total_delay)

    @property
    def integrators(self) -> int:
        """Number of open-loop poles at the origin."""
        return int(self.integrating) + int(math.isfinite(self.ti))


def _col(values: np.ndarray, w: np.ndarray) -> np.ndarray:
    """Parameters (n,) shaped to broadcast with frequencies (n,) or (n, F)."""
    return values[:, None] if w.ndim == 2 else values


def _controller_shape(loop: _Loop, w: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Real and imaginary parts of ``C(jw) / Kc``; the real part is >= 1, so the angle lies in
    (-90, 90) deg and needs no unwrapping."""
    real = np.ones_like(w)
    imag = -1.0 / (w * loop.ti) if math.isfinite(loop.ti) else np.zeros_like(w)
    if loop.td > 0.0:  # j w Td / (j w Tf + 1) = w Td (w Tf + j) / (1 + (w Tf)^2)
        scale = w * loop.td / (1.0 + (w * loop.tf) ** 2)
        real = real + scale * (w * loop.tf)
        imag = imag + scale
    return real, imag


def _polar(loop: _Loop, w: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``|L(jw)|`` and its continuous (unwrapped) phase in rad, from the analytic factors.

    Real arithmetic only (faster than complex numpy on large grids); ``w`` has shape (n,) or
    (n, F), rad per time unit.
    """
    real, imag = _controller_shape(loop, w)
    tau1, tau2 = _col(loop.tau1, w), _col(loop.tau2, w)
    gain = np.abs(_col(loop.gain, w) * loop.kc)
    magnitude = gain * np.hypot(real, imag) / np.sqrt((1.0 + (w * tau1) ** 2)
                                                       * (1.0 + (w * tau2) ** 2))
    base = np.where(_col(loop.gain, w) * loop.kc > 0.0, 0.0, np.pi)
    phase = base + np.arctan2(imag, real) - np.arctan(w * tau1) - np.arctan(w * tau2)
    phase = phase - w * _col(loop.theta, w)
    if loop.integrating:
        magnitude, phase = magnitude / w, phase - 0.5 * np.pi
    if loop.actuator is not None:  # 1/(j w tau_a + 1)
        lag = w * _col(loop.actuator, w)
        magnitude, phase = magnitude / np.sqrt(1.0 + lag * lag), phase - np.arctan(lag)
    if loop.inner is not None:  # T = Ls/(1 + Ls)
        inner, inner_phase = _polar(loop.inner, w)
        real, imag = 1.0 + inner * np.cos(inner_phase), inner * np.sin(inner_phase)
        # arg(1 + Ls) stays within (-180, 180) deg: Ls crosses the negative real axis only
        # right of -1 (checked in _inner_loop), so the principal value is continuous.
        magnitude = magnitude * inner / np.hypot(real, imag)
        phase = phase + inner_phase - np.arctan2(imag, real)
    return magnitude, phase


def _response(loop: _Loop, w: np.ndarray) -> np.ndarray:
    """Loop frequency response ``L(jw)``, complex, same shape as ``w`` (rad per time unit)."""
    magnitude, phase = _polar(loop, w)
    return magnitude * np.exp(1j * phase)


def _phase(loop: _Loop, w: np.ndarray) -> np.ndarray:
    """Continuous phase of ``L(jw)``, rad."""
    return _polar(loop, w)[1]


def _gain_bound(loop: _Loop, w: np.ndarray) -> np.ndarray:
    """Upper bound of ``|L(jv)|`` for all ``v >= w`` (each factor is monotone or bounded)."""
    controller = 1.0 + (1.0 / (w * loop.ti) if math.isfinite(loop.ti) else 0.0)
    controller = controller + (loop.td / loop.tf if loop.td > 0.0 else 0.0)
    if loop.integrating:
        process = 1.0 / w
    else:
        process = 1.0 / np.sqrt((1.0 + (w * loop.tau1) ** 2) * (1.0 + (w * loop.tau2) ** 2))
    if loop.actuator is not None:
        process = process / np.sqrt(1.0 + (w * loop.actuator) ** 2)
    if loop.inner is not None:
        process = process * _inner_bound(loop, w)
    return abs(loop.kc) * np.abs(loop.gain) * controller * process


def _inner_bound(loop: _Loop, w: np.ndarray) -> np.ndarray:
    """Upper bound of ``|T(jv)|`` for ``v >= w``: ``|T| = |Ls| |S_s| <= Ms_s |Ls|`` and
    ``|T| = |1 - S_s| <= 1 + Ms_s``, (n,)."""
    assert loop.inner is not None and loop.inner_ms is not None
    ms = np.where(np.isfinite(loop.inner_ms), loop.inner_ms, 1.0)  # unusable: see _inner_verdict
    return np.minimum(ms * _gain_bound(loop.inner, w), 1.0 + ms)


def _high_frequency_gain(loop: _Loop) -> np.ndarray:
    """``lim |L(jw)|`` for w -> inf, shape (n,): nonzero only for a lag-free, non-integrating
    process (the delay then keeps turning ``L`` around a circle of this radius)."""
    if loop.integrating or loop.inner is not None:  # _loop_from refuses a lag-free cascade
        return np.zeros_like(loop.gain)
    no_lag = (loop.tau1 == 0.0) & (loop.tau2 == 0.0)
    if loop.actuator is not None:
        no_lag &= loop.actuator == 0.0
    direct = abs(loop.kc) * (1.0 + (loop.td / loop.tf if loop.td > 0.0 else 0.0))
    return np.where(no_lag, direct * np.abs(loop.gain), 0.0)


def _low_end(loop: _Loop | SampledLoop) -> np.ndarray:
    """Bottom of each grid, rad per time unit, (n,): with integral action so low that ``|L| > 100``
    there (the crossovers lie above), else three decades below the loop's slowest time."""
    total = np.maximum(loop.slow_times, 1e-300)
    low = 1e-3 / total
    m = loop.integrators
    if m:
        coefficient = np.abs(loop.gain * loop.kc) / (loop.ti if math.isfinite(loop.ti) else 1.0)
        coefficient = np.where(coefficient > 0.0, coefficient, 1.0)  # zero gain: open loop
        low = np.minimum(low, (coefficient / _LOW_GAIN) ** (1.0 / m))
    return low


def _bound_falls_to(bound, log_low: np.ndarray, log_high: np.ndarray,
                    target: np.ndarray) -> np.ndarray:
    """Frequency in ``[exp(log_low), exp(log_high)]`` where the monotone ``bound(w)`` falls to
    ``target``, (n,) (the top where it stays above), by bisection in log frequency."""
    a, b = log_low.copy(), log_high
    for _ in range(60):
        mid = 0.5 * (a + b)
        above = bound(np.exp(mid)) > target
        a, b = np.where(above, mid, a), np.where(above, b, mid)
    return np.exp(b)


def _frequency_span(loop: _Loop) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Per-sample grid ends (rad per time unit) and grid densities (points per decade), (n,).

    A lag-free process keeps ``|L|`` near ``h > 0`` at high frequency while the delay turns it
    round and round: its grid goes on until the bound is within 1 % of ``h`` (of ``1 - h``) and
    is dense enough for about eight points per radian of delay phase.
    """
    low = _low_end(loop)
    h = _high_frequency_gain(loop)
    lag_free = (h > 0.0) & (h < 1.0)
    target = np.where(lag_free, h + 0.01 * (1.0 - h), _HIGH_BOUND)
    log_low = np.log(low)
    high = _bound_falls_to(lambda w: _gain_bound(loop, w), log_low,
                           log_low + _MAX_DECADES * math.log(10.0), target)
    turning = 8.0 * math.log(10.0) * high * loop.theta
    density = np.where(lag_free, np.clip(turning, _POINTS_PER_DECADE, _MAX_DENSITY),
                       _POINTS_PER_DECADE)
    return low, high, density


def _sampled_span(loop: SampledLoop) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Grid ends and densities of sampled loops: up to where the bound of ``|L|`` falls below
    0.05 or to ``pi/h``, at least 160 points per decade and two per radian of delay phase at
    the top (the negative-axis crossings are sign changes of ``Im L``: steps below pi)."""
    low = np.minimum(_low_end(loop), 1e-3 * loop.nyquist)
    nyquist = np.full_like(low, loop.nyquist)
    high = _bound_falls_to(loop.bound, np.log(low), np.log(nyquist),
                           np.full_like(low, _HIGH_BOUND))
    high = np.minimum(high, nyquist)
    turning = 2.0 * math.log(10.0) * high * (loop.total_delay + loop.h)
    return low, high, np.clip(turning, _POINTS_PER_DECADE, _MAX_DENSITY)


def _bisect(loop: _Loop | SampledLoop, rows: np.ndarray, lo: np.ndarray, hi: np.ndarray,
            fun) -> np.ndarray:
    """Roots of ``fun(sub_loop, w)`` bracketed in [lo, hi] (log frequency), one per entry."""
    sub = loop.pick(rows)
    f_lo = fun(sub, np.exp(lo)) > 0.0
    for _ in range(_BISECTIONS):
        mid = 0.5 * (lo + hi)
        same = (fun(sub, np.exp(mid)) > 0.0) == f_lo
        lo, hi = np.where(same, mid, lo), np.where(same, hi, mid)
    return np.exp(0.5 * (lo + hi))


def _gain_crossovers(loop: _Loop, w: np.ndarray, magnitude: np.ndarray):
    """All gain crossovers ``|L| = 1``: (row indices, frequencies), flat arrays."""
    above = magnitude > 1.0
    rows, cols = np.nonzero(above[:, :-1] != above[:, 1:])
    log_w = np.log(w)
    freq = _bisect(loop, rows, log_w[rows, cols], log_w[rows, cols + 1],
                   lambda sub, x: np.log(_polar(sub, x)[0]))
    return rows, freq


def _phase_crossovers(loop: _Loop, w: np.ndarray, phase: np.ndarray):
    """All crossings of the negative real axis, ``arg L = -180 + 360 k`` deg: (rows, freqs)."""
    level = np.floor((phase + np.pi) / (2.0 * np.pi))
    rows, cols = np.nonzero(level[:, :-1] != level[:, 1:])
    target = -np.pi + 2.0 * np.pi * np.maximum(level[rows, cols], level[rows, cols + 1])
    log_w = np.log(w)
    freq = _bisect(loop, rows, log_w[rows, cols], log_w[rows, cols + 1],
                   lambda sub, x: _phase(sub, x) - target)
    return rows, freq


def _closed_loop_rhp_count(loop: _Loop | SampledLoop, angle: np.ndarray) -> np.ndarray:
    """Closed-loop poles in the right half plane, per sample (float, ~integer), by Nyquist.

    The open loop has no right-half-plane poles; its ``m`` poles at the origin are passed on a
    small half circle to the right, along which ``arg(1 + L)`` changes by ``-m pi``. The big half
    circle adds nothing (``|L| -> 0``, or stays below 1 for a lag-free process). With ``D`` the
    change of ``arg(1 + L)`` along ``0+ < w < inf``, conjugate symmetry gives
    ``2 D - m pi = -2 pi Z``, so ``Z = m/2 - D/pi``. The phase at ``w = 0+`` is the asymptote
    ``arg(Kc K) - m pi/2`` (or ``arg(1 + L(0))`` when ``m = 0``); then ``angle``, the wrapped
    ``arg(1 + L)`` on the grid, shape (n, F), is unwrapped from there.
    """
    m = loop.integrators
    sign = np.where(loop.gain * loop.kc > 0.0, 0.0, np.pi)
    if m:
        start = sign - 0.5 * m * np.pi
    else:
        start = np.angle(1.0 + np.where(sign == 0.0, 1.0, -1.0) * np.abs(loop.gain * loop.kc))
    phase = np.unwrap(np.column_stack([start, angle]), axis=1)
    return 0.5 * m - (phase[:, -1] - phase[:, 0]) / np.pi


def _peak_sensitivity(loop: _Loop | SampledLoop, w: np.ndarray, sensitivity: np.ndarray,
                      response, floor: np.ndarray) -> np.ndarray:
    """``max |1/(1+L)|`` per sample: grid maximum refined by golden-section search in log w,
    and at least ``floor`` (the limit of ``|S|`` beyond the grid), (n,)."""
    n, points = sensitivity.shape
    top = np.argmax(sensitivity, axis=1)
    log_w = np.log(w)
    rows = np.arange(n)
    a = log_w[rows, np.maximum(top - 1, 0)]
    b = log_w[rows, np.minimum(top + 1, points - 1)]
    ratio = 0.5 * (math.sqrt(5.0) - 1.0)

    def value(x: np.ndarray) -> np.ndarray:
        return 1.0 / np.abs(1.0 + response(loop, np.exp(x)))

    c, d = b - ratio * (b - a), a + ratio * (b - a)
    fc, fd = value(c), value(d)
    for _ in range(_GOLDEN_STEPS):
        left = fc > fd  # the maximum lies in [a, d]
        a, b = np.where(left, a, c), np.where(left, d, b)
        c, d = b - ratio * (b - a), a + ratio * (b - a)
        fc, fd = value(c), value(d)
    peak = np.maximum(np.max(sensitivity, axis=1), np.maximum(fc, fd))
    return np.maximum(peak, floor)


def _reduce_min(rows: np.ndarray, values: np.ndarray, n: int, empty: float) -> np.ndarray:
    out = np.full(n, empty)
    np.minimum.at(out, rows, values)
    return out


def _margins_block(loop: _Loop, w: np.ndarray) -> dict[str, np.ndarray]:
    """Margins for one block; ``w`` has shape (n, F), increasing along axis 1."""
    n = loop.gain.shape[0]
    magnitude, phase = _polar(loop, w)
    one_plus = (1.0 + magnitude * np.cos(phase), magnitude * np.sin(phase))  # 1 + L
    rhp = _closed_loop_rhp_count(loop, np.arctan2(one_plus[1], one_plus[0]))
    h = _high_frequency_gain(loop)
    # A lag-free process with a dead time keeps turning L round a circle of radius h at high
    # frequency (crossings go on, |L| falling towards h, |S| up to 1/(1 - h)); without dead
    # time L settles on the positive real value h (no crossing, |S| -> 1/(1 + h)).
    circling = np.where(loop.theta > 0.0, h, 0.0)
    stable = (np.round(rhp) == 0) & (circling < 1.0) & (loop.gain != 0.0)
    g_rows, w_gc = _gain_crossovers(loop, w, magnitude)
    pm = np.remainder(np.degrees(_phase(loop.pick(g_rows), w_gc)), 360.0) - 180.0
    delay = np.remainder(np.radians(pm), 2.0 * np.pi) / w_gc
    p_rows, w_pc = _phase_crossovers(loop, w, phase)
    with np.errstate(divide="ignore"):
        gm = 1.0 / _polar(loop.pick(p_rows), w_pc)[0]
    floor = np.where(circling < 1.0, 1.0 / np.maximum(1.0 - circling, 1e-300), np.inf)
    floor = np.where((h > 0.0) & (loop.theta == 0.0), 1.0 / (1.0 + h), floor)
    ms = _peak_sensitivity(loop, w, 1.0 / np.hypot(*one_plus), _response, floor)
    out = {
        "gain_margin": np.minimum(_reduce_min(p_rows, gm, n, np.inf),
                                  np.where(circling > 0.0,
                                           1.0 / np.where(circling > 0.0, circling, 1.0), np.inf)),
        "phase_margin": _reduce_min(g_rows, pm, n, np.inf),
        "delay_margin": _reduce_min(g_rows, delay, n, np.inf),
        "ms": np.where(stable, ms, np.inf),
        "stable": stable,
        "rhp_count": rhp,
    }
    out["delay_margin"] = np.where(stable, out["delay_margin"], np.nan)
    return out


def _phase_upper_bound(loop: _Loop, w: np.ndarray) -> np.ndarray:
    """Upper bound of the delay-free part of the phase of ``L(jv)`` for all ``v >= w``, rad (n,).

    ``arg C <= atan(Td/(2 Tf))`` (real part >= 1, imaginary part at most ``Td/(2 Tf)``; 0 for
    a PI), each lag's ``-atan(v tau)`` only falls, the integrator adds -90 deg.
    """
    base = np.where(loop.gain * loop.kc > 0.0, 0.0, np.pi)
    controller = math.atan(loop.td / (2.0 * loop.tf)) if loop.td > 0.0 else 0.0
    lags = np.arctan(w * loop.tau1) + np.arctan(w * loop.tau2)
    return base + controller - lags - (0.5 * np.pi if loop.integrating else 0.0)


def _far_gain_margin(loop: _Loop, top: np.ndarray,
                     gm: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Gain margins with the phase crossovers above the grid tops ``top`` included, (n,), and
    the peak of ``|S|`` over the frequencies searched (0 for samples not searched), (n,).

    A crossover above ``top`` has ``|L| <= bound(top)`` (about 0.05), so only samples whose best
    crossover so far has a smaller ``|L|`` (gain margin above about 20, or none) are searched.
    With a dead time the phase, at most ``U - w theta`` (:func:`_phase_upper_bound`), falls below
    the next -180 deg level below its value at ``top`` before ``w = (U - level)/theta``, so that
    range holds a crossover; the search is extended while the bound of ``|L|`` at its end is
    above ``|L|`` at the best crossover found. Without dead time the phase settles on its
    asymptote: the search covers three decades above the grid. A lag-free process with a dead
    time is searched the same way (its crossings go on for ever, ``|L|`` tending to ``h``: the
    limit ``1/h`` is already a candidate). The same samples can have their
    peak of ``|S|`` (below ``1/(1 - bound(top))``, about 1.05) above the grid too.
    """
    gm, peak = gm.copy(), np.zeros_like(gm)
    with np.errstate(divide="ignore"):
        level = np.where(np.isfinite(gm), 1.0 / gm, 0.0)  # |L| at the best crossover
    h = _high_frequency_gain(loop)  # lag-free without dead time: L settles, no crossing
    rows = np.nonzero(((h == 0.0) | (loop.theta > 0.0)) & (level < _gain_bound(loop, top)))[0]
    if rows.size == 0:
        return gm, peak
    sub, start, h = loop.pick(rows), top[rows], h[rows]
    phase = _phase(sub, start)
    target = -np.pi + 2.0 * np.pi * np.floor((phase + np.pi) / (2.0 * np.pi))
    # With a secondary loop no bound of the phase of T is used: three decades first, then on
    # while the bound of |L| is above the best crossing (below).
    delay = (sub.theta > 0.0) & (sub.inner is None)
    reach = (_phase_upper_bound(sub, start) - target) / np.where(delay, sub.theta, 1.0)
    end = np.where(delay, np.maximum(1.01 * reach, 1.001 * start),
                   start * 10.0 ** _FAR_DECADES)
    found, far_peak = gm[rows], np.zeros(rows.size)
    active = np.arange(rows.size)
    for _ in range(_FAR_ROUNDS):
        part = sub.pick(active)
        density = np.clip(2.0 * math.log(10.0) * end[active] * part.total_delay,
                          _POINTS_PER_DECADE,
                          _MAX_DENSITY)
        w = _grid(start[active], end[active], density)
        magnitude, phase = _polar(part, w)
        sensitivity = 1.0 / np.hypot(1.0 + magnitude * np.cos(phase), magnitude * np.sin(phase))
        far_peak[active] = np.maximum(far_peak[active], _peak_sensitivity(
            part, w, sensitivity, _response, np.zeros(active.size)))
        p_rows, w_pc = _phase_crossovers(part, w, phase)
        with np.errstate(divide="ignore"):
            far = 1.0 / _polar(part.pick(p_rows), w_pc)[0]
        found[active] = np.minimum(found[active], _reduce_min(p_rows, far, active.size, np.inf))
        best = np.where(np.isfinite(found[active]), 1.0 / found[active], 0.0)
        # (a lag-free process: |L| tends to h; below it the limit 1/h is the margin already)
        more = ((best > 0.0) & (best < _gain_bound(part, end[active]))
                & (part.total_delay > 0.0)
                & (best > h[active] * (1.0 + 1e-9)))
        if not np.any(more):
            break
        active, best = active[more], best[more]
        start_next = end[active]
        log_start = np.log(start_next)
        end[active] = _bound_falls_to(lambda x, a=active: _gain_bound(sub.pick(a), x),
                                      log_start, log_start + _MAX_DECADES * math.log(10.0), best)
        start[active] = start_next
    gm[rows], peak[rows] = found, far_peak
    return gm, peak


def _axis_crossings(loop: SampledLoop, w: np.ndarray, imag: np.ndarray):
    """Crossings of the negative real axis between grid points, found as sign changes of
    ``Im L`` (``imag`` on the grid) where ``Re L < 0``: (rows, frequencies, values of L)."""
    positive = imag > 0.0
    rows, cols = np.nonzero(positive[:, :-1] != positive[:, 1:])
    log_w = np.log(w)
    freq = _bisect(loop, rows, log_w[rows, cols], log_w[rows, cols + 1],
                   lambda sub, x: sub.rectangular(x)[1])
    value = loop.pick(rows).response(freq)
    negative = value.real < 0.0
    return rows[negative], freq[negative], value[negative]


def _sampled_response(loop: SampledLoop, w: np.ndarray) -> np.ndarray:
    return loop.response(w)


def _sampled_block(loop: SampledLoop, w: np.ndarray) -> dict[str, np.ndarray]:
    """Margins of sampled loops for one block; ``w`` (n, F) increasing, last column ``pi/h``."""
    n = loop.gain.shape[0]
    real, imag = loop.rectangular(w)
    magnitude = np.sqrt(real * real + imag * imag)
    rhp = _closed_loop_rhp_count(loop, np.arctan2(imag, 1.0 + real))
    stable = (np.round(rhp) == 0) & (loop.gain != 0.0)
    above = magnitude > 1.0
    g_rows, g_cols = np.nonzero(above[:, :-1] != above[:, 1:])
    log_w = np.log(w)
    w_gc = _bisect(loop, g_rows, log_w[g_rows, g_cols], log_w[g_rows, g_cols + 1],
                   lambda sub, x: np.log(sub.magnitude(x)))
    pm = np.remainder(np.degrees(loop.pick(g_rows).polar(w_gc)[1]), 360.0) - 180.0
    delay = np.remainder(np.radians(pm), 2.0 * np.pi) / w_gc
    p_rows, _, value = _axis_crossings(loop, w, imag)
    with np.errstate(divide="ignore"):
        gm = _reduce_min(p_rows, 1.0 / np.abs(value), n, np.inf)
        # L is real at w = pi/h: a crossing when negative
        gm = np.minimum(gm, np.where(real[:, -1] < 0.0, 1.0 / magnitude[:, -1], np.inf))
    one_re = 1.0 + real
    ms = _peak_sensitivity(loop, w, 1.0 / np.sqrt(one_re * one_re + imag * imag),
                           _sampled_response,
                           np.zeros(n))
    return {
        "gain_margin": gm,
        "phase_margin": _reduce_min(g_rows, pm, n, np.inf),
        "delay_margin": np.where(stable, _reduce_min(g_rows, delay, n, np.inf), np.nan),
        "ms": np.where(stable, ms, np.inf),
        "stable": stable,
        "rhp_count": rhp,
    }


def _far_sampled_gain_margin(loop: SampledLoop, top: np.ndarray,
                             gm: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Gain margins of sampled loops with the crossings between the grid top and ``pi/h``, and
    the peak of ``|S|`` there (0 for samples not searched), as :func:`_far_gain_margin`."""
    gm, peak = gm.copy(), np.zeros_like(gm)
    with np.errstate(divide="ignore"):
        level = np.where(np.isfinite(gm), 1.0 / gm, 0.0)
    rows = np.nonzero((top < loop.nyquist) & (level < loop.bound(top)))[0]
    if rows.size == 0:
        return gm, peak
    sub, start = loop.pick(rows), top[rows]
    end = np.full_like(start, loop.nyquist)
    density = np.clip(4.0 * math.log(10.0) * end * (sub.total_delay + sub.h), _POINTS_PER_DECADE,
                      _MAX_DENSITY)
    w = np.minimum(_grid(start, end, density), loop.nyquist)
    real, imag = sub.rectangular(w)
    p_rows, _, value = _axis_crossings(sub, w, imag)
    with np.errstate(divide="ignore"):
        far = _reduce_min(p_rows, 1.0 / np.abs(value), rows.size, np.inf)
    gm[rows] = np.minimum(gm[rows], far)
    one_re = 1.0 + real
    peak[rows] = _peak_sensitivity(sub, w, 1.0 / np.sqrt(one_re * one_re + imag * imag),
                                   _sampled_response, np.zeros(rows.size))
    return gm, peak


def _grid_points(low: np.ndarray, high: np.ndarray, density: np.ndarray) -> int:
    """Points per grid so that every sample gets at least its density (per decade)."""
    if low.size == 0:
        return 64
    return max(int(math.ceil(float(np.max(np.log10(high / low) * density)))) + 1, 64)


def _grid(low: np.ndarray, high: np.ndarray, density: np.ndarray) -> np.ndarray:
    """Log-spaced grids (n, F) from ``low`` to ``high``, ``density`` points per decade or more."""
    points = _grid_points(low, high, density)
    t = np.linspace(0.0, 1.0, points)
    return np.exp(np.log(low)[:, None] + np.outer(np.log(high / low), t))


def _run_block(loop: _Loop, omega: np.ndarray | None) -> dict[str, np.ndarray]:
    if omega is not None:
        return _margins_block(loop, np.broadcast_to(omega, (loop.gain.shape[0], omega.size)))
    low, high, density = _frequency_span(loop)
    out = _margins_block(loop, _grid(low, high, density))
    doubtful = np.abs(out["rhp_count"] - np.round(out["rhp_count"])) > 0.2
    if np.any(doubtful):  # the unwrapped phase was ambiguous: recount on a 4x finer grid
        rows = np.nonzero(doubtful)[0]
        fine = _grid(low[rows], high[rows], 4.0 * density[rows])
        again = _margins_block(loop.pick(rows), fine)
        for key, values in again.items():
            out[key][rows] = values
    out["gain_margin"], peak = _far_gain_margin(loop, high, out["gain_margin"])
    out["ms"] = np.where(out["stable"], np.maximum(out["ms"], peak), np.inf)
    return out


def _sampled_grid(loop: SampledLoop, low: np.ndarray, high: np.ndarray,
                  density: np.ndarray) -> np.ndarray:
    """Grids (n, F) for sampled loops, the last column ``pi/h``.

    The top :data:`_FINE_DECADES` decades below ``high`` (where the crossovers and the peak of
    ``|S|`` lie: ``|L|`` is still above 1 there at the lowest crossover of a single or double
    integrator) get ``density`` points per decade; the decades below, where ``|L| >> 1`` and
    the phase only follows the slow lag and integral corners (at most about 1.2 rad per decade
    each), get :data:`_COARSE_DENSITY`.
    """
    split = np.maximum(low, high * 10.0 ** -_FINE_DECADES)
    coarse = _grid_points(low, split, np.full_like(low, _COARSE_DENSITY))
    fine = _grid_points(split, high, density)
    w = np.empty((low.shape[0], coarse + fine + 1))
    t = np.linspace(0.0, 1.0, coarse + 1)[:-1]
    np.exp(np.log(low)[:, None] + np.outer(np.log(split / low), t), out=w[:, :coarse])
    t = np.linspace(0.0, 1.0, fine)
    np.exp(np.log(split)[:, None] + np.outer(np.log(high / split), t), out=w[:, coarse:-1])
    np.minimum(w, loop.nyquist, out=w)
    w[:, -1] = loop.nyquist
    return w


def _run_sampled_block(loop: SampledLoop) -> dict[str, np.ndarray]:
    low, high, density = _sampled_span(loop)
    out = _sampled_block(loop, _sampled_grid(loop, low, high, density))
    doubtful = np.abs(out["rhp_count"] - np.round(out["rhp_count"])) > 0.2
    if np.any(doubtful):
        rows = np.nonzero(doubtful)[0]
        sub = loop.pick(rows)
        again = _sampled_block(sub, _sampled_grid(sub, low[rows], high[rows],
                                                  4.0 * density[rows]))
        for key, values in again.items():
            out[key][rows] = values
    out["gain_margin"], peak = _far_sampled_gain_margin(loop, high, out["gain_margin"])
    out["ms"] = np.where(out["stable"], np.maximum(out["ms"], peak), np.inf)
    return out


def _check_controller(feedback: FeedbackSettings, what: str) -> tuple[float, float, float, float]:
    kc, ti, td, tf = (float(x) for x in (feedback.kc, feedback.ti, feedback.td,
                                         feedback.filter_time))
    if not math.isfinite(kc) or kc == 0.0:
        raise DesignError(f"loop margins: {what} gain Kc must be finite and nonzero, got {kc}")
    if not ti > 0.0:
        raise DesignError(f"loop margins: {what} integral time Ti must be > 0 (inf for none), "
                          f"got {ti}")
    if not (math.isfinite(td) and td >= 0.0 and math.isfinite(tf) and tf >= 0.0):
        raise DesignError(f"loop margins: Td and the derivative filter time must be >= 0, "
                          f"got Td = {td}, Tf = {tf}")
    if td > 0.0 and tf == 0.0:
        raise DesignError("loop margins: a derivative action needs a filter time > 0 "
                          "(an unfiltered derivative makes the loop improper)")
    return kc, ti, td, tf


def _path(batch: PlantBatch, block: str, kind_name: str) -> tuple[np.ndarray, ...]:
    """Gain, two lags (0: none) and dead time of a path (``process`` or ``secondary``), (n,)."""
    kind = model_kind(kind_name)
    if len(kind.lag_parameters) > 2:
        raise DesignError(f"loop margins: a {kind.name} model has more lags than the margin "
                          "calculation handles (two)")
    cols = {}
    for name in ("gain", "time_constant", "time_constant_2", "dead_time"):
        values = np.asarray(batch.values[f"{block}.{name}"], dtype=np.float64)
        bad = ~np.isfinite(values) | ((values < 0.0) if name != "gain" else False)
        if np.any(bad):
            first = int(np.nonzero(bad)[0][0])
            raise DataError(f"loop margins: {block}.{name} is negative or not finite in "
                            f"{int(bad.sum())} samples (first: sample {first}, "
                            f"value {values[first]!r})")
        cols[name] = values
    zero = np.zeros_like(cols["gain"])
    # Lags the kind does not have are "no lag" (zero), whatever the batch column holds.
    tau1, tau2 = ([cols[name] for name in kind.lag_parameters] + [zero, zero])[:2]
    return cols["gain"], tau1, tau2, cols["dead_time"]


def _actuator_lag(batch: PlantBatch) -> np.ndarray | None:
    """The valve's actuator lag per sample (time units), None without a valve or a lag."""
    if batch.valve is None:
        return None
    values = np.asarray(batch.values["valve.time_constant"], dtype=np.float64)
    bad = ~np.isfinite(values) | (values < 0.0)
    if np.any(bad):
        first = int(np.nonzero(bad)[0][0])
        raise DataError(f"loop margins: valve.time_constant is negative or not finite in "
                        f"{int(bad.sum())} samples (first: sample {first}, "
                        f"value {values[first]!r})")
    return values if np.any(values > 0.0) else None


def _loop_from(batch: PlantBatch, feedback: FeedbackSettings,
               secondary: FeedbackSettings | None = None) -> _Loop:
    """Validate inputs and collect the loop parameters, linearised at the nominal operating
    point: the valve's slope there is 1 (the process gain is the bump-test gain at the nominal
    position), its actuator lag is in the path, inside the secondary loop when there is one."""
    kc, ti, td, tf = _check_controller(feedback, "controller")
    kind = model_kind(batch.process_kind)
    gain, tau1, tau2, theta = _path(batch, "process", batch.process_kind)
    actuator = _actuator_lag(batch)
    if batch.secondary_kind is None:
        return _Loop(gain, tau1, tau2, theta, kind.integrating, kc, ti, td, tf, actuator)
    if secondary is None:
        raise DesignError("loop margins: the plants have a secondary loop; its PI settings "
                          "(the design's secondary controller) are needed")
    kc_s, ti_s, td_s, tf_s = _check_controller(secondary, "secondary controller")
    gain_s, tau1_s, tau2_s, theta_s = _path(batch, "secondary", batch.secondary_kind)
    inner = _Loop(gain_s, tau1_s, tau2_s, theta_s, model_kind(batch.secondary_kind).integrating,
                  kc_s, ti_s, td_s, tf_s, actuator)
    lag_free = (tau1 == 0.0) & (tau2 == 0.0) & ~kind.integrating
    if np.any(lag_free & (_high_frequency_gain(inner) > 0.0)):
        raise DesignError("loop margins: a lag-free process behind a lag-free secondary loop "
                          "(no lag in either path and no actuator lag) is not handled")
    return _Loop(gain, tau1, tau2, theta, kind.integrating, kc, ti, td, tf, None, inner,
                 _inner_loop(inner))


def _inner_loop(inner: _Loop) -> np.ndarray:
    """Peak sensitivity of each secondary loop (n,); ``inf`` where the secondary loop is
    unstable or crosses the negative real axis left of -1 (a conditionally stable secondary
    loop, whose ``arg(1 + Ls)`` the primary's phase cannot follow): such samples are reported
    unstable (:func:`_inner_verdict`)."""
    result = _joined([_run_block(inner.pick(slice(i, i + step)), None)
                      for step in [_block_rows(_grid_points(*_frequency_span(inner)))]
                      for i in range(0, inner.gain.shape[0], step)])
    usable = result.stable & (result.gain_margin > 1.0)
    return np.where(usable, result.ms, np.inf)


def _inner_verdict(loop: _Loop, out: dict[str, np.ndarray]) -> dict[str, np.ndarray]:
    """Samples whose secondary loop is unusable (see :func:`_inner_loop`): unstable, no margins."""
    if loop.inner_ms is None:
        return out
    bad = ~np.isfinite(loop.inner_ms)
    if np.any(bad):
        for key in ("gain_margin", "phase_margin", "delay_margin"):
            out[key] = np.where(bad, np.nan, out[key])
        out["ms"] = np.where(bad, np.inf, out["ms"])
        out["stable"] = out["stable"] & ~bad
    return out


@dataclass(frozen=True)
class _Factor:
    """The continuous factor ``X(jw)`` of a sampled loop (actuator lag ``Va``, secondary closed
    loop ``T``): a unit-gain :class:`_Loop` without controller dynamics."""

    loop: _Loop

    def pick(self, rows: np.ndarray | slice) -> _Factor:
        return _Factor(self.loop.pick(rows))

    def rectangular(self, w: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        magnitude, phase = _polar(self.loop, w)
        return magnitude * np.cos(phase), magnitude * np.sin(phase)

    def bound(self, w: np.ndarray) -> np.ndarray:
        return _gain_bound(self.loop, w)

    @property
    def slow_times(self) -> np.ndarray:
        return self.loop.slow_times

    @property
    def delay(self) -> np.ndarray:
        return self.loop.total_delay


def _block_rows(points: int) -> int:
    return max(1, _BLOCK_BYTES // (_BYTES_PER_POINT * max(points, 1)))


def _sampled_from(loop: _Loop, sample_time: float) -> SampledLoop:
    h = float(sample_time)
    if not (math.isfinite(h) and h > 0.0):
        raise DesignError(f"loop margins: the controller sample time must be a positive number "
                          f"of time units, got {sample_time!r}")
    tau1, tau2, rest = loop.tau1, loop.tau2, loop.actuator
    if loop.actuator is not None and not loop.integrating:
        # One lag or none: the actuator lag is one more lag, sampled exactly.
        fold = tau2 == 0.0
        tau1 = np.where(fold & (tau1 == 0.0), loop.actuator, tau1)
        tau2 = np.where(fold & (loop.tau1 > 0.0), loop.actuator, tau2)
        rest = np.where(fold, 0.0, loop.actuator)
        rest = rest if np.any(rest > 0.0) else None
    extra = None
    if rest is not None or loop.inner is not None:
        one = np.ones_like(loop.gain)
        zero = np.zeros_like(loop.gain)
        extra = _Factor(_Loop(one, zero, zero, zero, False, 1.0, math.inf, 0.0, 0.0, rest,
                              loop.inner, loop.inner_ms))
    return SampledLoop(loop.gain, tau1, tau2, loop.theta, loop.integrating, loop.kc,
                       loop.ti, loop.td, loop.tf, h, extra=extra)


def _joined(parts: list[dict[str, np.ndarray]]) -> MarginResult:
    joined = {key: np.concatenate([p[key] for p in parts]) for key in parts[0]} if parts else {}
    keys = ("gain_margin", "phase_margin", "delay_margin", "ms")
    arrays = {k: joined.get(k, np.zeros(0)) for k in keys}
    return MarginResult(**arrays, stable=joined.get("stable", np.zeros(0)).astype(bool))


def loop_margins(
    batch: PlantBatch, feedback: FeedbackSettings, *, omega: np.ndarray | None = None,
    sample_time: float | None = None, secondary: FeedbackSettings | None = None,
) -> MarginResult:
    """Gain, phase and delay margins, Ms and stability of the feedback loop of every sample.

    The loop is linearised at the nominal operating point: the valve's slope there is 1 (the
    process gain is the bump-test gain at the nominal position), its actuator lag
    ``1/(tau_a s + 1)`` is in the path; with a secondary loop the primary controller drives the
    secondary closed loop ``T = Cs Ps Va / (1 + Cs Ps Va)`` in series with the process.
    Stiction, deadband, rate limit and output limits are left out (nonlinear).

    Parameters
    ----------
    batch : PlantBatch
        Perturbed plants, ``n`` samples; the ``"process.*"`` parameters, ``valve.time_constant``
        (with a valve) and the ``"secondary.*"`` path (with a secondary loop) are used.
    feedback : FeedbackSettings
        The (nominal) controller: ``kc``, ``ti`` (``math.inf`` for no integral action), ``td``
        and ``filter_time``, time units.
    omega : ndarray, shape (F,), optional
        One increasing frequency grid (rad per time unit) for all samples instead of the
        adaptive per-sample grids (continuous loop only). It must reach below the lowest and
        above the highest crossover (``|L| >> 1`` at its first point, ``|L| < 1`` from its last
        point on), or crossovers are missed and the stability count is wrong.
    sample_time : float, optional
        Controller sample time ``h``, time units. Given, the margins are those of the loop as
        the simulation runs it (controller sampled every ``h``, output held; see
        :mod:`robustff.design.sampled_loop`); omitted, those of the continuous loop.
    secondary : FeedbackSettings, optional
        The secondary loop's PI (``LoopDesign.secondary``); required when the batch has a
        secondary loop.

    Returns
    -------
    MarginResult
        Arrays of shape (n,). A sample whose secondary loop is unstable, or crosses the
        negative real axis left of -1, is unstable with NaN margins.

    Raises
    ------
    DesignError
        Controller settings that give no proper loop (Kc = 0, Ti <= 0, an unfiltered derivative),
        a sample time that is not a positive number, ``omega`` with ``sample_time``, a
        secondary loop without its settings, or a lag-free process behind a lag-free
        secondary loop.
    DataError
        Negative or non-finite time constants or dead times in the batch.
    """
    loop = _loop_from(batch, feedback, secondary)
    n = loop.gain.shape[0]
    if sample_time is not None:
        if omega is not None:
            raise DesignError("loop margins: a common frequency grid (omega) is for the "
                              "continuous loop only; the sampled loop uses its own grids")
        sampled = _sampled_from(loop, sample_time)
        step = _block_rows(_grid_points(*_sampled_span(sampled)))
        return _joined([_inner_verdict(loop.pick(slice(i, i + step)),
                                       _run_sampled_block(sampled.pick(slice(i, i + step))))
                        for i in range(0, n, step)])
    if omega is not None:
        omega = np.asarray(omega, dtype=np.float64)
        if omega.ndim != 1 or omega.size < 2 or np.any(omega <= 0) or np.any(np.diff(omega) <= 0):
            raise DataError("loop margins: omega must be a 1-D increasing array of positive "
                            "frequencies (rad per time unit)")
        step = _block_rows(omega.size)
    else:
        step = _block_rows(_grid_points(*_frequency_span(loop)))
    return _joined([_inner_verdict(loop.pick(slice(i, i + step)),
                                   _run_block(loop.pick(slice(i, i + step)), omega))
                    for i in range(0, n, step)])


def model_margins(process: TransferModel, feedback: FeedbackSettings,
                  sample_time: float | None = None, *, valve: ValveModel | None = None,
                  secondary: TransferModel | None = None,
                  secondary_feedback: FeedbackSettings | None = None) -> MarginResult:
    """Margins of one loop (e.g. the nominal design); arrays of shape (1,).

    ``sample_time`` (time units): the sampled loop, as in :func:`loop_margins`; ``valve`` (its
    actuator lag), ``secondary`` (the secondary path) and ``secondary_feedback`` (its PI) as
    there.
    """
    batch = (_single_batch(process) if valve is None and secondary is None
             else PlantBatch.from_nominal(process, process, SensorModel(), 1, valve, secondary))
    return loop_margins(batch, feedback, sample_time=sample_time, secondary=secondary_feedback)


def loop_response(batch: PlantBatch, feedback: FeedbackSettings, omega: np.ndarray,
                  sample_time: float | None = None,
                  secondary: FeedbackSettings | None = None) -> np.ndarray:
    """Loop frequency response with the exact dead time.

    Parameters
    ----------
    batch : PlantBatch
        ``n`` plants.
    feedback : FeedbackSettings
        Controller settings.
    omega : ndarray, shape (F,)
        Frequencies, rad per time unit (for the sampled loop at most ``pi/h``).
    sample_time : float, optional
        Controller sample time ``h``, time units: the sampled loop ``L(exp(j w h))`` instead of
        the continuous ``L(j w)``.
    secondary : FeedbackSettings, optional
        The secondary loop's PI, as in :func:`loop_margins`.

    Returns
    -------
    ndarray, shape (n, F), complex
    """
    loop = _loop_from(batch, feedback, secondary)
    w = np.broadcast_to(np.asarray(omega, dtype=np.float64), (loop.gain.shape[0], len(omega)))
    if sample_time is not None:
        return _sampled_from(loop, sample_time).response(w)
    return _response(loop, w)


def actuation_response(batch: PlantBatch, secondary: FeedbackSettings | None,
                       omega: np.ndarray) -> np.ndarray | None:
    """Controller output -> process input, linearised at the nominal point, continuous.

    The valve's slope at the nominal position is 1; what stays is its actuator lag
    ``Va = 1/(j w tau_a + 1)`` or, with a secondary loop, its closed loop
    ``T = Cs Ps Va / (1 + Cs Ps Va)``: the factor the loop of :func:`loop_margins` has in
    series with the process.

    Parameters
    ----------
    batch : PlantBatch
        ``n`` plants (``valve.time_constant`` and the ``"secondary.*"`` path are used).
    secondary : FeedbackSettings or None
        The secondary loop's PI; required when the batch has a secondary loop.
    omega : ndarray, shape (F,)
        Frequencies, rad per time unit.

    Returns
    -------
    ndarray, shape (n, F), complex, or None
        None for an ideal actuator (the factor is 1).
    """
    actuator = _actuator_lag(batch)
    w = np.asarray(omega, dtype=np.float64)[None, :]
    if batch.secondary_kind is None:
        return None if actuator is None else 1.0 / (1.0 + 1j * w * actuator[:, None])
    if secondary is None:
        raise DesignError("actuation response: the plants have a secondary loop; its PI "
                          "settings (the design's secondary controller) are needed")
    kc, ti, td, tf = _check_controller(secondary, "secondary controller")
    gain, tau1, tau2, theta = _path(batch, "secondary", batch.secondary_kind)
    inner = _Loop(gain, tau1, tau2, theta, model_kind(batch.secondary_kind).integrating,
                  kc, ti, td, tf, actuator)
    loop = _response(inner, np.broadcast_to(w, (gain.shape[0], w.shape[1])))
    return loop / (1.0 + loop)


def _single_batch(process: TransferModel) -> PlantBatch:
    values = {f"process.{name}": np.array([float(getattr(process, name))])
              for name in ("gain", "time_constant", "time_constant_2", "dead_time")}
    return PlantBatch(process.kind, process.kind, values)
