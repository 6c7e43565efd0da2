"""Balance plants: steady state and linearisation against a published example and numerics."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from robustff.plant.balance_kinds import BALANCE_KINDS
from robustff.plant.blending_tank import BlendingTank
from robustff.plant.heated_tank import HeatedTank

# Stirred blending tank of Seborg, Edgar and Mellichamp, Process Dynamics and Control, Example
# 2.1 (the editions that number it so): rho = 900 kg/m3, V = 2 m3, w1 = 500 kg/min, x1 = 0.4,
# w2 = 200 kg/min, x2 = 0.75. Values quoted from memory of the example.
EXAMPLE = BlendingTank(density=900.0, volume=2.0, wild_flow=500.0, wild_composition=0.4,
                       manipulated_composition=0.75, outlet_composition=0.5)
HEATER = HeatedTank(density=980.0, volume=1.5, heat_capacity=4.18, latent_heat=2100.0,
                    process_flow=300.0, inlet_temperature=15.0, outlet_temperature=60.0,
                    pipe_volume=0.05, sensor_dead_time=0.2)


def test_blending_steady_state_is_the_published_example() -> None:
    # Seborg, Edgar and Mellichamp, Example 2.1: x = 0.5 for w2 = 200 kg/min.
    inputs = {"wild_flow": 500.0, "wild_composition": 0.4, "manipulated_flow": 200.0}
    assert EXAMPLE.steady_output(inputs) == pytest.approx(0.5, rel=1e-12)
    # and the inverse: the balance at x_sp = 0.5 gives the example's w2 = 200 kg/min
    assert EXAMPLE.operating_inputs()["manipulated_flow"] == pytest.approx(200.0, rel=1e-12)


def test_blending_linearisation_is_the_published_example() -> None:
    # Same example: tau = rho V / w = 2.571 min, dx/dw1 = -1.4286e-4, dx/dw2 = 3.5714e-4
    # per kg/min.
    paths = EXAMPLE.linear_paths()
    assert paths["process"].time_constant == pytest.approx(2.571, abs=5e-4)
    assert paths["wild_flow"].gain == pytest.approx(-1.4286e-4, rel=1e-4)
    assert paths["process"].gain == pytest.approx(3.5714e-4, rel=1e-4)
    assert paths["process"].dead_time == 0.0


def test_blending_feedforward_law_is_the_published_value() -> None:
    # Same example's feedforward law w2 = w1 (x_sp - x1)/(x2 - x_sp): 160 kg/min at w1 = 400.
    w2 = EXAMPLE.balance_manipulated(0.5, {"wild_flow": 400.0, "wild_composition": 0.4})
    assert w2 == pytest.approx(160.0, rel=1e-12)


def test_dead_time_is_pipe_holdup_over_flow_plus_the_measurement() -> None:
    # Plug flow at constant flow: theta = V_pipe / F (volumetric), here rho V_pipe / w (mass).
    tank = EXAMPLE.with_parameter("pipe_volume", 0.35).with_parameter("analyzer_dead_time", 0.5)
    assert tank.dead_time() == pytest.approx(900.0 * 0.35 / 700.0 + 0.5, rel=1e-12)
    assert HEATER.dead_time() == pytest.approx(980.0 * 0.05 / 300.0 + 0.2, rel=1e-12)


@pytest.mark.parametrize("plant", [EXAMPLE, HEATER], ids=["blending", "heater"])
def test_analytic_gains_match_finite_differences(plant) -> None:
    numeric = plant.numeric_gains()
    for name, gain in plant.gains().items():
        assert gain == pytest.approx(numeric[name], rel=1e-6), name


def test_heater_steady_state_by_hand() -> None:
    # Energy balance at steady state (arithmetic): w_s = w c_p (T - T_in) / lambda
    # = 300 * 4.18 * 45 / 2100 = 26.871 kg per time unit.
    steam = HEATER.operating_inputs()["steam_flow"]
    assert steam == pytest.approx(300.0 * 4.18 * 45.0 / 2100.0, rel=1e-12)
    gains = HEATER.gains()
    assert gains["steam_flow"] == pytest.approx(2100.0 / (300.0 * 4.18), rel=1e-12)
    assert gains["process_flow"] == pytest.approx(-45.0 / 300.0, rel=1e-12)
    assert HEATER.time_constant() == pytest.approx(980.0 * 1.5 / 300.0, rel=1e-12)


@pytest.mark.parametrize("plant", [EXAMPLE, HEATER], ids=["blending", "heater"])
def test_small_step_of_the_ode_is_the_first_order_response(plant) -> None:
    # A 0.1 % step in each input, integrated by scipy's RK45 at tight tolerance, against the
    # linearisation K (1 - exp(-t / tau)) (the delay-free tank state): within 0.2 % of the
    # step response, the rest being the nonlinearity of a 0.1 % step.
    base = plant.operating_inputs()
    y0 = plant.setpoint()
    tau = plant.time_constant()
    gains = plant.gains()
    times = np.linspace(0.0, 5.0 * tau, 60)
    for name, value in base.items():
        step = 1e-3 * max(abs(value), 1.0)
        inputs = dict(base, **{name: value + step})
        solution = solve_ivp(lambda t, y, inputs=inputs: [plant.derivative(y[0], inputs)],
                             (0.0, times[-1]),
                             [y0], t_eval=times, rtol=1e-11, atol=1e-13)
        linear = gains[name] * step * (1.0 - np.exp(-times / tau))
        final = abs(gains[name] * step)
        assert np.max(np.abs(solution.y[0] - y0 - linear)) < 2e-3 * final, name


def test_every_kind_names_its_parameters_with_units() -> None:
    for kind in BALANCE_KINDS.values():
        names = kind.parameter_names()
        assert kind.SETPOINT in names
        assert all(name in names for name in kind.DISTURBANCES)
        for parameter in kind.PARAMETERS:
            assert parameter.unit_text("min")
        for signal in (kind.MANIPULATED, *kind.DISTURBANCES, kind.OUTPUT):
            assert kind.signal_unit(signal, "min") and kind.SIGNAL_NAMES[signal]


def test_parameter_bounds_name_what_is_wrong() -> None:
    assert BlendingTank.parameter("wild_composition").violation(1.2) is not None
    assert BlendingTank.parameter("pipe_volume").violation(0.0) is None
    assert BlendingTank.parameter("volume").violation(0.0) == "must be > 0"
    assert HeatedTank.parameter("inlet_temperature").violation(-300.0) is not None
    assert math.isfinite(HEATER.time_constant())
