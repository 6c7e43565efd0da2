"""Sampled plants of a case whose plant is built from balances.

Each sample is the nominal plant with its sampled physical parameters and operating point; its
path models are its own linearisation at its own operating point (for the stability margins and
the loop's stability verdict), and its physical numbers go to the nonlinear simulation.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import replace

import numpy as np

from robustff.case.schema import Case
from robustff.plant.balance_batch import BALANCE_COLUMNS, BalanceBatch
from robustff.plant.models import PlantBatch, TransferModel

__all__ = ["balance_plant_batch"]

_PATH_KEYS = ("gain", "time_constant", "time_constant_2", "dead_time")


def balance_plant_batch(case: Case, names: Sequence[str], values: np.ndarray) -> PlantBatch:
    """The sampled plants; ``values`` has one column per name in ``names`` (shape (n, p)).

    ``process.NAME`` columns are physical parameters; ``sensor.time_constant`` is the lag of
    the measured inputs' transmitters. Parameters not in ``names`` keep their nominal values.
    The path models of the batch (``process`` and ``disturbance.NAME`` for every input) are
    each sample's linearisation at its own operating point.
    """
    assert case.balance is not None
    nominal = case.balance.plant
    n = values.shape[0]
    physical = [(column, name.partition(".")[2]) for column, name in enumerate(names)
                if name.startswith("process.")]
    sensor = np.full(n, case.sensor.time_constant)
    for column, name in enumerate(names):
        if name == "sensor.time_constant":
            sensor = np.asarray(values[:, column], dtype=np.float64)
    lags = [name for _, name in physical if name == "flow_loop_time_constant"]
    process_model = case.process
    if lags and process_model.kind == "fopdt":  # some samples have a flow-loop lag
        process_model = TransferModel("sopdt", process_model.gain, process_model.time_constant,
                                      0.0, process_model.dead_time)
    named = tuple((item.name, item.model, item.sensor, item.measured)
                  for item in case.disturbances)
    batch = PlantBatch.from_nominal(process_model, case.disturbance, case.sensor, n,
                                    named=named)
    rows = np.empty((n, len(BALANCE_COLUMNS)))
    columns = {(path, key): np.empty(n) for path in ("process", *nominal.DISTURBANCES)
               for key in _PATH_KEYS}
    for i in range(n):
        plant = replace(nominal, **{name: float(values[i, column]) for column, name in physical})
        for path, model in plant.linear_paths().items():
            for key in _PATH_KEYS:
                columns[path, key][i] = getattr(model, key)
        rows[i, :-1] = plant.kernel_row()
    rows[:, -1] = sensor
    for (path, key), sampled in columns.items():
        prefix = "process" if path == "process" else f"disturbance.{path}"
        batch.set_parameter(f"{prefix}.{key}", sampled)
    for name in nominal.DISTURBANCES:
        batch.set_parameter(f"disturbance.{name}.sensor.time_constant", sensor)
    batch.balance = BalanceBatch(nominal.CODE, rows)
    return batch
