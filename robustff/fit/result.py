"""The result of fitting a model to one step-test record: best values and 95 % intervals.

Shared by the fit (:mod:`robustff.fit.least_squares`) and its confidence intervals
(:mod:`robustff.fit.intervals`), which builds the result; neither imports the other's internals.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from robustff.fit.records import (
    StepRecord,
)
from robustff.plant.models import MODEL_PARAMETERS, TransferModel

__all__ = ["ParameterEstimate", "FitResult", "model_parameters", "fit_units", "describe_fit"]


@dataclass(frozen=True)
class ParameterEstimate:
    """A fitted parameter: best value and 95 % confidence interval (None if not computed)."""

    value: float
    ci95: tuple[float, float] | None = None


@dataclass(frozen=True)
class FitResult:
    """A model fitted to one record.

    Parameters
    ----------
    model : TransferModel
        Best-fit model (times in the data's time unit).
    estimates : dict of str to ParameterEstimate
        One entry per name in ``MODEL_PARAMETERS[model.kind]``.
    method, ci_method : str
        How the model and the intervals were obtained.
    output_baseline, input_baseline : float
        Steady state before the step, signal units (output baseline is fitted).
    fitted : ndarray, shape (N,)
        Fitted output on the record's time grid, absolute output units.
    rmse : float
        Root-mean-square of data minus fit, output units.
    record : StepRecord
    warnings : tuple of str
        Notes on what was done with the data (rows left out, resampling).
    poor_fit : tuple of str
        Why the model does not describe the record (:mod:`robustff.fit.quality`); empty when
        it does.
    """

    model: TransferModel
    estimates: dict[str, ParameterEstimate]
    method: str
    ci_method: str
    output_baseline: float
    input_baseline: float
    fitted: np.ndarray
    rmse: float
    record: StepRecord
    warnings: tuple[str, ...] = field(default=())
    poor_fit: tuple[str, ...] = field(default=())


def model_parameters(model: TransferModel) -> dict[str, float]:
    """The fitted parameters in :data:`MODEL_PARAMETERS` order."""
    return {name: float(getattr(model, name)) for name in MODEL_PARAMETERS[model.kind]}



def fit_units(result: FitResult) -> dict[str, str]:
    """The unit of the RMSE, the sample time and each fitted parameter, from the record.

    The record's column names stand for the signals' units (a CSV carries no units): the gain
    is in ``<output> units per <input> unit`` (per time unit as well for an integrating model),
    times in the data's time unit, or "time units" when it is not known (``--time-unit``).

    Returns
    -------
    dict of str to str
        Keys ``"output"``, ``"time"`` and every parameter name of the model.
    """
    record = result.record
    time = record.time_unit or "time units"
    cv, source = f"{record.output_name} units", f"{record.input_name} unit"
    units = {"output": cv, "time": time}
    spec = result.model.spec
    for name in spec.parameter_names:
        units[name] = spec.parameter(name).unit_text(cv, source, record.time_unit or "time unit")
    return units


def describe_fit(result: FitResult) -> str:
    """One line such as ``FOPDT: K = 0.645 (T units per U unit), tau = 5.11 min, ...``."""
    model, units = result.model, fit_units(result)
    spec = model.spec
    parts = [f"K = {model.gain:.4g} ({units['gain']})"]
    if spec.integrating:
        parts.append("integrating")
    parts += [f"{spec.parameter(name).symbol} = {getattr(model, name):.4g} {units[name]}"
              for name in spec.lag_parameters]
    parts.append(f"dead time = {model.dead_time:.4g} {units['dead_time']}")
    return f"{model.kind.upper()}: " + ", ".join(parts)
