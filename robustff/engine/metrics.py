"""Loop performance metrics: definitions, and the conversion of the kernel's running sums.

Definitions (error ``e = setpoint - CV``, all in the case's units; ``t0`` is the start of the
first event; sums run over controller samples ``k`` of length ``h``, i.e. rectangle-rule
integrals over the simulated window):

* ``ie`` = sum e h (signed integral of error, CV unit x time unit);
* ``iae`` = sum |e| h; ``ise`` = sum e^2 h; ``itae`` = sum max(t - t0, 0) |e| h;
* ``peak_deviation`` = max |e| (CV units);
* ``overshoot``: for a setpoint step, the largest excursion of the CV beyond the new setpoint in
  the step's direction, in percent of the step; for a disturbance, the largest excursion on the
  side opposite to the one the uncompensated disturbance pushes the CV (the signature of an
  over-compensating feedforward; with several events each one sets the side from its start on),
  in CV units (``overshoot``) and in percent of the same
  sample's feedback-only peak deviation (``overshoot_percent``);
* ``settling_time``: the longest, over the step, ramp and setpoint events, of the time from the
  event until |e| stays within the settling band (until the next such event, or for good
  after the last one); filtered noise starts no event of its own. The band is 2 % of the
  setpoint step, or, for disturbance events, 2 % of the feedback-only peak deviation of the
  NOMINAL plant (one band for every sample and both arms, so that times are comparable). A
  response still outside the band at the next event reports the time to that event, and at
  the end of the window the remaining window;
* ``valve_travel`` = sum |u[k] - u[k-1]| (output units);
* ``time_at_limit`` = time the controller output spends at a limit (time units);
* ``cv_std`` = the standard deviation of the error over the window, ``sqrt(ise / T - (ie / T)^2)``
  with ``T`` the window (CV units; the CV's own standard deviation when the setpoint is constant,
  the measure for long recorded windows where one event's IAE means little);
* ``outside_band`` = percentage of the window with ``|e|`` above ``[signals.controlled] band``
  (%; NaN when the case gives no band).

The simulator accumulates these while it runs; :func:`trajectory_metrics` computes the same
numbers from stored trajectories and is used to check it.
"""

from __future__ import annotations

import numpy as np

__all__ = ["METRIC_NAMES", "METRIC_UNITS", "metrics_from_accumulators", "trajectory_metrics"]

METRIC_NAMES: tuple[str, ...] = (
    "iae",
    "ise",
    "itae",
    "ie",
    "peak_deviation",
    "overshoot",
    "overshoot_percent",
    "settling_time",
    "valve_travel",
    "time_at_limit",
    "cv_std",
    "outside_band",
)

#: Unit of each metric as a template: {cv}, {u} and {t} are the CV, output and time units.
METRIC_UNITS: dict[str, str] = {
    "iae": "{cv}*{t}",
    "ise": "{cv}^2*{t}",
    "itae": "{cv}*{t}^2",
    "ie": "{cv}*{t}",
    "peak_deviation": "{cv}",
    "overshoot": "{cv}",
    "overshoot_percent": "%",
    "settling_time": "{t}",
    "valve_travel": "{u}",
    "time_at_limit": "{t}",
    "cv_std": "{cv}",
    "outside_band": "%",
}


