"""Where in frequency feedforward helps: the error ratio with and without it, across the plants.

With both arms sharing one feedback loop, a disturbance sinusoid of angular frequency ``w``
gives errors whose ratio (with feedforward over without) is, at the controller's samples,

    R(w) = |1 + P(z) Gff(z) M(z) / D(z)|,   z = exp(j w h),

independent of the feedback tuning (the sensitivity of the loop multiplies both errors alike).
Here ``P`` and ``D`` are the exact zero-order-hold equivalents of the process and disturbance
paths with their dead times (the input held over the scan period ``h``, as the simulation
holds the controller output and the disturbance), ``M`` the transmitter lag sampled the same
way, and ``Gff`` the compensator exactly as the simulation runs it (digital input filter,
whole and fractional sample delay, matched pole-zero lead-lag). Well below the Nyquist frequency
``pi/h`` this is the continuous ``|1 + Gp Gff Gm / Gd|``. Feedforward helps where ``R < 1``.
The process path is the loop as installed, linearised at the nominal point as the margins take
it: ``P`` is multiplied by the valve's actuator lag, or by the closed secondary loop ``T``
(:func:`robustff.design.margins.actuation_response`, continuous, without the secondary scan).

:func:`frequency_study` evaluates ``R`` for every sampled plant on a logarithmic grid, gives its
P5/P50/P90/P95 bands, the highest frequency up to which it helps in 90 % of the plants (the
crossover, where the P90 band reaches 1) and, for a recorded disturbance trace, the share of
the record's variance below the crossover from its Welch spectrum (``scipy.signal.welch``,
imported only then). With a case of several internal steps per scan the paths are still taken
at the scan period (the difference is negligible well below the Nyquist frequency).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from robustff.case import Case
from robustff.case.record import DisturbanceRecord
from robustff.case.sampling import nominal_plants
from robustff.design.margins import actuation_response
from robustff.design.sampled_loop import split_delay, zoh_coefficients
from robustff.design.tuning import LoopDesign
from robustff.engine.discretise import delay_weights
from robustff.plant.kinds import model_kind
from robustff.plant.models import PlantBatch
from robustff.study.summary_types import FrequencyDict, FrequencyRecordDict

__all__ = ["HELP_FRACTION", "FREQUENCY_POINTS", "MAX_PLANTS", "FrequencyResult", "frequency_study",
           "sampled_path", "compensator_response", "error_ratio", "variance_share_below",
           "frequency_csv", "frequency_summary", "measured_disturbances"]

#: Fraction of plants in which feedforward must help for a frequency to count as helped.
HELP_FRACTION = 0.9
#: Points of the logarithmic frequency grid.
FREQUENCY_POINTS = 160
#: Plants the bands are taken over at most (the study's first ones): P5 and P95 of 5000 plants
#: are within a fraction of a percentile of the whole population's, and memory stays
#: MAX_PLANTS x FREQUENCY_POINTS numbers however large the study.
MAX_PLANTS = 5000
_CHUNK = 2000  # plants per block (memory: CHUNK x FREQUENCY_POINTS complex numbers)


@dataclass(frozen=True)
class FrequencyResult:
    """The error ratio across the plants and what it means for a recorded trace.

    Parameters
    ----------
    omega : ndarray, shape (F,)
        Angular frequencies, rad per time unit, up to the Nyquist frequency ``pi / h``.
    bands : dict of str to ndarray, shape (F,)
        ``"p5", "p50", "p90", "p95"`` of the ratio over the plants (dimensionless), and
        ``"helped"``, the percentage of plants with a ratio below 1 (%).
    nominal : ndarray, shape (F,)
        The ratio of the nominal plant, dimensionless.
    crossover : float or None
        Highest frequency up to which the ratio is below 1 in at least 90 % of the plants,
        rad per time unit; ``nyquist`` when it helps that often up to the Nyquist frequency;
        None when it does not even at the lowest frequency of the grid.
    nyquist : float
        ``pi / h``, rad per time unit.
    plants : int
    variance_share : float or None
        Percentage of the recorded trace's variance below the crossover (Welch spectrum), %;
        None without a record.
    record_std : float or None
        Standard deviation of the recorded trace, disturbance units; None without a record.
    record_file : str or None
        The record's file as written in the case.
    disturbance : str
        The disturbance studied (its name; ``"disturbance"`` for the single one).
    disturbance_unit : str
        Its engineering unit.
    """

    omega: np.ndarray
    bands: dict[str, np.ndarray]
    nominal: np.ndarray
    crossover: float | None
    nyquist: float
    plants: int
    variance_share: float | None = None
    record_std: float | None = None
    record_file: str | None = None
    disturbance: str = "disturbance"
    disturbance_unit: str = ""


def _lags(batch: PlantBatch, block: str) -> tuple[np.ndarray, np.ndarray, np.ndarray, bool]:
    """Gain and the two lags of a block (the kind's lags, zero where it has fewer), integrating.

    ``block`` is ``"process"`` or a disturbance path's key prefix (``"disturbance"``,
    ``"disturbance.NAME"``)."""
    kinds = {prefix: kind for kind, prefix, _, _ in batch.paths}
    kind = model_kind(batch.process_kind if block == "process" else kinds[block])
    gain = np.asarray(batch.values[f"{block}.gain"], dtype=float)
    zero = np.zeros_like(gain)
    lags = [np.asarray(batch.values[f"{block}.{name}"], dtype=float)
            for name in kind.lag_parameters]
    tau1, tau2 = (lags + [zero, zero])[:2]
    return gain, tau1, tau2, kind.integrating


def sampled_path(batch: PlantBatch, block: str, h: float, omega: np.ndarray) -> np.ndarray:
    """Zero-order-hold equivalent of a path at ``z = exp(j w h)``, complex, shape (n, F).

    The sample-to-sample update is that of the simulation (and of
    :class:`robustff.design.sampled_loop.SampledLoop`): the output at scan ``k`` responds to
    inputs up to scan ``k - 1``, a dead time of ``m + f`` scans adds ``z^-m`` and splits the
    held input between two samples.
    """
    gain, tau1, tau2, integrating = _lags(batch, block)
    m, f = split_delay(np.asarray(batch.values[f"{block}.dead_time"], dtype=float), h)
    c = zoh_coefficients(gain, tau1, tau2, integrating, h, f)
    z = np.exp(1j * np.asarray(omega, dtype=float) * h)[None, :]
    col = {key: np.asarray(value)[:, None] for key, value in c.items()}
    first = (col["g1_new"] * z + col["g1_old"]) / (z - col["phi11"])
    with np.errstate(divide="ignore", invalid="ignore"):
        second = (col["phi21"] * first + col["g2_new"] * z + col["g2_old"]) / (z - col["phi22"])
    path = np.where(col["second"], second, first)
    return path * z ** (-(m[:, None] + 1.0))


def _decay(h: float, tau: np.ndarray | float) -> np.ndarray:
    """``exp(-h / tau)``, 0 for ``tau = 0`` (an instantaneous lag), as the simulation."""
    tau = np.asarray(tau, dtype=float)
    with np.errstate(divide="ignore", over="ignore"):
        return np.where(tau > 0.0, np.exp(-h / np.where(tau > 0.0, tau, 1.0)), 0.0)


def compensator_response(design: LoopDesign, h: float, omega: np.ndarray,
                         index: int = 0) -> np.ndarray:
    """The simulated feedforward compensator at ``z = exp(j w h)``, complex, shape (F,).

    Digital input filter ``(1 - a) / (1 - a z^-1)``, delay ``z^-m (w_new + w_old z^-1)`` (see
    :func:`robustff.engine.discretise.delay_weights`), and
    the matched pole-zero lead-lag ``s (1 - q z^-1) / (1 - p z^-1)`` with ``p = exp(-h/lag)``,
    ``q = exp(-h/lead)`` and ``s = K (1 - p) / (1 - q)`` (unit gain at ``z = 1`` times K).
    ``index``: the disturbance (case order) whose compensator it is.
    """
    ff = design.all_compensators[index]
    zi = np.exp(-1j * np.asarray(omega, dtype=float) * h)  # z^-1
    if not ff.active:
        return np.zeros_like(zi)
    pole, zero = float(_decay(h, ff.lag)), float(_decay(h, ff.lead))
    scale = ff.gain * (1.0 - pole) / (1.0 - zero) if zero < 1.0 else ff.gain
    m, f = split_delay(np.array([ff.delay]), h)
    a = float(_decay(h, ff.input_filter))
    lead_lag = scale * (1.0 - zero * zi) / (1.0 - pole * zi)
    w_new, w_old = delay_weights(float(f[0]), h, ff.delay_lag)
    delay = zi ** m[0] * (w_new + w_old * zi)
    return (1.0 - a) / (1.0 - a * zi) * delay * lead_lag


def _transmitter(batch: PlantBatch, h: float, omega: np.ndarray,
                 meter: str = "sensor") -> np.ndarray:
    """Transmitter lag sampled as the simulation runs it, (n, F): 1 without a lag.
    ``meter``: the transmitter's key prefix."""
    tau = np.asarray(batch.values[f"{meter}.time_constant"], dtype=float)[:, None]
    b = _decay(h, tau)
    zi = np.exp(-1j * np.asarray(omega, dtype=float) * h)[None, :]
    return np.where(tau > 0.0, (1.0 - b) * zi / (1.0 - b * zi), 1.0 + 0.0j)


