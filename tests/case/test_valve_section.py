"""The [valve] table: read, refused with the key named, saved and read back, made uncertain."""

from __future__ import annotations

import pytest
from case_texts import MINIMAL

from robustff.case import case_to_toml, parse_case
from robustff.errors import CaseError

STICKY = """
[valve]
characteristic = "equal-percentage"
rangeability = 30.0
stiction_s = 2.5
stiction_j = 0.5
rate_limit = 4.0
time_constant = 1.5
"""


def test_a_case_without_valve_has_an_ideal_actuator():
    assert parse_case(MINIMAL).valve is None


def test_valve_keys_are_read():
    valve = parse_case(MINIMAL + STICKY).valve
    assert (valve.characteristic, valve.rangeability, valve.stiction_s, valve.stiction_j,
            valve.rate_limit, valve.time_constant) == ("equal-percentage", 30.0, 2.5, 0.5, 4.0,
                                                       1.5)
    installed = parse_case(MINIMAL + '[valve]\ncharacteristic = "installed"\n'
                           'installed = [[0, 0.0], [40, 0.2], [100, 1.0]]\ndeadband = 1\n').valve
    assert installed.installed == ((0.0, 0.0), (40.0, 0.2), (100.0, 1.0))
    assert installed.deadband == 1.0


@pytest.mark.parametrize(("text", "key"), [
    ('[valve]\ncharacteristic = "quick-opening"\n', "valve.characteristic"),
    ('[valve]\ncharacteristic = "equal-percentage"\nrangeability = 1.0\n', "valve.rangeability"),
    ('[valve]\nrangeability = 30\n', "valve.rangeability"),
    ('[valve]\ncharacteristic = "installed"\n', "valve.installed"),
    ('[valve]\ncharacteristic = "installed"\ninstalled = [[0, 0], [50, 0.6], [90, 1]]\n',
     "valve.installed"),
    ('[valve]\ncharacteristic = "installed"\ninstalled = [[0, 0], [50, 0.6], [100, 0.5]]\n',
     "valve.installed"),
    ('[valve]\ndeadband = -1\n', "valve.deadband"),
    ('[valve]\ndeadband = 1\nstiction_s = 2\n', "valve.deadband"),
    ('[valve]\nstiction_j = 1\n', "valve.stiction_j"),
    ('[valve]\nstickiness = 1\n', "valve.stickiness"),
    ('[valve]\ndeadband = 120\n', "valve.deadband"),
    ('[uncertainty]\n"valve.deadband" = { uniform = [0.1, 1.0] }\n', "uncertainty"),
    (STICKY + '[uncertainty]\n"valve.friction" = { uniform = [0.1, 1.0] }\n', "uncertainty"),
    (STICKY + '[uncertainty]\n"valve.rangeability" = { uniform = [0.5, 40] }\n', "uncertainty"),
    (STICKY + '[uncertainty]\n"valve.stiction_s" = { uniform = [-1, 3] }\n', "uncertainty"),
])
def test_bad_valve_tables_are_refused_naming_the_key(text, key):
    with pytest.raises(CaseError) as info:
        parse_case(MINIMAL + text)
    assert key in str(info.value)


def test_valve_parameters_can_be_uncertain_and_the_valve_saves_and_reloads():
    case = parse_case(MINIMAL + STICKY + '[uncertainty]\n"valve.stiction_s" = { uniform = '
                      '[1.0, 4.0] }\n"valve.rate_limit" = { relative = 0.5 }\n')
    assert {p.key for p in case.uncertainty} >= {"valve.stiction_s", "valve.rate_limit"}
    assert case.parameter_unit("valve.rate_limit") == f"%/{case.time_unit}"
    assert case.nominal_value("valve.stiction_s") == 2.5
    again = parse_case(case_to_toml(case))
    assert again.valve == case.valve
    assert again.uncertainty == case.uncertainty
