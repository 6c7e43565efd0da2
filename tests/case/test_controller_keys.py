"""``[feedback]`` keys of the controller as the control system writes it, and signal spans: read,
refused with the key and value named, saved and reloaded."""

from __future__ import annotations

import tomllib

import pytest
from case_texts import MINIMAL

from robustff.case import FeedbackSpec, Signal, case_to_toml, parse_case
from robustff.errors import CaseError

SPANS = '\n[signals.controlled]\nunit = "degC"\nrange = [20.0, 220.0]\n'


def feedback(text: str, extra: str = "") -> str:
    return MINIMAL + "\n[feedback]\n" + text + extra


def problems_of(text: str) -> list[str]:
    with pytest.raises(CaseError) as info:
        parse_case(text, source="bad.toml")
    return info.value.problems


def test_every_new_key_is_read():
    case = parse_case(feedback(
        'form = "pid"\ntuning = "manual"\nstructure = "series"\nproportional_band = 80.0\n'
        "repeats = 0.25\ntd = 1.5\nderivative_filter = 0.125\nsetpoint_weight = 0.6\n"
        "derivative_setpoint_weight = 0.5\n", SPANS + '[signals.output]\nrange = [0, 40]\n'))
    fb = case.feedback
    assert (fb.structure, fb.proportional_band, fb.repeats, fb.td) == ("series", 80.0, 0.25, 1.5)
    assert (fb.derivative_filter, fb.setpoint_weight, fb.derivative_setpoint_weight) == (
        0.125, 0.6, 0.5)
    assert fb.kc is None and fb.ti is None
    assert case.signals.controlled == Signal("controlled variable", "degC", (20.0, 220.0))
    assert case.signals.output.range == (0.0, 40.0) and case.signals.controlled.span == 200.0
    parallel = parse_case(feedback('form = "pid"\ntuning = "manual"\nstructure = "parallel"\n'
                                   "kc = 2.0\nki = 0.25\nkd = 3.0\n"))
    assert (parallel.feedback.ki, parallel.feedback.kd) == (0.25, 3.0)


def test_defaults_are_todays_controller():
    fb = parse_case(MINIMAL).feedback
    assert (fb.structure, fb.setpoint_weight, fb.derivative_setpoint_weight) == ("ideal", 1.0, 0.0)
    assert fb.derivative_filter is None and fb == FeedbackSpec()


