"""Stability margins of the feedback loop for every perturbed plant, with the exact dead time.

The loop is ``L(jw) = C(jw) Gp(jw)`` with the process ``Gp`` of each sample (FOPDT, SOPDT or
IPDT, delay ``exp(-j w theta)`` evaluated exactly, no Pade approximation) and the nominal
controller in ideal form ``C = Kc (1 + 1/(j w Ti) + j w Td / (j w Tf + 1))``. The derivative acts
on the measurement, which changes the set-point response but not the loop seen by the feedback,
so the loop is that of an ideal PID with a filtered derivative.

Per sample this module computes

* the gain margin, smallest ``1/|L|`` over the phase crossovers (``inf`` when there is none);
* the phase margin in degrees, smallest over the gain crossovers, ``(arg L mod 360) - 180``
  (the convention of python-control's ``stability_margins``);
* the delay margin, smallest ``PM (rad, in [0, 2 pi)) / w_c`` over the gain crossovers (time
  units; ``inf`` without crossover, NaN for an unstable loop);
* ``Ms = max |1/(1 + L)|`` (``inf`` for an unstable loop: its sensitivity is unbounded);
* a stability verdict from the Nyquist criterion (see :func:`_closed_loop_rhp_count`).

Method: each sample gets its own log-spaced grid from well below the lowest crossover (where
``|L|`` exceeds 100 and its phase sits on its low-frequency asymptote) to where an upper bound of
``|L|`` has fallen below 0.05. Crossovers found on the grid are refined by vectorised bisection on
the analytic ``L`` (to ~1e-12 in log frequency) and ``Ms`` by a golden-section search. Samples are
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
from robustff.design.tuning import FeedbackSettings
from robustff.errors import DataError, DesignError
from robustff.plant.kinds import model_kind
from robustff.plant.models import PlantBatch, TransferModel

__all__ = [
    "MarginResult",
    "loop_margins",
    "loop_response",
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

    def pick(self, rows: np.ndarray | slice) -> _Loop:
        return _Loop(self.gain[rows], self.tau1[rows], self.tau2[rows], self.theta[rows],
                     self.integrating, self.kc, self.ti, self.td, self.tf)

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
    return abs(loop.kc) * np.abs(loop.gain) * controller * process


def _high_frequency_gain(loop: _Loop) -> np.ndarray:
    """``lim |L(jw)|`` for w -> inf, shape (n,): nonzero only for a lag-free, non-integrating
    process (the delay then keeps turning ``L`` around a circle of this radius)."""
    if loop.integrating:
        return np.zeros_like(loop.gain)
    no_lag = (loop.tau1 == 0.0) & (loop.tau2 == 0.0)
    direct = abs(loop.kc) * (1.0 + (loop.td / loop.tf if loop.td > 0.0 else 0.0))
    return np.where(no_lag, direct * np.abs(loop.gain), 0.0)


def _frequency_span(loop: _Loop) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Per-sample grid ends (rad per time unit) and grid densities (points per decade), (n,).

    A lag-free process keeps ``|L|`` near ``h > 0`` at high frequency while the delay turns it
    round and round: its grid goes on until the bound is within 1 % of ``h`` (of ``1 - h``) and
    is dense enough for about eight points per radian of delay phase.
    """
    total = loop.tau1 + loop.tau2 + loop.theta + loop.td + loop.tf
    total = total + (loop.ti if math.isfinite(loop.ti) else 0.0)
    total = np.maximum(total, 1e-300)
    low = 1e-3 / total
    m = loop.integrators
    if m:  # low enough that |L| > 100 there: the crossover lies above
        coefficient = np.abs(loop.gain * loop.kc) / (loop.ti if math.isfinite(loop.ti) else 1.0)
        coefficient = np.where(coefficient > 0.0, coefficient, 1.0)  # zero gain: open loop
        low = np.minimum(low, (coefficient / _LOW_GAIN) ** (1.0 / m))
    h = _high_frequency_gain(loop)
    lag_free = (h > 0.0) & (h < 1.0)
    target = np.where(lag_free, h + 0.01 * (1.0 - h), _HIGH_BOUND)
    log_low = np.log(low)
    a, b = log_low.copy(), log_low + _MAX_DECADES * math.log(10.0)
    for _ in range(60):  # bisection on the monotone bound, in log frequency
        mid = 0.5 * (a + b)
        above = _gain_bound(loop, np.exp(mid)) > target
        a, b = np.where(above, mid, a), np.where(above, b, mid)
    high = np.exp(b)
    turning = 8.0 * math.log(10.0) * high * loop.theta
    density = np.where(lag_free, np.clip(turning, _POINTS_PER_DECADE, _MAX_DENSITY),
                       _POINTS_PER_DECADE)
    return low, high, density