def error_ratio(batch: PlantBatch, design: LoopDesign, h: float,
                omega: np.ndarray, index: int = 0) -> np.ndarray:
    """``|1 + P Gff M / D|`` of every plant, shape (n, F), dimensionless (NaN where D = 0).

    ``index``: the measured disturbance (case order) whose path ``D``, transmitter ``M`` and
    compensator ``Gff`` are taken (the other disturbances' feedforward does not act on it)."""
    _, prefix, meter, _ = batch.paths[index]
    gff = compensator_response(design, h, omega, index)[None, :]
    process = sampled_path(batch, "process", h, omega)
    actuation = actuation_response(batch, design.secondary, omega)
    if actuation is not None:
        process = process * actuation
    disturbance = sampled_path(batch, prefix, h, omega)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.abs(1.0 + process * gff * _transmitter(batch, h, omega, meter) / disturbance)
    return np.where(np.isfinite(ratio), ratio, np.nan)


def _grid(case: Case, h: float) -> np.ndarray:
    """Logarithmic grid from well below the slowest dynamics to the Nyquist frequency."""
    slow = max(sum(model.lags) + model.dead_time
               for model in (case.process, *(item.model for item in case.disturbance_inputs)))
    low = 0.01 / max(slow, h)
    high = math.pi / h
    return np.geomspace(min(low, high / 1e3), high, FREQUENCY_POINTS)


