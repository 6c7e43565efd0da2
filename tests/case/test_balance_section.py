"""Reading plants built from balances: every problem named by its key, the hook's results."""

from __future__ import annotations

from pathlib import Path

import pytest
from balance_cases import BLENDING, HEATER, balance_case, event
from case_texts import MINIMAL

from robustff.case import case_to_toml, parse_case
from robustff.errors import CaseError


def _text(template: str = BLENDING, **changes: str) -> str:
    fields = {"pipe_volume": "0.1", "analyzer_dead_time": "0.2", "measured": '["wild_flow"]',
              "feedback": "", "feedforward": 'law = "balance"', "duration": "40.0",
              "step": "0.05", "substeps": "1", "events": event("wild_flow", 2.0, -100.0),
              "extra": "", "process_extra": ""}
    if template is HEATER:
        fields["measured"] = '["process_flow"]'
        fields["events"] = event("process_flow", 2.0, -50.0)
    fields.update(changes)
    return template.format(**fields)


def _problems(text: str) -> str:
    with pytest.raises(CaseError) as info:
        parse_case(text)
    return str(info.value)


def test_the_case_models_are_the_linearisation_and_the_bias_the_steady_flow() -> None:
    case = parse_case(_text())
    assert case.balance is not None and case.balance.kind == "blending-tank"
    assert case.process == case.balance.paths()["process"]
    assert case.disturbance == case.balance.paths()["wild_flow"]
    # Seborg, Edgar and Mellichamp, Example 2.1: w2 = 200 kg/min at x = 0.5.
    assert case.feedback.output_bias == pytest.approx(200.0, rel=1e-12)
    assert case.signals.output.unit == "kg/min"
    assert case.signals.controlled.unit == "mass fraction"
    assert case.feedforward.structure == "static"  # the balance law's default dynamics
    assert case.parameter_unit("process.volume") == "m3"
    assert case.nominal_value("process.wild_flow") == 500.0


def test_a_balance_case_reads_back_from_what_the_writer_writes() -> None:
    case = parse_case(_text(extra='[uncertainty]\n"process.volume" = { relative = 0.2 }\n'))
    assert parse_case(case_to_toml(case)) == case


RECORD = Path(__file__).resolve().parents[2] / "cases" / "data" / "tempering-feed-record.csv"
RECORD_EVENT = (f'[[event]]\nkind = "disturbance-record"\nfile = "{RECORD.as_posix()}"\n'
                'time_column = "timestamp"\nvalue_column = "FT210_m3h"\n'
                'disturbance = "wild_flow"\n')