def _bisect(loop: _Loop, rows: np.ndarray, lo: np.ndarray, hi: np.ndarray, fun) -> np.ndarray:
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


def _closed_loop_rhp_count(loop: _Loop, angle: np.ndarray) -> np.ndarray:
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


def _peak_sensitivity(loop: _Loop, w: np.ndarray, sensitivity: np.ndarray) -> np.ndarray:
    """``max |1/(1+L)|`` per sample: grid maximum refined by golden-section search in log w."""
    n, points = sensitivity.shape
    top = np.argmax(sensitivity, axis=1)
    log_w = np.log(w)
    rows = np.arange(n)
    a = log_w[rows, np.maximum(top - 1, 0)]
    b = log_w[rows, np.minimum(top + 1, points - 1)]
    ratio = 0.5 * (math.sqrt(5.0) - 1.0)

    def value(x: np.ndarray) -> np.ndarray:
        return 1.0 / np.abs(1.0 + _response(loop, np.exp(x)))

    c, d = b - ratio * (b - a), a + ratio * (b - a)
    fc, fd = value(c), value(d)
    for _ in range(_GOLDEN_STEPS):
        left = fc > fd  # the maximum lies in [a, d]
        a, b = np.where(left, a, c), np.where(left, d, b)
        c, d = b - ratio * (b - a), a + ratio * (b - a)
        fc, fd = value(c), value(d)
    peak = np.maximum(np.max(sensitivity, axis=1), np.maximum(fc, fd))
    h = _high_frequency_gain(loop)  # |S| tends to up to 1/(1-h) at high frequency
    return np.maximum(peak, np.where(h < 1.0, 1.0 / np.maximum(1.0 - h, 1e-300), np.inf))


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
    stable = (np.round(rhp) == 0) & (_high_frequency_gain(loop) < 1.0) & (loop.gain != 0.0)
    g_rows, w_gc = _gain_crossovers(loop, w, magnitude)
    pm = np.remainder(np.degrees(_phase(loop.pick(g_rows), w_gc)), 360.0) - 180.0
    delay = np.remainder(np.radians(pm), 2.0 * np.pi) / w_gc
    p_rows, w_pc = _phase_crossovers(loop, w, phase)
    with np.errstate(divide="ignore"):
        gm = 1.0 / _polar(loop.pick(p_rows), w_pc)[0]
    ms = _peak_sensitivity(loop, w, 1.0 / np.hypot(*one_plus))
    h = _high_frequency_gain(loop)  # lag-free: crossings go on, with |L| falling towards h
    out = {
        "gain_margin": np.minimum(_reduce_min(p_rows, gm, n, np.inf),
                                  np.where(h > 0.0, 1.0 / np.where(h > 0.0, h, 1.0), np.inf)),
        "phase_margin": _reduce_min(g_rows, pm, n, np.inf),
        "delay_margin": _reduce_min(g_rows, delay, n, np.inf),
        "ms": np.where(stable, ms, np.inf),
        "stable": stable,
        "rhp_count": rhp,
    }
    out["delay_margin"] = np.where(stable, out["delay_margin"], np.nan)
    return out


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
    return out


def _loop_from(batch: PlantBatch, feedback: FeedbackSettings) -> _Loop:
    """Validate inputs and collect the loop parameters."""
    kc, ti, td, tf = (float(x) for x in (feedback.kc, feedback.ti, feedback.td,
                                         feedback.filter_time))
    if not math.isfinite(kc) or kc == 0.0:
        raise DesignError(f"loop margins: controller gain Kc must be finite and nonzero, got {kc}")
    if not ti > 0.0:
        raise DesignError(f"loop margins: integral time Ti must be > 0 (inf for none), got {ti}")
    if not (math.isfinite(td) and td >= 0.0 and math.isfinite(tf) and tf >= 0.0):
        raise DesignError(f"loop margins: Td and the derivative filter time must be >= 0, "
                          f"got Td = {td}, Tf = {tf}")
    if td > 0.0 and tf == 0.0:
        raise DesignError("loop margins: a derivative action needs a filter time > 0 "
                          "(an unfiltered derivative makes the loop improper)")
    kind = model_kind(batch.process_kind)
    if len(kind.lag_parameters) > 2:
        raise DesignError(f"loop margins: a {kind.name} model has more lags than the margin "
                          "calculation handles (two)")
    cols = {}
    for name in ("gain", "time_constant", "time_constant_2", "dead_time"):
        values = np.asarray(batch.values[f"process.{name}"], dtype=np.float64)
        bad = ~np.isfinite(values) | ((values < 0.0) if name != "gain" else False)
        if np.any(bad):
            first = int(np.nonzero(bad)[0][0])
            raise DataError(f"loop margins: process.{name} is negative or not finite in "
                            f"{int(bad.sum())} samples (first: sample {first}, "
                            f"value {values[first]!r})")
        cols[name] = values
    zero = np.zeros_like(cols["gain"])
    # Lags the kind does not have are "no lag" (zero), whatever the batch column holds.
    tau1, tau2 = ([cols[name] for name in kind.lag_parameters] + [zero, zero])[:2]
    return _Loop(cols["gain"], tau1, tau2, cols["dead_time"], kind.integrating, kc, ti, td, tf)


