"""The feedback loop as the simulation runs it: a sampled PI/PID with a zero-order hold.

The controller is evaluated once per controller sample time ``h`` on the sampled CV, and its
output is held constant until the next sample (zero-order hold, ZOH). Between the samples the
process is continuous. Seen at the sampling instants this loop is exactly the discrete-time loop

    L(z) = C(z) P(z),   evaluated on the unit circle z = exp(j w h), 0 < w <= pi/h,

with

* ``P(z)`` the exact ZOH equivalent of the process with its dead time ``theta = (m + f) h``
  (``m`` whole samples, fraction ``0 <= f < 1``, the modified z-transform): per sample
  ``x[k+1] = Phi x[k] + G_new u[k-m] + G_old u[k-m-1]``, CV ``y[k] = x1[k]`` (one lag or an
  integrator) or ``x2[k]`` (two lags). The coefficients are the same closed forms as the
  simulation's plant update; ``tests/design`` checks them against it to 1e-12.
* ``C(z)`` the simulated controller, ideal form, derivative on the measurement (which does not
  change the loop): ``u[k] = Kc e[k] + I[k] + D[k]`` with the integral summed after use,
  ``I[k+1] = I[k] + Kc h/Ti e[k]``, and the filtered backward-difference derivative
  ``D[k] = a D[k-1] + Kc Td/(Tf + h) (e[k] - e[k-1])``, ``a = Tf/(Tf + h)``, so

      C(z) = Kc (1 + (h/Ti)/(z - 1) + Td/(Tf + h) (z - 1)/(z - a)).

At low frequency ``L(exp(j w h))`` tends to the continuous loop ``L(j w)``; towards ``pi/h`` it
lags it by about half a sample (the hold) and more. Only numpy is used.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

__all__ = ["SampledLoop", "zoh_coefficients", "split_delay"]


def _decay(t: np.ndarray, tau: np.ndarray) -> np.ndarray:
    """``exp(-t/tau)``; ``tau = 0`` is an instantaneous lag (1 for ``t <= 0``, else 0)."""
    positive = tau > 0.0
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        value = np.exp(-t / np.where(positive, tau, 1.0))
    return np.where(positive, value, np.where(t <= 0.0, 1.0, 0.0))


def _phi1(x: np.ndarray) -> np.ndarray:
    """``(1 - exp(-x))/x``, well conditioned near 0."""
    small = np.abs(x) < 1e-8
    with np.errstate(divide="ignore", invalid="ignore"):
        value = -np.expm1(-x) / np.where(small, 1.0, x)
    return np.where(small, 1.0 - 0.5 * x, value)


def _coupling(t: np.ndarray, tau1: np.ndarray, tau2: np.ndarray) -> np.ndarray:
    """Response of ``x2`` at ``t`` to ``x1(0) = 1`` for two lags in series (0 where a lag is 0)."""
    both = (tau1 > 0.0) & (tau2 > 0.0)
    t1, t2 = np.where(both, tau1, 1.0), np.where(both, tau2, 1.0)
    value = np.exp(-t / t1) * (t / t2) * _phi1(t * (t1 - t2) / (t1 * t2))
    return np.where(both, value, 0.0)


def _second_step(t: np.ndarray, tau1: np.ndarray, tau2: np.ndarray) -> np.ndarray:
    """Unit-step response of two lags in series after ``t`` from rest."""
    return 1.0 - _decay(t, tau2) - _coupling(t, tau1, tau2)


def split_delay(theta: np.ndarray, h: float) -> tuple[np.ndarray, np.ndarray]:
    """``theta = (m + f) h`` with whole samples ``m`` and ``0 <= f < 1`` (as the simulation)."""
    ratio = theta / h
    m = np.floor(ratio + 1e-12)
    f = ratio - m
    return m, np.where(f < 1e-12, 0.0, f)


def zoh_coefficients(gain: np.ndarray, tau1: np.ndarray, tau2: np.ndarray, integrating: bool,
                     h: float, f: np.ndarray) -> dict[str, np.ndarray]:
    """Exact ZOH update of each process over one sample, arrays (n,).

    Parameters
    ----------
    gain, tau1, tau2 : ndarray
        Process gain and lags (time units; 0: no lag). Ignored lags are 0.
    integrating : bool
        An integrating process (``K/s``, lags ignored).
    h : float
        Controller sample time, time units.
    f : ndarray
        Fraction of the dead time beyond whole samples, ``0 <= f < 1``.

    Returns
    -------
    dict of ndarray
        ``phi11, phi21, phi22, g1_new, g2_new, g1_old, g2_old`` and ``second`` (bool: the CV is
        the second state), in the notation of the module docstring.
    """
    t_new, t_old = (1.0 - f) * h, f * h
    zero = np.zeros_like(gain)
    if integrating:
        return {"phi11": np.ones_like(gain), "phi21": zero, "phi22": zero,
                "g1_new": gain * t_new, "g2_new": zero, "g1_old": gain * t_old, "g2_old": zero,
                "second": np.zeros(gain.shape, dtype=bool)}
    swap = tau1 <= 0.0  # one zero lag: the other one is the first
    t1, t2 = np.where(swap, tau2, tau1), np.where(swap, 0.0, tau2)
    second = t2 > 0.0
    x1_old = gain * (1.0 - _decay(t_old, t1))
    return {
        "phi11": _decay(np.full_like(gain, h), t1),
        "phi21": np.where(second, _coupling(np.full_like(gain, h), t1, t2), 0.0),
        "phi22": np.where(second, _decay(np.full_like(gain, h), t2), 0.0),
        "g1_new": gain * (1.0 - _decay(t_new, t1)),
        "g2_new": np.where(second, gain * _second_step(t_new, t1, t2), 0.0),
        "g1_old": x1_old * _decay(t_new, t1),
        "g2_old": np.where(second, _coupling(t_new, t1, t2) * x1_old
                           + _decay(t_new, t2) * gain * _second_step(t_old, t1, t2), 0.0),
        "second": second,
    }


@dataclass(frozen=True)
class SampledLoop:
    """Sampled loops of ``n`` processes under one controller (see the module docstring).

    Attributes
    ----------
    gain, tau1, tau2, theta : ndarray, shape (n,)
        Process gain, lags and dead time (time units).
    integrating : bool
        Integrating process.
    kc, ti, td, tf : float
        Controller gain, integral time (``math.inf``: none), derivative time and filter time.
    h : float
        Controller sample time, time units.
    """

    gain: np.ndarray
    tau1: np.ndarray
    tau2: np.ndarray
    theta: np.ndarray
    integrating: bool
    kc: float
    ti: float
    td: float
    tf: float
    h: float
    #: The ZOH coefficients (:func:`zoh_coefficients`) and whole delay samples ``m``, (n,) each;
    #: computed once from the fields above.
    coefficients: dict[str, np.ndarray] = field(default_factory=dict, repr=False, compare=False)
    #: A continuous factor ``X(jw)`` in series with the process (an actuator lag that cannot be
    #: folded into the process, the secondary closed loop), multiplied in at the same ``w``
    #: (an approximation, see :mod:`robustff.design.margins`); it has ``pick(rows)``,
    #: ``rectangular(w)``, ``bound(w)`` (of ``|X(jv)|``, ``v >= w``), ``slow_times`` and
    #: ``delay`` (n,). None: no such factor (the exact sampled loop).
    extra: Any = field(default=None, repr=False, compare=False)

    def __post_init__(self) -> None:
        if not self.coefficients:
            m, f = split_delay(self.theta, self.h)
            c = zoh_coefficients(self.gain, self.tau1, self.tau2, self.integrating, self.h, f)
            second = c["second"]
            # Two lags: P z^(m+1) = (b2 z^2 + b1 z + b0)/((z - phi11)(z - phi22)); one lag or
            # an integrator in the same form, (g1_new z^2 + g1_old z)/((z - phi11) z).
            b1 = c["phi21"] * c["g1_new"] + c["g2_old"] - c["phi11"] * c["g2_new"]
            b0 = c["phi21"] * c["g1_old"] - c["phi11"] * c["g2_old"]
            self.coefficients.update(
                c, m=m, b2=np.where(second, c["g2_new"], c["g1_new"]),
                b1=np.where(second, b1, c["g1_old"]), b0=np.where(second, b0, 0.0),
                p22=np.where(second, c["phi22"], 0.0))

    def pick(self, rows: np.ndarray | slice) -> SampledLoop:
        """The loops of the selected rows."""
        return SampledLoop(self.gain[rows], self.tau1[rows], self.tau2[rows], self.theta[rows],
                           self.integrating, self.kc, self.ti, self.td, self.tf, self.h,
                           {key: value[rows] for key, value in self.coefficients.items()},
                           None if self.extra is None else self.extra.pick(rows))

    @property
    def slow_times(self) -> np.ndarray:
        """Sum of the loop's times (lags, dead time, Ti, Td, Tf, the continuous factor's), (n,)."""
        total = self.tau1 + self.tau2 + self.theta + self.td + self.tf
        total = total + (self.ti if math.isfinite(self.ti) else 0.0)
        return total + (0.0 if self.extra is None else self.extra.slow_times)

    @property
    def total_delay(self) -> np.ndarray:
        """Dead time of the process and the continuous factor, (n,)."""
        return self.theta + (0.0 if self.extra is None else self.extra.delay)

    @property
    def integrators(self) -> int:
        """Open-loop poles at ``z = 1``."""
        return int(self.integrating) + int(math.isfinite(self.ti))

    @property
    def nyquist(self) -> float:
        """Highest frequency of the sampled loop, ``pi/h``, rad per time unit."""
        return math.pi / self.h

    def _columns(self, w: np.ndarray) -> dict[str, np.ndarray]:
        if w.ndim == 2:
            return {key: value[:, None] for key, value in self.coefficients.items()}
        return self.coefficients

    def controller(self, z: np.ndarray) -> np.ndarray:
        """``C(z)``, complex, same shape as ``z``."""
        value = np.ones_like(z)
        if math.isfinite(self.ti):
            value = value + (self.h / self.ti) / (z - 1.0)
        if self.td > 0.0:
            pole = self.tf / (self.tf + self.h)
            value = value + self.td / (self.tf + self.h) * (z - 1.0) / (z - pole)
        return self.kc * value

    def _parts(self, w: np.ndarray):
        """Shared pieces: coefficients, ``psi = w h``, ``tan(psi/2)``, ``cos psi``, ``sin psi``
        and ``1 - cos psi``.

        All from the half-angle tangent ``t = tan(psi/2)`` (``cos = (1 - t^2)/(1 + t^2)``,
        ``sin = 2t/(1 + t^2)``, ``1 - cos = 2t^2/(1 + t^2)``, the last without cancellation, so
        the integrators stay accurate at low frequency): numpy's tangent is vectorised and
        several times faster than its sine and cosine.
        """
        c = self._columns(w)
        psi = w * self.h
        t = np.tan(0.5 * psi)
        t2 = t * t
        q = 2.0 / (1.0 + t2)
        versine = t2 * q
        return c, psi, t, 1.0 - versine, t * q, versine

    @staticmethod
    def _turn(angle: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """``cos`` and ``sin`` of ``angle`` from its half-angle tangent (see :meth:`_parts`;
        the tangent of a float stays below about 1.6e16, so its square cannot overflow)."""
        t = np.tan(0.5 * angle)
        q = 2.0 / (1.0 + t * t)
        return q - 1.0, t * q

    def _controller_parts(self, t: np.ndarray, sin: np.ndarray, versine: np.ndarray):
        """Real and imaginary parts of ``C(z)/Kc`` on the unit circle (scalars where constant)."""
        real: np.ndarray | float = 1.0
        imag: np.ndarray | float = 0.0
        if math.isfinite(self.ti):  # (h/Ti)/(z - 1) = -(h/(2 Ti)) (1 + j/tan(psi/2))
            real = 1.0 - 0.5 * self.h / self.ti
            with np.errstate(divide="ignore"):
                imag = -0.5 * (self.h / self.ti) / t
        if self.td > 0.0:  # Td/(Tf + h) (z - 1)/(z - a)
            a = self.tf / (self.tf + self.h)
            scale = self.td / (self.tf + self.h) / ((1.0 - a) ** 2 + 2.0 * a * versine)
            real = real + scale * (1.0 + a) * versine
            imag = imag + scale * (1.0 - a) * sin
        return real, imag

    @staticmethod
    def _process_parts(c: dict[str, np.ndarray], cos: np.ndarray, sin: np.ndarray,
                       versine: np.ndarray):
        """Numerator and denominator (real, imaginary) of ``P(z) z^(m+1)``."""
        if not np.any(c["second"]):  # (g1_new z + g1_old) / (z - phi11)
            return (c["g1_new"] * cos + c["g1_old"], c["g1_new"] * sin,
                    (1.0 - c["phi11"]) - versine, sin)
        # (b2 z^2 + b1 z + b0) / ((z - phi11)(z - p22)); rows with one lag have p22 = 0 and
        # the numerator times z (see __post_init__), the same value
        first_re, other_re = (1.0 - c["phi11"]) - versine, (1.0 - c["p22"]) - versine
        b2, b1 = c["b2"], c["b1"]
        return (b2 * (cos * cos - sin * sin) + b1 * cos + c["b0"], (2.0 * b2 * cos + b1) * sin,
                first_re * other_re - sin * sin, (first_re + other_re) * sin)

    def magnitude(self, w: np.ndarray) -> np.ndarray:
        """``|L(exp(j w h))|``, shape of ``w``."""
        c, _, t, cos, sin, versine = self._parts(w)
        num_re, num_im, den_re, den_im = self._process_parts(c, cos, sin, versine)
        real, imag = self._controller_parts(t, sin, versine)
        value = abs(self.kc) * np.sqrt((real * real + imag * imag)
                                       * (num_re * num_re + num_im * num_im)
                                       / (den_re * den_re + den_im * den_im))
        if self.extra is not None:
            x_re, x_im = self.extra.rectangular(w)
            value = value * np.sqrt(x_re * x_re + x_im * x_im)
        return value

    def rectangular(self, w: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Real and imaginary parts of ``L(exp(j w h))``, shape of ``w``, in real arithmetic
        (numpy's complex exponentials and divisions are several times slower)."""
        c, psi, t, cos, sin, versine = self._parts(w)
        num_re, num_im, den_re, den_im = self._process_parts(c, cos, sin, versine)
        c_re, c_im = self._controller_parts(t, sin, versine)
        d_re, d_im = self._turn((c["m"] + 1.0) * psi)  # z^-(m+1)
        d_im = -d_im
        a_re, a_im = c_re * num_re - c_im * num_im, c_re * num_im + c_im * num_re
        b_re, b_im = a_re * d_re - a_im * d_im, a_re * d_im + a_im * d_re
        scale = self.kc / (den_re * den_re + den_im * den_im)
        real = (b_re * den_re + b_im * den_im) * scale
        imag = (b_im * den_re - b_re * den_im) * scale
        if self.extra is not None:
            x_re, x_im = self.extra.rectangular(w)
            real, imag = real * x_re - imag * x_im, real * x_im + imag * x_re
        return real, imag

    def polar(self, w: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """``|L(exp(j w h))|`` and its phase in rad (principal value), shape of ``w``."""
        real, imag = self.rectangular(w)
        return np.sqrt(real * real + imag * imag), np.arctan2(imag, real)

    def response(self, w: np.ndarray) -> np.ndarray:
        """``L(exp(j w h))``, complex, shape of ``w`` ((n,) or (n, F), rad per time unit)."""
        real, imag = self.rectangular(w)
        out = np.empty(real.shape, dtype=np.complex128)
        out.real, out.imag = real, imag
        return out

    def reference_response(self, w: np.ndarray) -> np.ndarray:
        """``L(exp(j w h))`` in complex arithmetic straight from the formulas (for checks)."""
        c = self._columns(w)
        psi = w * self.h
        z = np.exp(1j * psi)
        first = (c["g1_new"] * z + c["g1_old"]) / (z - c["phi11"])
        second = (c["phi21"] * first + c["g2_new"] * z + c["g2_old"]) / (z - c["phi22"])
        process = np.where(c["second"], second, first)
        value = self.controller(z) * process * np.exp(-1j * ((c["m"] + 1.0) * psi))
        if self.extra is not None:
            x_re, x_im = self.extra.rectangular(w)
            value = value * (x_re + 1j * x_im)
        return value

    def bound(self, w: np.ndarray) -> np.ndarray:
        """Upper bound of ``|L(exp(j v h))|`` for all ``w <= v <= pi/h``, shape (n,).

        ``|z - a|^2 = (1 - a)^2 + 2 a (1 - cos w h)`` grows with ``w`` for ``0 <= a <= 1``, the
        numerators are bounded by the sums of their coefficients' magnitudes.
        """
        c, _, _, _, _, versine = self._parts(np.minimum(w, self.nyquist))
        first = (np.abs(c["g1_new"]) + np.abs(c["g1_old"])) / np.sqrt(
            (1.0 - c["phi11"]) ** 2 + 2.0 * c["phi11"] * versine)
        second = (c["phi21"] * first + np.abs(c["g2_new"]) + np.abs(c["g2_old"])) / np.sqrt(
            (1.0 - c["phi22"]) ** 2 + 2.0 * c["phi22"] * versine)
        process = np.where(c["second"], second, first)
        controller = 1.0
        if math.isfinite(self.ti):
            with np.errstate(divide="ignore"):
                controller = controller + (self.h / self.ti) / np.sqrt(2.0 * versine)
        if self.td > 0.0:  # |z - 1|/|z - a| grows with w up to 2/(1 + a) at z = -1
            pole = self.tf / (self.tf + self.h)
            controller = controller + self.td / (self.tf + self.h) * 2.0 / (1.0 + pole)
        if self.extra is not None:
            process = process * self.extra.bound(w)
        return abs(self.kc) * controller * process
