"""Valve characteristics: the inherent equal-percentage law and an installed table."""

from __future__ import annotations

import math

import numpy as np
import pytest

from robustff.plant.valve import ValveModel, valve_code


def test_equal_percentage_is_r_to_the_power_x_minus_one():
    # Source: ANSI/ISA-75.11.01, "Flow Equations for Sizing Control Valves" (inherent flow
    # characteristic and rangeability): f = R^(x - 1), x the travel fraction; each equal
    # increment of travel multiplies the flow by the same factor.
    valve = ValveModel("equal-percentage", rangeability=50.0)
    x = np.array([0.0, 25.0, 50.0, 100.0])
    np.testing.assert_allclose(valve.flow_fraction(x), 50.0 ** (x / 100.0 - 1.0), rtol=1e-12)
    assert valve.flow_fraction(0.0) == pytest.approx(1.0 / 50.0)
    ratios = valve.flow_fraction(np.array([20.0, 40.0, 60.0]))
    assert ratios[1] / ratios[0] == pytest.approx(ratios[2] / ratios[1], rel=1e-12)
    # df/dx = ln(R) f, per unit travel fraction
    assert valve.slope(40.0) == pytest.approx(math.log(50.0) * 50.0 ** -0.6, rel=1e-12)


def test_installed_table_is_interpolated_linearly():
    valve = ValveModel("installed", installed=((0.0, 0.0), (50.0, 0.2), (100.0, 1.0)))
    assert valve.flow_fraction(25.0) == pytest.approx(0.1)
    assert valve.flow_fraction(75.0) == pytest.approx(0.6)
    assert valve.slope(25.0) == pytest.approx(0.4)
    assert valve.slope(75.0) == pytest.approx(1.6)


def test_codes():
    assert valve_code(None) == 0
    assert [valve_code(ValveModel(c)) for c in ("linear", "equal-percentage", "installed")] == [
        1, 2, 3]
