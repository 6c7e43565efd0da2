"""Contract tests every registered model kind must pass.

``CONTRACT`` holds, for each kind, a nominal model and its rational part written out by hand;
:func:`test_contract_table_covers_every_registered_kind` fails as soon as a kind is registered
in :mod:`robustff.plant.kinds` without a row here, so a new kind cannot skip these checks.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
import pytest
from path_stepping import step_path

from robustff.case import FeedbackSpec
from robustff.design.tuning import tune_feedback
from robustff.plant.kinds import kind_names, model_kind, registered_kinds
from robustff.plant.models import PlantBatch, SensorModel, TransferModel


@dataclass(frozen=True)
class KindContract:
    """A nominal model of one kind and its transfer function written out independently."""

    model: TransferModel
    #: (numerator, denominator) of the delay-free part, descending powers of s.
    rational: Callable[[TransferModel], tuple[list[float], list[float]]]
    #: Gain unit for CV unit "degC", input unit "kg/s", time unit "min".
    gain_unit: str


CONTRACT: dict[str, KindContract] = {
    # K / (tau s + 1)
    "fopdt": KindContract(
        TransferModel("fopdt", 1.8, 7.0, 0.0, 2.35),
        lambda m: ([m.gain], [m.time_constant, 1.0]),
        "degC per kg/s",
    ),
    # K / ((tau1 s + 1)(tau2 s + 1)) = K / (tau1 tau2 s^2 + (tau1 + tau2) s + 1)
    "sopdt": KindContract(
        TransferModel("sopdt", -2.2, 6.0, 2.5, 1.35),
        lambda m: ([m.gain], [m.time_constant * m.time_constant_2,
                              m.time_constant + m.time_constant_2, 1.0]),
        "degC per kg/s",
    ),
    # K / s
    "ipdt": KindContract(
        TransferModel("ipdt", 0.04, 0.0, 0.0, 3.15),
        lambda m: ([m.gain], [1.0, 0.0]),
        "degC per kg/s per min",
    ),
}

KINDS = sorted(kind_names())
OMEGA = np.array([0.01, 0.1, 0.5, 1.0, 3.0])  # rad per time unit


def test_contract_table_covers_every_registered_kind():
    # common practice, no source: every registered kind needs a contract row (and no stale rows)
    assert set(CONTRACT) == set(kind_names())
    for name, row in CONTRACT.items():
        assert row.model.kind == name


def test_registry_records_are_consistent():
    # common practice, no source: codes drive the simulator, names the case file
    codes = [kind.code for kind in registered_kinds()]
    assert len(set(codes)) == len(codes)
    for kind in registered_kinds():
        assert model_kind(kind.name) is kind
        assert kind.name == kind.name.lower() and kind.title and kind.description
        assert kind.parameter_names[0] == "gain" and kind.parameter_names[-1] == "dead_time"
        assert set(kind.lag_parameters) <= set(kind.parameter_names)
        assert kind.order == int(kind.integrating) + len(kind.lag_parameters)
    with pytest.raises(KeyError, match="choose one of"):
        model_kind("nope")


@pytest.mark.parametrize("name", KINDS)
def test_parameters_have_units(name):
    # common practice, no source: a gain is CV per input (per time when integrating); lags and
    # delays are times.
    kind = model_kind(name)
    for spec in kind.parameters:
        text = spec.unit_text("degC", "kg/s", "min")
        assert spec.unit and spec.symbol and spec.description
        assert "{" not in text and "}" not in text
        if spec.name != "gain":
            assert text == "min"
    assert kind.parameter("gain").unit_text("degC", "kg/s", "min") == CONTRACT[name].gain_unit


@pytest.mark.parametrize("name", KINDS)
def test_frequency_response_matches_python_control_with_exact_delay(name):
    # Source: python-control (Fuller et al., The Python Control Systems Library, 2021):
    # control.frequency_response of the hand-written rational part, times the exact delay factor
    # exp(-j omega theta) computed here.
    import control

    row = CONTRACT[name]
    num, den = row.rational(row.model)
    reference = control.frequency_response(control.tf(num, den), OMEGA)
    rational = np.asarray(reference.frdata)[0, 0]
    delay = np.exp(-1j * OMEGA * row.model.dead_time)
    np.testing.assert_allclose(row.model.frequency_response(OMEGA), rational * delay,
                               rtol=1e-12, atol=0)
    mine = control.frequency_response(row.model.to_control(), OMEGA)
    np.testing.assert_allclose(np.asarray(mine.frdata)[0, 0], rational, rtol=1e-12, atol=0)


@pytest.mark.parametrize("name", KINDS)
def test_pade_step_response_matches_python_control(name):
    # Source: python-control (Fuller et al., The Python Control Systems Library, 2021):
    # step_response of the hand-written rational part in series with control.pade(theta, 6).
    import control

    row = CONTRACT[name]
    num, den = row.rational(row.model)
    pade = control.tf(*control.pade(row.model.dead_time, 6))
    t = np.linspace(0.0, 40.0, 401)
    _, expected = control.step_response(control.tf(num, den) * pade, t)
    _, got = control.step_response(row.model.to_control(pade_order=6), t)
    np.testing.assert_allclose(got, expected, rtol=1e-9, atol=1e-12)


def _block_output(model: TransferModel, h: float, u: np.ndarray) -> np.ndarray:
    """The discretised path stepped by hand: output at the sample instants, from rest."""
    return step_path(model.kind, model.gain, model.time_constant, model.time_constant_2,
                     model.dead_time, h, u)


@pytest.mark.parametrize("name", KINDS)
@pytest.mark.parametrize("whole_samples", [0, 3])
def test_discretisation_matches_scipy_cont2discrete_for_whole_sample_delays(name, whole_samples):
    # Source: scipy.signal.cont2discrete (ZOH) and scipy.signal.dlsim: exact zero-order-hold
    # discretisation of the rational part; a delay of m whole samples shifts the output by m.
    from scipy import signal

    row = CONTRACT[name]
    h = 0.2
    model = row.model.with_parameter("dead_time", whole_samples * h)
    num, den = row.rational(model)
    # state-space form: the discrete numerator's leading zero would upset the tf normaliser
    discrete = signal.cont2discrete(signal.tf2ss(num, den), h, method="zoh")
    u = np.random.default_rng(7).uniform(-1.0, 1.0, 300)
    _, y, _ = signal.dlsim(discrete, u)
    expected = np.r_[np.zeros(whole_samples), np.ravel(y)[: u.size - whole_samples]]
    np.testing.assert_allclose(_block_output(model, h, u), expected, rtol=0, atol=1e-9)


@pytest.mark.parametrize("name", KINDS)
def test_discretisation_matches_scipy_lsim_with_fractional_delay(name):
    # Source: scipy.signal.lsim with interp=False (ZOH between grid points, exact for a held
    # input): the continuous rational part driven by the input delayed by theta, on a grid of
    # h/4 that contains theta (theta = 11.75 h), read at the sample instants.
    from scipy import signal

    row = CONTRACT[name]
    h, q = 0.2, 4
    model = row.model.with_parameter("dead_time", 11.75 * h)
    u = np.random.default_rng(11).uniform(-1.0, 1.0, 200)
    fine_t = np.arange(u.size * q) * (h / q)
    shift = round(model.dead_time / (h / q))  # the delay in fine steps (47)
    held = np.repeat(u, q)  # the input held over each sample
    delayed = np.r_[np.zeros(shift), held[: held.size - shift]]
    num, den = row.rational(model)
    _, y, _ = signal.lsim((num, den), delayed, fine_t, interp=False)
    np.testing.assert_allclose(_block_output(model, h, u), y[::q], rtol=0, atol=1e-9)


@pytest.mark.parametrize("name", KINDS)
@pytest.mark.parametrize("tuning", ["simc", "imc"])
@pytest.mark.parametrize("form", ["pi", "pid"])
def test_tuning_rules_give_finite_settings(name, tuning, form):
    # common practice, no source: a rule must give finite settings, Ti > 0, Td >= 0, and a gain
    # acting in the process gain's direction (e = setpoint - CV, u = Kc e).
    model = CONTRACT[name].model
    settings, _ = tune_feedback(model, FeedbackSpec(form=form, tuning=tuning), 0.1)
    values = (settings.kc, settings.ti, settings.td, settings.filter_time)
    assert all(math.isfinite(v) for v in values)
    assert settings.ti > 0.0 and settings.td >= 0.0
    assert settings.kc * model.gain > 0.0


@pytest.mark.parametrize("name", KINDS)
def test_batch_round_trip_keeps_the_kind_parameters(name):
    # common practice, no source: a batch stores every kind in the same columns and gives the
    # nominal model back, with unused lags zero.
    model = CONTRACT[name].model
    batch = PlantBatch.from_nominal(model, model, SensorModel(), 3)
    assert batch.model("process", 2) == model
    assert tuple(model.parameters()) == model.spec.parameter_names