MANUAL = 'tuning = "manual"\n'
REFUSED = {
    "kc and proportional_band": (
        feedback(MANUAL + "kc = 2.0\nproportional_band = 50.0\nti = 5.0\n", SPANS),
        "feedback.proportional_band: give the gain once: kc or proportional_band, not both "
        "(kc = 2.0) (got 50.0)"),
    "ti and repeats": (
        feedback(MANUAL + "kc = 2.0\nti = 5.0\nrepeats = 0.2\n"),
        "feedback.repeats: give the integral action once: ti or repeats, not both (ti = 5.0) "
        "(got 0.2)"),
    "no gain": (feedback(MANUAL + "ti = 5.0\n"), "feedback.kc: missing key"),
    "no integral": (feedback(MANUAL + "kc = 2.0\n"), "feedback.ti: missing key"),
    "band without CV span": (
        feedback(MANUAL + "proportional_band = 50.0\nti = 5.0\n"),
        "feedback.proportional_band: is relative to the signals' spans: add "
        "[signals.controlled] range (got 50.0)"),
    "band without output span, output not in %": (
        feedback(MANUAL + "proportional_band = 50.0\nti = 5.0\n",
                 SPANS + '[signals.output]\nunit = "kg/h"\n'),
        "feedback.proportional_band: is relative to the signals' spans: add "
        "[signals.output] range (the output is not in %) (got 50.0)"),
    "band of zero": (feedback(MANUAL + "proportional_band = 0.0\nti = 5.0\n", SPANS),
                     "feedback.proportional_band: must be > 0 (got 0.0)"),
    "negative repeats": (feedback(MANUAL + "kc = 2.0\nrepeats = -1.0\n"),
                         "feedback.repeats: must be > 0 (got -1.0)"),
    "band with a rule": (feedback("proportional_band = 50.0\n", SPANS),
                         "feedback.proportional_band: used only with tuning = 'manual'"),
    "ti in the parallel form": (
        feedback(MANUAL + 'structure = "parallel"\nkc = 2.0\nti = 5.0\n'),
        "feedback.ti: not used with structure = 'parallel'"),
    "parallel without ki": (feedback(MANUAL + 'structure = "parallel"\nkc = 2.0\n'),
                            "feedback.ki: missing key"),
    "parallel PID without kd": (
        feedback(MANUAL + 'form = "pid"\nstructure = "parallel"\nkc = 2.0\nki = 0.5\n'),
        "feedback.kd: missing key"),
    "ki in the ideal form": (feedback(MANUAL + "kc = 2.0\nti = 5.0\nki = 0.5\n"),
                             "feedback.ki: gains of the parallel form (structure is 'ideal')"),
    "unknown structure": (feedback('structure = "interacting"\n'),
                          "feedback.structure: must be one of 'ideal', 'series', 'parallel' "
                          '(got "interacting")'),
    "setpoint weight above 1": (feedback("setpoint_weight = 1.5\n"),
                                "feedback.setpoint_weight: must be between 0 and 1 (got 1.5)"),
    "negative setpoint weight": (feedback("setpoint_weight = -0.1\n"),
                                 "feedback.setpoint_weight: must be >= 0 (got -0.1)"),
    "derivative weight on a PI": (
        feedback("derivative_setpoint_weight = 0.5\n"),
        "feedback.derivative_setpoint_weight: a PI controller has no derivative action"),
    "derivative filter on a PI": (feedback("derivative_filter = 0.1\n"),
                                  "feedback.derivative_filter: a PI controller has no derivative"),
    "derivative filter above 1": (feedback('form = "pid"\nderivative_filter = 2.0\n'),
                                  "feedback.derivative_filter: must be between 0 and 1"),
    "range low above high": (MINIMAL + "\n[signals.controlled]\nrange = [100.0, 0.0]\n",
                             "signals.controlled.range: must be [low, high] with low < high"),
    "range of one number": (MINIMAL + "\n[signals.output]\nrange = [100.0]\n",
                            "signals.output.range: must be a list [low, high] of 2 numbers"),
    "range on the disturbance": (MINIMAL + "\n[signals.disturbance]\nrange = [0.0, 10.0]\n",
                                 "signals.disturbance.range: unknown key"),
}


@pytest.mark.parametrize("label", sorted(REFUSED))
def test_bad_controller_settings_are_refused_naming_key_and_value(label):
    text, expected = REFUSED[label]
    problems = problems_of(text)
    assert any(line.startswith("bad.toml: " + expected) for line in problems), problems


def test_save_and_reload_keeps_every_key():
    text = feedback('form = "pid"\ntuning = "manual"\nstructure = "series"\n'
                    "proportional_band = 80.0\nrepeats = 0.25\ntd = 1.5\n"
                    "derivative_filter = 0.125\nsetpoint_weight = 0.6\n"
                    "derivative_setpoint_weight = 0.5\n", SPANS)
    case = parse_case(text)
    assert parse_case(case_to_toml(case)) == case  # fresh document
    assert parse_case(case_to_toml(case, text)) == case  # merged into the original
    fresh = tomllib.loads(case_to_toml(parse_case(MINIMAL)))
    # Keys at their defaults are not written: the file stays the one earlier versions read.
    for key in ("structure", "setpoint_weight", "derivative_setpoint_weight"):
        assert key not in fresh["feedback"]
    assert all("range" not in signal for signal in fresh["signals"].values())
