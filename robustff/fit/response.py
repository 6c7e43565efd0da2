"""Exact sampled response of the model kinds to a recorded input, with fractional dead time.

The input between samples is either held (``"zoh"``, as a controller output is) or linearly
interpolated (``"linear"``). For such an input the response at the sample instants is computed
exactly, with no Pade approximation and no rounding of the dead time to whole samples.

A held input uses the simulator's own exact step
(:func:`robustff.engine.discretise.block_coefficients`, one home for the zero-order hold), run
as a digital filter. For a linearly interpolated input write ``theta = m h + r`` with
``0 <= r < h``; then ``y(t_k) = y0(t_j + delta)`` with ``j = k - m - 1`` and ``delta = h - r``,
where ``y0`` is the delay-free response. The state at
``t_j + delta`` follows from the state at ``t_j`` through the matrix exponential of the
model augmented with the input segment, so the whole response is one linear recursion, run as a
digital filter (``scipy.signal.lfilter``).
"""

from __future__ import annotations

import math

import numpy as np
from scipy.linalg import expm

from robustff.engine.discretise import block_coefficients, split_delay
from robustff.plant.kinds import model_kind
from robustff.plant.models import TransferModel

__all__ = ["HOLDS", "simulate_response", "unit_response"]

HOLDS: tuple[str, ...] = ("zoh", "linear")


def _state_space(kind: str, time_constant: float, time_constant_2: float) -> tuple[np.ndarray, ...]:
    """Unit-gain delay-free model (A, B, C): shapes (n, n), (n,), (n,).

    The kind's stages in series, integrator first: an integrator is ``x' = v``, a lag ``tau``
    is ``x' = (v - x)/tau``, where ``v`` is the previous stage (or the input); the output is
    the last stage.
    """
    spec = model_kind(kind)
    taus = (time_constant, time_constant_2)[: len(spec.lag_parameters)]
    stages = ((None,) if spec.integrating else ()) + taus
    n = len(stages)
    a, b, c = np.zeros((n, n)), np.zeros(n), np.zeros(n)
    c[-1] = 1.0
    for i, tau in enumerate(stages):
        rate = 1.0 if tau is None else 1.0 / tau
        if tau is not None:
            a[i, i] = -1.0 / tau
        if i == 0:
            b[0] = rate
        else:
            a[i, i - 1] = rate
    return a, b, c