def metrics_from_accumulators(
    accumulators: np.ndarray, names: tuple[str, ...], setpoint_step: float | None, *,
    window: float, cv_band: float | None,
) -> dict[str, np.ndarray]:
    """Turn the kernel's running sums into named metrics.

    Parameters
    ----------
    accumulators : ndarray, shape (N, 2, A)
        Kernel output; axis 1 is the arm (0 feedback only, 1 with feedforward).
    names : tuple of str
        Names of the A accumulators.
    setpoint_step : float or None
        Size of the first event when it is a setpoint step (CV units), else None.
    window : float
        The simulated window the sums ran over, time units.
    cv_band : float or None
        ``[signals.controlled] band``, CV units; None: ``outside_band`` is NaN.

    Returns
    -------
    dict of str to ndarray, each of shape (N, 2)
    """
    raw = {name: accumulators[:, :, i] for i, name in enumerate(names)}
    out = {name: raw[name] for name in ("ie", "iae", "ise", "itae", "peak_deviation")}
    excursion = raw["opposite_excursion"]
    if setpoint_step:
        out["overshoot"] = 100.0 * excursion / abs(setpoint_step)
        out["overshoot_percent"] = out["overshoot"]
    else:
        out["overshoot"] = excursion
        peak_fb = raw["peak_deviation"][:, :1]
        with np.errstate(divide="ignore", invalid="ignore"):
            out["overshoot_percent"] = np.where(peak_fb > 0, 100.0 * excursion / peak_fb, 0.0)
    for name in ("settling_time", "valve_travel", "time_at_limit"):
        out[name] = raw[name]
    mean = raw["ie"] / window
    out["cv_std"] = np.sqrt(np.maximum(raw["ise"] / window - mean * mean, 0.0))
    out["outside_band"] = (100.0 * raw["outside_band"] / window if cv_band is not None
                           else np.full_like(raw["outside_band"], np.nan))
    return {name: out[name] for name in METRIC_NAMES}


def trajectory_metrics(
    error: np.ndarray,
    output: np.ndarray,
    step: float,
    *,
    event_start: float,
    direction: float | np.ndarray,
    settling_band: float,
    at_limit: np.ndarray | None = None,
    segment_start: np.ndarray | None = None,
    cv_band: float | None = None,
) -> dict[str, float]:
    """Metrics of one stored response (reference implementation of the definitions above).

    Parameters
    ----------
    error : ndarray, shape (T,)
        Setpoint minus CV at each controller sample, CV units.
    output : ndarray, shape (T,)
        Controller output deviation from its bias at each sample, output units.
    step : float
        Controller sample time, time units.
    event_start : float
        ``t0``, time units.
    direction : float or ndarray, shape (T,)
        +1 or -1: the sign of ``e`` that counts as an opposite-side excursion.
    settling_band : float
        Settling band, CV units.
    at_limit : ndarray of bool, shape (T,), optional
        Where the output was limited.
    segment_start : ndarray, shape (T,), optional
        Start time of the latest event at each sample (``Scenario.segment_start``); default:
        one event at ``event_start``.
    cv_band : float, optional
        ``[signals.controlled] band``, CV units (``outside_band`` is given only with it).

    Returns
    -------
    dict of str to float
        ``ie, iae, ise, itae, peak_deviation, opposite_excursion, settling_time, valve_travel,
        time_at_limit, cv_std`` and, with ``cv_band``, ``outside_band``.
    """
    t = np.arange(error.size) * step
    if segment_start is None:
        segment_start = np.full(error.size, event_start)
    is_outside = (np.abs(error) > settling_band) & (t >= event_start)
    settle = 0.0
    for start in np.unique(segment_start):
        outside = np.nonzero(is_outside & (segment_start == start))[0]
        if outside.size:
            settle = max(settle, min(t[outside[-1]] + step, error.size * step) - start)
    extra = {"cv_std": float(np.std(error))}  # population std of the samples: sum over T
    if cv_band is not None:
        extra["outside_band"] = float(100.0 * np.mean(np.abs(error) > cv_band))
    return {
        "ie": float(np.sum(error) * step),
        "iae": float(np.sum(np.abs(error)) * step),
        "ise": float(np.sum(error**2) * step),
        "itae": float(np.sum(np.maximum(t - event_start, 0.0) * np.abs(error)) * step),
        "peak_deviation": float(np.max(np.abs(error))),
        "opposite_excursion": float(max(np.max(direction * error), 0.0)),
        "settling_time": float(settle),
        "valve_travel": float(np.sum(np.abs(np.diff(output, prepend=0.0)))),
        "time_at_limit": float(np.sum(at_limit) * step) if at_limit is not None else 0.0,
    } | extra
