"""Writing cases: exact round trip, comments kept, atomic replacement."""

from __future__ import annotations

import dataclasses
import os

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from robustff.case import (
    Case,
    Correlation,
    Distribution,
    Event,
    FeedbackSpec,
    FeedforwardSpec,
    Signal,
    Signals,
    SimulationSpec,
    StudySpec,
    UncertainParameter,
    case_to_toml,
    load_case,
    parse_case,
    save_case,
)
from robustff.demo import DEMO_CASES, demo_case_path
from robustff.errors import CaseError
from robustff.plant.models import MODEL_PARAMETERS, SensorModel, TransferModel

# --- strategies for valid cases ------------------------------------------------------------------

_pos = st.floats(1e-3, 1e3, allow_nan=False)
_nonneg = st.one_of(st.just(0.0), _pos)
_finite = st.floats(-1e6, 1e6, allow_nan=False)


@st.composite
def models(draw, nonzero_gain: bool = True):
    kind = draw(st.sampled_from(["fopdt", "sopdt", "ipdt"]))
    gain = draw(_pos) * draw(st.sampled_from([-1.0, 1.0]))
    values = {"gain": gain}
    for name in MODEL_PARAMETERS[kind][1:]:
        values[name] = draw(_nonneg)
    return TransferModel(kind, **values)


@st.composite
def feedback(draw):
    form = draw(st.sampled_from(["pi", "pid"]))
    tuning = draw(st.sampled_from(["simc", "imc", "manual"]))
    low = draw(_finite)
    high = low + draw(_pos)
    bias = draw(st.floats(low, high))
    structure = draw(st.sampled_from(["ideal", "series", "parallel"]))
    pid = form == "pid"
    fraction = st.floats(0.0, 1.0)
    form_keys = {
        "structure": structure,
        "derivative_filter": draw(st.none() | fraction) if pid else None,
        "setpoint_weight": draw(fraction),
        "derivative_setpoint_weight": draw(fraction) if pid else 0.0,
    }
    if tuning == "manual":
        sign = draw(st.sampled_from([-1.0, 1.0]))
        band = draw(st.booleans())
        kc, pb = (None, draw(_pos)) if band else (draw(_pos) * sign, None)
        if structure == "parallel":
            gains = {"ki": draw(_pos) * sign, "kd": draw(_nonneg) * sign if pid else None}
            return FeedbackSpec(form, tuning, None, kc, None, None, low, high, bias,
                                proportional_band=pb, **gains, **form_keys)
        repeats = draw(st.booleans())
        ti, reps = (None, draw(_pos)) if repeats else (draw(_pos), None)
        td = draw(_nonneg) if pid else None
        return FeedbackSpec(form, tuning, None, kc, ti, td, low, high, bias,
                            proportional_band=pb, repeats=reps, **form_keys)
    return FeedbackSpec(form, tuning, draw(st.none() | _pos), None, None, None, low, high, bias,
                        **form_keys)


@st.composite
def signals(draw, spans: bool):
    """Names, units and (always when ``spans``) the CV and output ranges."""
    def span():
        low = draw(_finite)
        return (low, low + draw(_pos))

    def text(size: int):
        return draw(st.text(min_size=1, max_size=size).filter(str.strip))

    return Signals(
        Signal(text(12), draw(st.text(max_size=6)),
               span() if spans or draw(st.booleans()) else None,
               draw(_pos) if draw(st.booleans()) else None),  # the allowed deviation, band
        Signal(text(12), draw(st.text(max_size=6)),
               span() if spans or draw(st.booleans()) else None),
        Signal(text(12), draw(st.text(max_size=6))),
    )


@st.composite
def feedforward(draw):
    structure = draw(st.sampled_from(["none", "static", "lead-lag", "lead-lag-delay"]))
    dynamic = structure in ("lead-lag", "lead-lag-delay")
    optional = st.none() | _nonneg
    return FeedforwardSpec(
        structure,
        draw(st.floats(0.0, 5.0)),
        draw(optional) if dynamic else None,
        draw(optional) if dynamic else None,
        draw(optional) if structure == "lead-lag-delay" else None,
    )