def _segment_maps(
    a: np.ndarray, b: np.ndarray, delta: float, step: float
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """State map over ``delta`` from a sample, input linear between samples:
    x(t_j + delta) = Phi x_j + G0 u_j + G1 u_{j+1}.

    Built from the exponential of [[A, B, 0], [0, 0, 1], [0, 0, 0]] (input value and slope as
    extra states), which integrates a linearly varying input exactly.
    """
    n = a.shape[0]
    aug = np.zeros((n + 2, n + 2))
    aug[:n, :n] = a
    aug[:n, n] = b
    aug[n, n + 1] = 1.0
    e = expm(aug * delta)
    phi, g_value, g_slope = e[:n, :n], e[:n, n], e[:n, n + 1]
    return phi, g_value - g_slope / step, g_slope / step


def _transfer(phi: np.ndarray, b: np.ndarray, c: np.ndarray, d: float) -> tuple[np.ndarray, ...]:
    """Numerator and denominator of c (zI - phi)^-1 b + d for a 1- or 2-state map."""
    if phi.shape[0] == 1:
        den = np.array([1.0, -phi[0, 0]])
        return d * den + np.array([0.0, c @ b]), den
    trace = phi[0, 0] + phi[1, 1]
    det = phi[0, 0] * phi[1, 1] - phi[0, 1] * phi[1, 0]
    den = np.array([1.0, -trace, det])
    adj_part = c @ (phi - trace * np.eye(2)) @ b
    return d * den + np.array([0.0, c @ b, adj_part]), den


def _held_response(kind: str, time_constant: float, time_constant_2: float, dead_time: float,
                   u: np.ndarray, sample_time: float) -> np.ndarray:
    """Unit-gain response to a held input: the simulator's exact step, run as a filter.

    With ``dead_time = (m + f) h`` the simulator steps ``x_{k+1} = Phi x_k + G_new u_{k-m} +
    G_old u_{k-m-1}`` and reads ``y_k`` from the last state; its transfer function from the
    delayed input is ``c (zI - Phi)^-1 (G_new + G_old z^-1)``.
    """
    from scipy.signal import lfilter

    whole, fraction = split_delay(dead_time, sample_time)
    coefficients = block_coefficients(model_kind(kind).code, 1.0, time_constant,
                                      time_constant_2, sample_time, fraction)
    phi11, phi21, phi22, g1_new, g2_new, g1_old, g2_old, order = coefficients
    if order == 1.0:
        phi, c = np.array([[phi11]]), np.array([1.0])
        g_new, g_old = np.array([g1_new]), np.array([g1_old])
    else:
        phi, c = np.array([[phi11, 0.0], [phi21, phi22]]), np.array([0.0, 1.0])
        g_new, g_old = np.array([g1_new, g2_new]), np.array([g1_old, g2_old])
    num_new, den = _transfer(phi, g_new, c, 0.0)
    num_old, _ = _transfer(phi, g_old, c, 0.0)
    # z^-1 on the older input: shift its numerator one power down
    num = np.append(num_new, 0.0) + np.concatenate(([0.0], num_old))
    y = np.zeros(u.shape[0])
    if whole < u.shape[0]:
        y[whole:] = lfilter(num, den, u[: u.shape[0] - whole])
    return y


def unit_response(
    kind: str,
    time_constant: float,
    time_constant_2: float,
    dead_time: float,
    input_signal: np.ndarray,
    sample_time: float,
    hold: str = "zoh",
) -> np.ndarray:
    """Response of the unit-gain model to a sampled input, starting from rest.

    Parameters
    ----------
    kind : str
        A registered model kind (:mod:`robustff.plant.kinds`).
    time_constant, time_constant_2 : float
        Lags, time units (> 0 where used).
    dead_time : float
        Dead time, time units (>= 0, any real value).
    input_signal : ndarray, shape (N,)
        Input deviation from its initial steady state at the sample instants (zero before the
        first sample).
    sample_time : float
        Sample interval h, time units.
    hold : {"zoh", "linear"}
        How the input behaves between samples.

    Returns
    -------
    ndarray, shape (N,)
        Output deviation at the sample instants.
    """
    from scipy.signal import lfilter

    u = np.asarray(input_signal, dtype=float)
    if hold == "zoh":
        return _held_response(kind, time_constant, time_constant_2, dead_time, u, sample_time)
    n_samples = u.shape[0]
    whole = int(math.floor(dead_time / sample_time + 1e-12))
    delta = sample_time - (dead_time - whole * sample_time)
    delta = min(max(delta, 0.0), sample_time)
    a, b, c = _state_space(kind, time_constant, time_constant_2)
    phi, g0, g1 = _segment_maps(a, b, sample_time, sample_time)
    phi_d, g0_d, g1_d = _segment_maps(a, b, delta, sample_time)
    # shifted state z_j = x_j - G1 u_j removes u_{j+1} from the state update
    b_shift = phi @ g1 + g0
    c_out = c @ phi_d
    num, den = _transfer(phi, b_shift, c_out, float(c_out @ g1 + c @ g0_d))
    ahead = np.append(u[1:], u[-1])
    v = lfilter(num, den, u) + float(c @ g1_d) * ahead
    y = np.zeros(n_samples)
    lag = whole + 1
    if lag < n_samples:
        y[lag:] = v[: n_samples - lag]
    return y


def simulate_response(
    model: TransferModel, input_signal: np.ndarray, sample_time: float, hold: str = "zoh"
) -> np.ndarray:
    """Response of ``model`` to a sampled input deviation, from rest (shape (N,) in, (N,) out).

    See :func:`unit_response` for the arguments; the gain multiplies the unit-gain response.
    """
    return model.gain * unit_response(
        model.kind, model.time_constant, model.time_constant_2, model.dead_time,
        input_signal, sample_time, hold,
    )
