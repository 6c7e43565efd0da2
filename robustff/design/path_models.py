"""The linear path models of a case, described with their units (for ``robustff check``).

For a case of transfer-function models these are its ``[process]`` and ``[disturbance]``; for a
plant built from balances, the linearisation at the nominal operating point of the manipulated
input's path and of every disturbance input's path, plus the steady state there. What a bump
test at that operating point would give.
"""

from __future__ import annotations

from typing import Any

from robustff.case import Case
from robustff.plant.models import TransferModel

__all__ = ["path_models", "steady_state", "path_summary"]


def path_models(case: Case) -> tuple[tuple[str, str, TransferModel], ...]:
    """``(path name, input name, model)`` for the process and each disturbance path.

    The process path is named ``"process"``; a balance plant's disturbance paths are named
    after its inputs, named disturbances (``[disturbance.NAME]``) after their names, a single
    ``[disturbance]`` ``"disturbance"``.
    """
    if case.balance is None:
        if not case.disturbances:
            return (("process", case.signals.output.name, case.process),
                    ("disturbance", case.signals.disturbance.name, case.disturbance))
        return (("process", case.signals.output.name, case.process),
                *((item.name, item.name, item.model) for item in case.disturbances))
    plant = case.balance.plant
    paths = case.balance.paths()
    rows = [("process", plant.MANIPULATED, paths["process"])]
    rows += [(name, name, paths[name]) for name in plant.DISTURBANCES]
    return tuple(rows)


def _input_unit(case: Case, path: str) -> str:
    if case.balance is not None:
        plant = case.balance.plant
        return plant.signal_unit(plant.MANIPULATED if path == "process" else path, case.time_unit)
    if path == "process":
        return case.signals.output.unit or "input unit"
    if case.disturbances:
        return case.disturbance_named(path).unit or "input unit"
    return case.signals.disturbance.unit or "input unit"


def path_summary(case: Case) -> dict[str, dict[str, Any]]:
    """Every path model's numbers with units, by path name (JSON-ready)."""
    cv_unit = case.signals.controlled.unit or "CV unit"
    result: dict[str, dict[str, Any]] = {}
    for path, source, model in path_models(case):
        gain_unit = model.spec.parameter("gain").unit_text(cv_unit, _input_unit(case, path),
                                                          case.time_unit)
        entry: dict[str, Any] = {"input": source, "model": model.kind, "gain": model.gain,
                                 "gain_unit": gain_unit}
        for name in model.spec.parameter_names:
            if name != "gain":
                entry[name] = float(getattr(model, name))
        entry["time_unit"] = case.time_unit
        result[path] = entry
    return result


def steady_state(case: Case) -> dict[str, dict[str, Any]]:
    """A balance plant's steady state at the nominal operating point: every input, the output,
    the hold-up and the outflow, each ``{"value", "unit", "meaning"}``; empty otherwise."""
    if case.balance is None:
        return {}
    plant, unit = case.balance.plant, case.time_unit
    inputs = plant.operating_inputs()
    outflow, _ = plant.rates(inputs)
    rows: dict[str, dict[str, Any]] = {}
    for name in (plant.MANIPULATED, *plant.DISTURBANCES, plant.OUTPUT):
        value = plant.setpoint() if name == plant.OUTPUT else inputs[name]
        rows[name] = {"value": value, "unit": plant.signal_unit(name, unit),
                      "meaning": plant.SIGNAL_NAMES[name]}
    rows["holdup"] = {"value": plant.holdup(), "unit": "kg", "meaning": "mass in the tank"}
    rows["outflow"] = {"value": outflow, "unit": f"kg/{unit}", "meaning": "outlet flow"}
    rows["pipe_delay"] = {"value": plant.pipe_holdup() / outflow, "unit": unit,
                          "meaning": "transport delay of the pipe to the measurement"}
    return rows
