"""Case file loading and validation: defaults, both uncertainty spellings, every problem named."""

from __future__ import annotations

import math
import os
import tomllib

import pytest
import tomlkit
from case_texts import MALFORMED, MINIMAL
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from robustff.case import (
    Correlation,
    Distribution,
    FeedbackSpec,
    FeedforwardSpec,
    Signals,
    StudySpec,
    UncertainParameter,
    load_case,
    parse_case,
)
from robustff.demo import DEMO_CASES, demo_case_path
from robustff.errors import CaseError
from robustff.plant.models import SensorModel, TransferModel


def problems_of(text: str) -> list[str]:
    with pytest.raises(CaseError) as info:
        parse_case(text, source="bad.toml")
    return info.value.problems


def test_minimal_case_gets_documented_defaults():
    case = parse_case(MINIMAL)
    assert case.process == TransferModel("fopdt", 2.0, 10.0, 0.0, 2.0)
    assert case.feedback == FeedbackSpec()
    assert case.feedback.closed_loop_time is None  # = process dead time, decided by tuning
    assert case.feedforward == FeedforwardSpec()
    assert case.sensor == SensorModel(0.0, 0.0)
    assert case.signals == Signals()
    assert case.study == StudySpec()
    assert case.uncertainty == () and case.correlations == ()
    assert case.simulation.n_steps == 200
    assert isinstance(case.process.gain, float)


def test_integers_are_accepted_as_numbers_and_stored_as_floats():
    case = parse_case(MINIMAL.replace("gain = 2.0", "gain = 2"))
    assert case.process.gain == 2.0 and isinstance(case.process.gain, float)


@pytest.mark.parametrize("name", DEMO_CASES)
def test_demo_cases_load(name):
    case = load_case(demo_case_path(name))
    assert case.source_path == demo_case_path(name)
    assert case.name == name
    assert 4 <= len(case.uncertainty) <= 8
    # a few thousand scans keep every demo quick; the record-driven one covers two hours at 1 s
    assert 1000 <= case.simulation.n_steps <= 8000
    assert case.study.samples == 2000 and case.study.sampling == "lhs"


def test_quoted_dotted_and_nested_uncertainty_spellings_are_equivalent():
    quoted = MINIMAL + """
[uncertainty]
"process.gain" = { relative = 0.2 }
"disturbance.dead_time" = { uniform = [2.0, 4.0] }
"""
    dotted = MINIMAL + """
[uncertainty]
process.gain = { relative = 0.2 }
disturbance.dead_time = { uniform = [2.0, 4.0] }
"""
    nested = MINIMAL + """
[uncertainty.process]
gain = { relative = 0.2 }

[uncertainty.disturbance.dead_time]
uniform = [2.0, 4.0]
"""
    expected = (
        UncertainParameter("process.gain", Distribution("relative", (0.2,))),
        UncertainParameter("disturbance.dead_time", Distribution("uniform", (2.0, 4.0))),
    )
    for text in (quoted, dotted, nested):
        assert parse_case(text).uncertainty == expected


def test_full_feature_case():
    text = MINIMAL.replace('model = "fopdt"\ngain = 2.0', 'model = "sopdt"\ngain = -2.0') \
        .replace("time_constant = 10.0", "time_constant = 10.0\ntime_constant_2 = 3.0") + """
[feedback]
form = "pid"
tuning = "manual"
kc = -1.5
ti = 12.0
td = 1.0
output_low = -10.0
output_high = 10.0
output_bias = 0.0

[feedforward]
structure = "lead-lag-delay"
gain_factor = 0.8
lead = 4.0
lag = 2.0
delay = 1.0

[sensor]
time_constant = 0.5
noise_std = 0.01

[signals.controlled]
name = "outlet temperature"
unit = "degC"

[[event]]
kind = "disturbance-noise"
at = 0.0
size = 0.2
time_constant = 3.0

[[event]]
kind = "disturbance-ramp"
at = 50.0
size = -1.0
duration = 20.0

[uncertainty]
"process.gain" = { normal = [-2.0, 0.2], clip = [-3.0, -1.0] }
"process.time_constant_2" = { triangular = [2.0, 3.0, 5.0] }
"sensor.noise_std" = { lognormal = [0.01, 2.0] }

[[uncertainty.correlation]]
first = "process.gain"
second = "sensor.noise_std"
rank_correlation = -0.4

[study]
samples = 5000
seed = 99
sampling = "sobol"
"""
    case = parse_case(text)
    assert case.feedback.kc == -1.5 and case.feedback.td == 1.0
    assert case.feedforward.delay == 1.0
    assert [e.kind for e in case.events] == ["disturbance-step", "disturbance-noise",
                                            "disturbance-ramp"]
    assert case.events[2].duration == 20.0 and case.events[1].time_constant == 3.0
    assert case.signals.controlled.label() == "outlet temperature [degC]"
    assert case.signals.output == Signals().output
    assert case.uncertainty[0].distribution.clip == (-3.0, -1.0)
    assert case.correlations == (Correlation("process.gain", "sensor.noise_std", -0.4),)
    assert case.study == StudySpec(5000, 99, "sobol")




@pytest.mark.parametrize("label", sorted(MALFORMED))
def test_each_malformed_case_names_file_and_key(label):
    text, key = MALFORMED[label]
    problems = problems_of(text)
    assert any(line.startswith("bad.toml: ") and key in line for line in problems), problems


def test_problem_line_names_the_bad_value():
    [line] = problems_of(MINIMAL.replace("time_constant = 10.0", "time_constant = -1.5"))
    assert line == "bad.toml: process.time_constant: must be >= 0 (got -1.5)"