@st.composite
def events(draw, duration: float):
    result = []
    for _ in range(draw(st.integers(1, 4))):
        kind = draw(st.sampled_from(["disturbance-step", "disturbance-ramp", "disturbance-noise",
                                     "setpoint-step"]))
        at = draw(st.floats(0.0, duration, exclude_max=True))
        size = draw(_pos) if kind == "disturbance-noise" else draw(_finite)
        ramp = draw(_pos) if kind == "disturbance-ramp" else 0.0
        noise = draw(_pos) if kind == "disturbance-noise" else 0.0
        result.append(Event(kind, at, size, ramp, noise))
    return tuple(result)


@st.composite
def distribution_for(draw, key: str, nominal: float):
    """A distribution that the loader accepts for this parameter."""
    if key.endswith(".gain"):
        if key.startswith("process") or draw(st.booleans()):
            return Distribution("relative", (draw(st.floats(0.01, 0.9)),))
        low = draw(_finite)
        return Distribution("uniform", (low, low + draw(_pos)))
    kind = draw(st.sampled_from(["uniform", "normal", "triangular", "lognormal", "relative"]))
    if kind == "relative" and nominal > 0.0:
        return Distribution("relative", (draw(st.floats(0.01, 0.99)),))
    if kind == "normal":
        mean, std = draw(_pos), draw(_pos)
        return Distribution("normal", (mean, std), (draw(st.floats(0.0, mean)), mean + draw(_pos)))
    if kind == "lognormal":
        clip = draw(st.none() | st.just((0.0, 1e9)))
        return Distribution("lognormal", (draw(_pos), 1.0 + draw(_pos)), clip)
    low = draw(_nonneg)
    high = low + draw(_pos)
    if kind == "triangular":
        return Distribution("triangular", (low, draw(st.floats(low, high)), high))
    return Distribution("uniform", (low, high))


@st.composite
def cases(draw):
    process, disturbance = draw(models()), draw(models())
    sensor = SensorModel(draw(_nonneg), draw(_nonneg))
    step = draw(st.floats(0.01, 10.0))
    duration = step * draw(st.floats(1.5, 10_000.0))
    control = draw(feedback())
    base = Case(
        title=draw(st.text(min_size=1, max_size=30).filter(str.strip)),
        time_unit=draw(st.sampled_from(["s", "min", "h"])),
        process=process, disturbance=disturbance,
        feedback=control, feedforward=draw(feedforward()),
        simulation=SimulationSpec(duration, step),
        events=draw(events(duration)), sensor=sensor,
        signals=draw(signals(control.proportional_band is not None)),
        study=StudySpec(draw(st.integers(10, 10_000_000)), draw(st.integers(0, 2**63 - 1)),
                        draw(st.sampled_from(["random", "lhs", "sobol"]))),
    )
    candidates = [f"process.{n}" for n in MODEL_PARAMETERS[process.kind]]
    candidates += [f"disturbance.{n}" for n in MODEL_PARAMETERS[disturbance.kind]]
    candidates += ["sensor.time_constant", "sensor.noise_std"]
    keys = draw(st.lists(st.sampled_from(candidates), unique=True, max_size=6))
    uncertainty = tuple(
        UncertainParameter(k, draw(distribution_for(k, base.nominal_value(k)))) for k in keys
    )
    # A chain of weak correlations is always consistent (diagonally dominant matrix).
    correlations = tuple(
        Correlation(keys[i], keys[i + 1], draw(st.floats(-0.3, 0.3)))
        for i in range(len(keys) - 1) if draw(st.booleans())
    )
    return dataclasses.replace(base, uncertainty=uncertainty, correlations=correlations)


@settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(cases())
def test_round_trip_is_exact(case):
    text = case_to_toml(case)
    assert parse_case(text) == case


@pytest.mark.parametrize("name", DEMO_CASES)
def test_demo_round_trip_keeps_text_when_nothing_changed(name):
    original = demo_case_path(name).read_text(encoding="utf-8")
    case = load_case(demo_case_path(name))
    assert case_to_toml(case, original) == original
    # a recorded trace is read relative to the case file's folder
    assert parse_case(case_to_toml(case), base_dir=demo_case_path(name).parent) == case