PROBLEMS = {
    "unknown key": (_text().replace("density = 900.0", "density = 900.0\ndensty = 1.0"),
                    "process.densty"),
    "missing parameter": (_text().replace("volume = 2.0\n", ""), "process.volume"),
    "composition above one": (_text().replace("wild_composition = 0.4", "wild_composition = 1.4"),
                              "process.wild_composition"),
    "setpoint outside the streams": (
        _text().replace("outlet_composition = 0.5", "outlet_composition = 0.8"),
        "process.outlet_composition"),
    "unknown measured input": (_text(measured='["wild_flw"]'), "process.measured"),
    "output bias given": (_text(feedback="output_bias = 200.0"), "feedback.output_bias"),
    "steady flow beyond the output range": (
        _text().replace("output_high = 2000.0", "output_high = 150.0"), "feedback.output_high"),
    "event without its input": (_text(events=event(None, 2.0, -100.0)),
                                "event[1].disturbance"),
    "event naming another input": (_text(events=event("steam_flow", 2.0, 1.0)),
                                   "event[1].disturbance"),
    "noise event without its input": (
        _text(events='[[event]]\nkind = "disturbance-noise"\nat = 1.0\nsize = 1.0\n'
              'time_constant = 2.0\n'), "event[1].disturbance"),
    "recorded trace": (_text(events=RECORD_EVENT), "event[1].kind"),
    "a disturbance table": (_text(extra='[disturbance]\nmodel = "fopdt"\ngain = 1.0\n'
                                        'time_constant = 1.0\ndead_time = 0.0\n'), "disturbance"),
    "a valve": (_text(extra="[valve]\ncharacteristic = 'linear'\n"), "valve"),
    "compensator delay": (_text(feedforward='structure = "lead-lag-delay"'),
                          "feedforward.structure"),
    "compensator delay in a design": (
        _text(extra='[[design]]\nname = "d"\nlaw = "linear"\nstructure = "lead-lag-delay"\n'),
        "design.d.structure"),
    "balance law without dynamics": (_text(feedforward='law = "balance"\nstructure = "none"'),
                                     "feedforward.structure"),
    "trim on the linear law": (_text(feedforward='structure = "static"\ntrim = "multiply"'),
                               "feedforward.trim"),
    "flow stepped below zero": (_text(events=event("wild_flow", 2.0, -600.0)), "event[1].size"),
    "uncertain disturbance path": (
        _text(extra='[uncertainty]\n"disturbance.gain" = { relative = 0.2 }\n'),
        "uncertainty.disturbance.gain"),
    "uncertain parameter the plant lacks": (
        _text(extra='[uncertainty]\n"process.gain" = { relative = 0.2 }\n'),
        "uncertainty.process.gain"),
    "unbounded operating point": (
        _text(extra='[uncertainty]\n"process.wild_flow" = { normal = [500.0, 20.0] }\n'),
        "uncertainty.process.wild_flow"),
    "spread beyond physics": (
        _text(extra='[uncertainty]\n"process.wild_composition" = { uniform = [0.3, 1.1] }\n'),
        "uncertainty.process.wild_composition"),
    "sampled plant without a steady state": (
        _text(extra='[uncertainty]\n"process.wild_composition" = { uniform = [0.3, 0.55] }\n'),
        "uncertainty.process.outlet_composition"),
    "sampled plant beyond the output range": (
        _text().replace("output_high = 2000.0", "output_high = 250.0")
        + '[uncertainty]\n"process.wild_flow" = { uniform = [400.0, 700.0] }\n',
        "feedback.output_high"),
    "signal unit the plant does not give": (
        _text(extra='[signals.output]\nname = "x"\nunit = "t/h"\n'), "signals.output.unit"),
    "heater below its inlet": (
        _text(HEATER).replace("outlet_temperature = 60.0", "outlet_temperature = 10.0"),
        "process.outlet_temperature"),
}


@pytest.mark.parametrize("name", list(PROBLEMS))
def test_each_problem_names_its_key(name: str) -> None:
    text, key = PROBLEMS[name]
    message = _problems(text)
    assert f": {key}:" in message or f": {key}." in message, message


def test_a_bad_plant_is_not_also_missing_its_disturbance_table() -> None:
    message = _problems(_text().replace("volume = 2.0\n", ""))
    assert "[disturbance]" not in message


def test_balance_keys_in_a_transfer_function_case_are_refused() -> None:
    law = MINIMAL + '\n[feedforward]\nstructure = "static"\nlaw = "balance"\n'
    assert ": feedforward.law:" in _problems(law)
    named = MINIMAL.replace('size = 1.0', 'size = 1.0\ndisturbance = "wild_flow"')
    assert ": event[1].disturbance:" in _problems(named)


def test_the_heater_reads_with_its_own_names_and_units() -> None:
    case = balance_case(HEATER, measured='["process_flow", "inlet_temperature"]',
                        events=event("inlet_temperature", 2.0, -5.0))
    assert case.balance.measured == ("process_flow", "inlet_temperature")
    assert case.signals.controlled.unit == "degC"
    assert case.feedback.output_bias == pytest.approx(300.0 * 4.18 * 45.0 / 2100.0, rel=1e-12)