def _block_rows(points: int) -> int:
    return max(1, _BLOCK_BYTES // (_BYTES_PER_POINT * max(points, 1)))


def loop_margins(
    batch: PlantBatch, feedback: FeedbackSettings, *, omega: np.ndarray | None = None
) -> MarginResult:
    """Gain, phase and delay margins, Ms and stability of the feedback loop of every sample.

    Parameters
    ----------
    batch : PlantBatch
        Perturbed plants, ``n`` samples; only the ``"process.*"`` parameters are used.
    feedback : FeedbackSettings
        The (nominal) controller: ``kc``, ``ti`` (``math.inf`` for no integral action), ``td``
        and ``filter_time``, time units.
    omega : ndarray, shape (F,), optional
        One increasing frequency grid (rad per time unit) for all samples instead of the
        adaptive per-sample grids. It must reach below the lowest and above the highest
        crossover (``|L| >> 1`` at its first point, ``|L| < 1`` from its last point on), or
        crossovers are missed and the stability count is wrong.

    Returns
    -------
    MarginResult
        Arrays of shape (n,).

    Raises
    ------
    DesignError
        Controller settings that give no proper loop (Kc = 0, Ti <= 0, an unfiltered derivative).
    DataError
        Negative or non-finite time constants or dead times in the batch.
    """
    loop = _loop_from(batch, feedback)
    n = loop.gain.shape[0]
    if omega is not None:
        omega = np.asarray(omega, dtype=np.float64)
        if omega.ndim != 1 or omega.size < 2 or np.any(omega <= 0) or np.any(np.diff(omega) <= 0):
            raise DataError("loop margins: omega must be a 1-D increasing array of positive "
                            "frequencies (rad per time unit)")
        step = _block_rows(omega.size)
    else:
        step = _block_rows(_grid_points(*_frequency_span(loop)))
    parts = [_run_block(loop.pick(slice(i, i + step)), omega) for i in range(0, n, step)]
    joined = {key: np.concatenate([p[key] for p in parts]) for key in parts[0]} if parts else {}
    keys = ("gain_margin", "phase_margin", "delay_margin", "ms")
    arrays = {k: joined.get(k, np.zeros(0)) for k in keys}
    return MarginResult(**arrays, stable=joined.get("stable", np.zeros(0)).astype(bool))


def model_margins(process: TransferModel, feedback: FeedbackSettings) -> MarginResult:
    """Margins of one loop (e.g. the nominal design); arrays of shape (1,)."""
    return loop_margins(_single_batch(process), feedback)


def loop_response(batch: PlantBatch, feedback: FeedbackSettings, omega: np.ndarray) -> np.ndarray:
    """Loop frequency response ``L(jw)`` with the exact dead time.

    Parameters
    ----------
    batch : PlantBatch
        ``n`` plants.
    feedback : FeedbackSettings
        Controller settings.
    omega : ndarray, shape (F,)
        Frequencies, rad per time unit.

    Returns
    -------
    ndarray, shape (n, F), complex
    """
    loop = _loop_from(batch, feedback)
    w = np.broadcast_to(np.asarray(omega, dtype=np.float64), (loop.gain.shape[0], len(omega)))
    return _response(loop, w)


def _single_batch(process: TransferModel) -> PlantBatch:
    values = {f"process.{name}": np.array([float(getattr(process, name))])
              for name in ("gain", "time_constant", "time_constant_2", "dead_time")}
    return PlantBatch(process.kind, process.kind, values)