def test_all_problems_are_collected_at_once():
    text = MINIMAL.replace("gain = 2.0", "gain = true").replace("step = 0.5", "step = -1") \
        .replace('time_unit = "s"', 'time_unit = "sec"') + "[study]\nsampling = 'grid'\n"
    problems = problems_of(text)
    for key in ("process.gain", "simulation.step", "time_unit", "study.sampling"):
        assert any(f": {key}:" in line for line in problems), (key, problems)


def test_unknown_key_suggests_the_close_name():
    text = MINIMAL.replace("dead_time = 2.0", "dead_tme = 2.0")
    assert any("did you mean 'dead_time'" in line for line in problems_of(text))


def test_load_case_reports_missing_file(tmp_path):
    with pytest.raises(CaseError, match="no such case file"):
        load_case(tmp_path / "absent.toml")


# --- property tests: nothing but CaseError escapes ----------------------------------------------


# More examples on demand: ROBUSTFF_FUZZ_EXAMPLES=5000 pytest tests/test_case_loader.py
_FUZZ_EXAMPLES = int(os.environ.get("ROBUSTFF_FUZZ_EXAMPLES", "300"))


def _parse_only_case_error(text: str) -> None:
    try:
        parse_case(text, source="fuzz.toml")
    except CaseError as exc:
        assert exc.problems and all(line.startswith("fuzz.toml: ") for line in exc.problems)


@settings(max_examples=_FUZZ_EXAMPLES, deadline=None)
@given(st.text(alphabet=st.sampled_from(list('[]{}="., \n#abc_0123456789-+eElgtin:\'\\'))
               | st.characters(), max_size=200))
def test_random_text_only_raises_case_error(text):
    _parse_only_case_error(text)


_VALID = tomllib.loads(
    MINIMAL + """
[feedback]
form = "pid"
[feedforward]
structure = "lead-lag"
[sensor]
time_constant = 1.0
[signals.output]
name = "valve"
[uncertainty]
"process.gain" = { relative = 0.2 }
"process.dead_time" = { uniform = [1.0, 3.0] }
"disturbance.time_constant" = { normal = [5.0, 1.0], clip = [1.0, 9.0] }
[[uncertainty.correlation]]
first = "process.gain"
second = "process.dead_time"
rank_correlation = 0.5
[study]
samples = 100
"""
)

_ODD_VALUES = st.one_of(
    st.none(), st.booleans(), st.integers(-(2**70), 2**70), st.text(max_size=8),
    st.floats(allow_nan=True, allow_infinity=True), st.lists(st.floats(-5, 5), max_size=4),
    st.dictionaries(st.sampled_from(["a", "uniform", "clip", "name", "relative"]),
                    st.one_of(st.floats(-3, 3), st.lists(st.floats(-3, 3), max_size=3)),
                    max_size=2),
)


def _paths(node, prefix=()):
    yield prefix
    if isinstance(node, dict):
        for key, value in node.items():
            yield from _paths(value, (*prefix, key))
    elif isinstance(node, list):
        for index, value in enumerate(node):
            yield from _paths(value, (*prefix, index))


def _mutate(document, path, action, value):
    parent = document
    for part in path[:-1]:
        parent = parent[part]
    last = path[-1]
    if action == "delete":
        del parent[last]
    elif action == "rename" and isinstance(parent, dict):
        parent[f"{last}x"] = parent.pop(last)
    else:
        parent[last] = value


@settings(max_examples=_FUZZ_EXAMPLES, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.data())
def test_mutated_valid_case_only_raises_case_error(data):
    import copy

    document = copy.deepcopy(_VALID)
    for _ in range(data.draw(st.integers(1, 3))):
        paths = [p for p in _paths(document) if p]
        if not paths:
            break
        path = data.draw(st.sampled_from(paths))
        action = data.draw(st.sampled_from(["delete", "rename", "replace"]))
        value = data.draw(_ODD_VALUES)
        if value is None:
            action = "delete"
        _mutate(document, path, action, value)
    try:
        text = tomlkit.dumps(document)
    except (ValueError, TypeError):
        return  # tomlkit cannot write this value (e.g. a huge integer): nothing to load
    _parse_only_case_error(text)


def test_non_finite_numbers_are_refused():
    for bad in ("nan", "inf", "-inf"):
        problems = problems_of(MINIMAL.replace("gain = 2.0", f"gain = {bad}"))
        assert any("process.gain: must be a finite number" in line for line in problems)
    assert not math.isnan(parse_case(MINIMAL).process.gain)


def test_examples_in_the_format_document_are_valid():
    # Every TOML example of docs/case-format.md, applied in order over MINIMAL (tables replace
    # tables, events are added, uncertainty entries accumulate), makes a valid case.
    import pathlib
    import re

    doc = pathlib.Path(__file__).resolve().parents[2] / "docs" / "case-format.md"
    blocks = re.findall(r"```toml\n(.*?)```", doc.read_text(encoding="utf-8"), flags=re.S)
    assert len(blocks) >= 14
    document = tomllib.loads(MINIMAL)
    for block in blocks:
        for key, value in tomllib.loads(block).items():
            if key == "event":
                document["event"] += value
            elif key == "uncertainty":
                document.setdefault("uncertainty", {}).update(value)
            else:
                document[key] = value
    # a record file is named relative to the case file: the examples are cases in cases/
    case = parse_case(tomlkit.dumps(document), base_dir=doc.parents[1] / "cases")
    assert len(case.events) == 6 and len(case.uncertainty) == 4
    assert case.events[-1].record is not None and case.signals.controlled.band == 0.2
    assert case.correlations[0].second == "disturbance.time_constant"
    for line in re.findall(r"robustff: error: heater.toml: (.*)", doc.read_text(encoding="utf-8")):
        key = line.split(":")[0]
        assert key in {"process.time_constant", "uncertainty.process.dead_time.normal",
                       "event[2].at"}
