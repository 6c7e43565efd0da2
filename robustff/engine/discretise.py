"""Exact zero-order-hold discretisation of the plant paths, with fractional dead times.

A path is at most two lags in series (``x1' = (K u(t - theta) - x1)/tau1``,
``x2' = (x1 - x2)/tau2``) or an integrator (``x1' = K u(t - theta)``). The input ``u`` is piecewise
constant over each controller sample ``h``. Writing ``theta = (m + f) h`` with integer ``m`` and
``0 <= f < 1``, during ``[k h, (k+1) h)`` the path sees ``u[k-m-1]`` for the first ``f h`` and
``u[k-m]`` for the remaining ``(1-f) h``; integrating the linear ODE over the two sub-intervals
gives the exact update

    x[k+1] = Phi x[k] + G_new u[k-m] + G_old u[k-m-1].

This is the modified z-transform of the path, so no rounding of the dead time to whole samples
takes place. The functions here are compiled with numba and used inside the simulation kernel.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

from robustff.plant.kinds import FOPDT, IPDT, SOPDT

__all__ = ["decay", "phi1", "coupling", "second_step", "block_coefficients", "split_delay",
           "delay_weights"]

# Simulator codes from the kind registry; numba compiles module-level ints in as constants.
_FOPDT, _SOPDT, _IPDT = FOPDT.code, SOPDT.code, IPDT.code


@njit(cache=True, nogil=True)
def decay(t: float, tau: float) -> float:
    """``exp(-t/tau)``, with ``tau = 0`` meaning an instantaneous lag (0 for t > 0)."""
    if tau <= 0.0:
        return 1.0 if t <= 0.0 else 0.0
    return math.exp(-t / tau)


@njit(cache=True, nogil=True)
def phi1(x: float) -> float:
    """``(1 - exp(-x)) / x``, well conditioned near ``x = 0``."""
    if abs(x) < 1e-8:
        return 1.0 - 0.5 * x
    return -math.expm1(-x) / x


@njit(cache=True, nogil=True)
def coupling(t: float, tau1: float, tau2: float) -> float:
    """Response of ``x2`` at time ``t`` to ``x1(0) = 1`` with no input, for two lags in series.

    Equals ``tau1/(tau1 - tau2) (exp(-t/tau1) - exp(-t/tau2))``, written with :func:`phi1` so
    that equal lags (``t/tau exp(-t/tau)``) need no special case. Requires ``tau2 > 0``.
    """
    if tau1 <= 0.0:
        return 0.0  # callers order the lags so that tau1 > 0
    x = t * (tau1 - tau2) / (tau1 * tau2)
    return math.exp(-t / tau1) * (t / tau2) * phi1(x)


@njit(cache=True, nogil=True)
def second_step(t: float, tau1: float, tau2: float) -> float:
    """Unit-step response of two lags in series (unit gain) after time ``t`` from rest."""
    return 1.0 - decay(t, tau2) - coupling(t, tau1, tau2)


@njit(cache=True, nogil=True)
def split_delay(dead_time: float, h: float) -> tuple[int, float]:
    """Write ``dead_time = (m + f) h``; returns ``(m, f)`` with ``0 <= f < 1``."""
    ratio = dead_time / h
    m = int(math.floor(ratio + 1e-12))
    f = ratio - m
    if f < 1e-12:
        f = 0.0
    return m, f


@njit(cache=True, nogil=True)
def delay_weights(f: float, h: float, tau: float) -> tuple[float, float]:
    """Weights ``(w_new, w_old)`` of a compensator's delay ``(m + f) h`` written as
    ``z^-m (w_new + w_old z^-1)``, exact for a signal that rides on a first-order lag ``tau``.

    With ``p = exp(-h/tau)``, sampling ``e^{-(m+f) h s}/(tau s + 1)`` behind a zero-order hold
    gives ``z^-m-1 ((1 - p^(1-f)) + (p^(1-f) - p) z^-1) / (1 - p z^-1)`` (the modified
    z-transform; Astrom & Wittenmark, Computer-Controlled Systems, 3rd ed., 1997, sec. 2.6),
    against ``z^-1 (1 - p) / (1 - p z^-1)`` without the delay: their ratio gives the weights,
    which add to 1 (unit steady-state gain). A very slow lag gives linear interpolation
    ``(1 - f, f)``; no lag (``tau = 0``) gives ``(1, 0)``: the hold already carries the
    fraction. ``h`` and ``tau`` in the same time unit.
    """
    if f <= 0.0 or tau <= 0.0:
        return 1.0, 0.0
    x = h / tau
    if x < 1e-9:
        return 1.0 - f, f
    # expm1 keeps both weights accurate when the lag is much slower than the scan.
    w_new = math.expm1(-(1.0 - f) * x) / math.expm1(-x)
    return w_new, 1.0 - w_new


@njit(cache=True, nogil=True)
def block_coefficients(
    kind: int, gain: float, tau1: float, tau2: float, h: float, f: float
) -> np.ndarray:
    """Update coefficients of one path for a sample time ``h`` and delay fraction ``f``.

    Parameters
    ----------
    kind : int
        :attr:`robustff.plant.kinds.ModelKind.code` of the path's kind (FOPDT, SOPDT, IPDT).
        A new kind adds its branch here.
    gain, tau1, tau2 : float
        Path gain and lags (time units); a SOPDT with one zero lag behaves as a FOPDT.
    h : float
        Controller sample time, time units.
    f : float
        Fractional part of the dead time in samples, ``0 <= f < 1``.

    Returns
    -------
    ndarray, shape (8,)
        ``[phi11, phi21, phi22, g1_new, g2_new, g1_old, g2_old, order]`` where ``order`` is 1
        (output ``x1``) or 2 (output ``x2``).
    """
    out = np.zeros(8)
    t_new = (1.0 - f) * h
    t_old = f * h
    if kind == _IPDT:
        out[0] = 1.0
        out[3] = gain * t_new
        out[5] = gain * t_old
        out[7] = 1.0
        return out
    if kind == _SOPDT and tau1 <= 0.0:
        tau1, tau2 = tau2, 0.0
    if kind == _FOPDT or tau2 <= 0.0:
        out[0] = decay(h, tau1)
        out[3] = gain * (1.0 - decay(t_new, tau1))
        out[5] = gain * (1.0 - decay(t_old, tau1)) * decay(t_new, tau1)
        out[7] = 1.0
        return out
    out[0] = decay(h, tau1)
    out[1] = coupling(h, tau1, tau2)
    out[2] = decay(h, tau2)
    out[3] = gain * (1.0 - decay(t_new, tau1))
    out[4] = gain * second_step(t_new, tau1, tau2)
    x1_old = gain * (1.0 - decay(t_old, tau1))
    x2_old = gain * second_step(t_old, tau1, tau2)
    out[5] = decay(t_new, tau1) * x1_old
    out[6] = coupling(t_new, tau1, tau2) * x1_old + decay(t_new, tau2) * x2_old
    out[7] = 2.0
    return out
