"""Checks of the plant models against python-control and analytic values."""

import numpy as np
import pytest

from robustff.plant.models import PlantBatch, SensorModel, TransferModel


@pytest.mark.parametrize(
    "model",
    [
        TransferModel("fopdt", 2.0, 10.0, 0.0, 3.0),
        TransferModel("sopdt", -1.5, 6.0, 2.0, 1.0),
        TransferModel("ipdt", 0.05, 0.0, 0.0, 4.0),
    ],
)
def test_frequency_response_matches_python_control(model):
    # Reference: python-control evaluates the delay-free rational part; the exact delay factor
    # exp(-j w theta) is analytic (source: definition of the Laplace transform of a delay).
    omega = np.logspace(-3, 1, 50)
    rational = model.to_control()
    expected = rational(1j * omega) * np.exp(-1j * omega * model.dead_time)
    np.testing.assert_allclose(model.frequency_response(omega), expected, rtol=1e-12)


def test_plant_batch_fills_nominal_and_zeroes_unused_lags():
    batch = PlantBatch.from_nominal(
        TransferModel("ipdt", 0.1, 0.0, 0.0, 2.0),
        TransferModel("fopdt", 1.0, 5.0, 0.0, 1.0),
        SensorModel(0.5, 0.0),
        4,
    )
    assert batch.size == 4
    assert np.all(batch.values["process.time_constant"] == 0.0)
    assert np.all(batch.values["disturbance.time_constant"] == 5.0)
    batch.set_parameter("process.gain", np.array([1.0, 2.0, 3.0, 4.0]))
    assert batch.model("process", 2).gain == 3.0
    with pytest.raises(KeyError):
        batch.set_parameter("process.color", np.zeros(4))