def _crossover(omega: np.ndarray, p90: np.ndarray) -> float | None:
    """Highest frequency up to which P90 of the ratio stays below 1 (log-interpolated)."""
    above = np.nonzero(~(p90 < 1.0))[0]
    if above.size == 0:
        return float(omega[-1])
    k = int(above[0])
    if k == 0:
        return None
    x0, x1 = math.log(omega[k - 1]), math.log(omega[k])
    y0, y1 = float(p90[k - 1]), float(p90[k])
    if not math.isfinite(y1) or y1 == y0:
        return float(omega[k - 1])
    return float(math.exp(x0 + (1.0 - y0) * (x1 - x0) / (y1 - y0)))


def variance_share_below(times: np.ndarray, values: np.ndarray, omega: float | None) -> float:
    """Percentage of a trace's variance below ``omega`` (rad per time unit), Welch spectrum.

    The trace is put on a uniform grid at its median row spacing; ``scipy.signal.welch``
    (Hann windows, half overlap, each segment's mean removed) estimates its one-sided power
    spectral density, whose sum over the bins at or below ``omega / (2 pi)`` is divided by the
    sum over all bins. ``omega`` None (feedforward helps at no frequency) gives 0.
    """
    from scipy.signal import welch

    if omega is None:
        return 0.0
    dt = float(np.median(np.diff(times)))
    grid = np.arange(times[0], times[-1] + 0.5 * dt, dt)
    x = np.interp(grid, times, values)
    segment = max(16, min(x.size, 2 ** int(math.log2(max(x.size // 8, 16)))))
    f, power = welch(x, fs=1.0 / dt, nperseg=segment, detrend="constant")
    total = float(np.sum(power))
    if total <= 0.0:
        return 0.0
    return float(100.0 * np.sum(power[f <= omega / (2.0 * math.pi)]) / total)


def measured_disturbances(case: Case) -> list[int]:
    """Indices (case order) of the measured disturbances, the headline one first."""
    return [k for k, item in enumerate(case.disturbance_inputs) if item.measured]


def frequency_study(case: Case, design: LoopDesign, batch: PlantBatch,
                    index: int | None = None) -> FrequencyResult:
    """The error ratio of feedforward over the sampled plants, and the record's variance share.

    Parameters
    ----------
    case : Case
    design : LoopDesign
        The feedforward whose effect is measured (designed from the nominal models).
    batch : PlantBatch
        The sampled plants.
    index : int, optional
        The disturbance (case order) studied; default the first measured one.

    Returns
    -------
    FrequencyResult
        Without an active feedforward the ratio is 1 at every frequency (no crossover).
    """
    if index is None:
        index = (measured_disturbances(case) or [0])[0]
    item = case.disturbance_inputs[index]
    h = case.simulation.step
    omega = _grid(case, h)
    quantiles = {"p5": 5.0, "p50": 50.0, "p90": 90.0, "p95": 95.0}
    ratios = [error_ratio(batch.subset(slice(start, start + _CHUNK)), design, h, omega, index)
              for start in range(0, batch.size, _CHUNK)]
    ratio = np.concatenate(ratios)  # n x F floats: the plants' ratios, F = FREQUENCY_POINTS
    # One sort for all four bands; the NaN-aware form (column by column) only when needed.
    percentile = np.nanpercentile if np.isnan(ratio).any() else np.percentile
    values = percentile(ratio, list(quantiles.values()), axis=0)
    finite = np.sum(np.isfinite(ratio), axis=0)
    helped = 100.0 * np.sum(ratio < 1.0, axis=0) / np.maximum(finite, 1)
    bands = dict(zip(quantiles, values, strict=True)) | {"helped": helped}
    nominal = error_ratio(nominal_plants(case, 1), design, h, omega, index)[0]
    # helped in 90 % of plants <=> the P90 band below 1 (ties at the order statistic aside)
    crossover = _crossover(omega, bands["p90"])
    record = _first_record(case, item.name)
    share = std = None
    if record is not None:
        share = variance_share_below(record.times, record.values, crossover)
        std = float(np.std(record.values))
    return FrequencyResult(omega, bands, nominal, crossover, math.pi / h, int(batch.size),
                           share, std, record.spec.file if record is not None else None,
                           item.label, item.unit)


def _first_record(case: Case, name: str) -> DisturbanceRecord | None:
    first = case.disturbance_inputs[0].name
    return next((event.record for event in case.events if event.record is not None
                 and (event.disturbance or first) == name), None)


def frequency_csv(results: FrequencyResult | list[FrequencyResult], time_unit: str) -> str:
    """``frequency.csv``: one row per frequency and measured disturbance, the ratio bands and
    the plants it helps; the last column names the disturbance."""
    header = [f"omega [rad/{time_unit}]", f"frequency [1/{time_unit}]", f"period [{time_unit}]",
              "ratio_p5 [-]", "ratio_p50 [-]", "ratio_p90 [-]", "ratio_p95 [-]",
              "ratio_nominal [-]", "plants_helped [%]", "disturbance"]
    lines = [",".join(header)]
    for result in results if isinstance(results, list) else [results]:
        for k, w in enumerate(result.omega):
            row = [w, w / (2.0 * math.pi), 2.0 * math.pi / w, result.bands["p5"][k],
                   result.bands["p50"][k], result.bands["p90"][k], result.bands["p95"][k],
                   result.nominal[k], result.bands["helped"][k]]
            lines.append(",".join("" if not math.isfinite(v) else f"{v:.6g}" for v in row)
                         + "," + result.disturbance)
    return "\n".join(lines) + "\n"


def frequency_summary(result: FrequencyResult, case: Case) -> FrequencyDict:
    """The ``frequency`` entry of ``summary.json``: the crossover and the record's variance share.

    Parameters
    ----------
    result : FrequencyResult
    case : Case
        For the units and the disturbance's name.
    """
    unit, crossover = case.time_unit, result.crossover
    record: FrequencyRecordDict | None = None
    if result.variance_share is not None:
        record = {"file": result.record_file or "", "variance_share_below": result.variance_share,
                  "std": result.record_std if result.record_std is not None else math.nan,
                  "std_unit": result.disturbance_unit or case.signals.disturbance.unit}
    up_to_nyquist = crossover is not None and crossover >= result.nyquist
    share = f"{100 * HELP_FRACTION:.0f} % of the plants"
    if crossover is None:
        words = (f"feedforward does not reduce the error in {share} at any frequency down to "
                 f"{result.omega[0]:.3g} rad/{unit}")
    elif up_to_nyquist:
        words = (f"feedforward reduces the error in {share} at every frequency up to the scan's "
                 f"Nyquist frequency ({result.nyquist:.3g} rad/{unit})")
    else:
        words = (f"feedforward reduces the error in {share} for "
                 f"disturbance variations slower than a period of "
                 f"{2.0 * math.pi / crossover:.3g} {unit} ({crossover:.3g} rad/{unit})")
    if record is not None:
        words += (f"; {record['variance_share_below']:.0f} % of the recorded trace's variance "
                  "lies there")
    return {
        "disturbance": (result.disturbance if case.disturbances
                        else case.signals.disturbance.name),
        "unit": f"rad/{unit}",
        "plants": result.plants,
        "help_fraction": HELP_FRACTION,
        "crossover": crossover,
        "crossover_period": 2.0 * math.pi / crossover if crossover else None,
        "helps_up_to_nyquist": up_to_nyquist,
        "nyquist": result.nyquist,
        "lowest": float(result.omega[0]),
        "record": record,
        "words": words,
    }