def test_changed_values_are_written_and_comments_kept(tmp_path):
    source = demo_case_path("wash-water-heater")
    original = source.read_text(encoding="utf-8")
    case = load_case(source)
    changed = dataclasses.replace(
        case,
        process=case.process.with_parameter("dead_time", 9.5),
        feedforward=dataclasses.replace(case.feedforward, gain_factor=0.8, delay=2.0),
        events=case.events[:1],
        uncertainty=case.uncertainty[:-1],
    )
    target = tmp_path / "heater.toml"
    warnings = save_case(changed, target, original_text=original)
    assert warnings == []
    text = target.read_text(encoding="utf-8")
    assert "# Wash-water heater (fictional plant)" in text
    assert "gain = 0.6             # degC per % valve" in text
    assert "dead_time = 9.5" in text and "gain_factor = 0.8" in text
    assert "sensor.time_constant" not in text
    assert load_case(target) == changed


def test_nested_uncertainty_spelling_is_updated_in_place():
    original = demo_case_path("syrup-dilution").read_text(encoding="utf-8").replace(
        '"process.time_constant" = { lognormal = [20.0, 1.25] }',
        "[uncertainty.process]\ntime_constant = { lognormal = [20.0, 1.25] }  # nested\n",
    )
    # move the nested table to the end so the quoted keys stay in [uncertainty]
    head, nested = original.split("[uncertainty.process]\n")
    nested_line, rest = nested.split("\n", 1)
    original = head + rest.replace("[[uncertainty.correlation]]", "[uncertainty.process]\n"
                                   + nested_line + "\n\n[[uncertainty.correlation]]")
    case = parse_case(original)
    parameters = list(case.uncertainty)
    index = [p.key for p in parameters].index("process.time_constant")
    parameters[index] = UncertainParameter("process.time_constant",
                                           Distribution("lognormal", (22.0, 1.3)))
    changed = dataclasses.replace(case, uncertainty=tuple(parameters))
    text = case_to_toml(changed, original)
    assert "time_constant = { lognormal = [22.0, 1.3] }  # nested" in text
    assert parse_case(text) == changed


def test_defaults_left_out_of_the_original_stay_out():
    original = (
        'title = "t"\ntime_unit = "s"\n[process]\nmodel = "fopdt"\ngain = 1.0\n'
        'time_constant = 5.0\ndead_time = 1.0\n[disturbance]\nmodel = "fopdt"\ngain = 1.0\n'
        "time_constant = 5.0\ndead_time = 1.0\n[simulation]\nduration = 50.0\nstep = 0.1\n"
        '[[event]]\nkind = "setpoint-step"\nat = 1.0\nsize = 1.0\n'
    )
    case = parse_case(original)
    changed = dataclasses.replace(case, study=StudySpec(500, 3, "sobol"))
    text = case_to_toml(changed, original)
    assert "[feedback]" not in text and "[sensor]" not in text
    assert "samples = 500" in text
    assert parse_case(text) == changed


def test_unreadable_original_falls_back_with_a_warning(tmp_path):
    case = load_case(demo_case_path("surge-tank-level"))
    warnings = save_case(case, tmp_path / "tank.toml", original_text="title = = broken")
    assert warnings and "comments will be dropped" in warnings[0]
    assert load_case(tmp_path / "tank.toml") == case


def test_invalid_case_is_not_written(tmp_path):
    case = load_case(demo_case_path("surge-tank-level"))
    bad = dataclasses.replace(case, simulation=SimulationSpec(10.0, 20.0))
    target = tmp_path / "bad.toml"
    target.write_text("keep me", encoding="utf-8")
    with pytest.raises(CaseError, match="simulation.duration"):
        save_case(bad, target)
    assert target.read_text(encoding="utf-8") == "keep me"
    ramp_on_step = dataclasses.replace(case, events=(Event("disturbance-step", 1.0, 1.0, 5.0),))
    with pytest.raises(CaseError, match="cannot express"):
        save_case(ramp_on_step, target)
    assert os.listdir(tmp_path) == ["bad.toml"]  # no temporary file left behind


def test_save_replaces_the_file_atomically(tmp_path):
    case = load_case(demo_case_path("syrup-dilution"))
    target = tmp_path / "syrup.toml"
    target.write_text("old", encoding="utf-8")
    assert save_case(case, target) == []
    assert load_case(target) == case
    assert os.listdir(tmp_path) == ["syrup.toml"]
