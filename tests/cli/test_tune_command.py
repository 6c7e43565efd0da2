"""``robustff tune``: output, JSON shape, the tuned case file, errors."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from robustff import CAUTION
from robustff.case import load_case
from robustff.cli import main

CASES = Path(__file__).resolve().parents[2] / "cases"

SMALL_CASE = """\
# A small fictional loop for the tune command tests
title = "Tune test loop"
time_unit = "min"

[process]            # valve -> temperature
model = "fopdt"
gain = 2.0
time_constant = 6.0
dead_time = 1.5

[disturbance]        # load -> temperature
model = "fopdt"
gain = 1.0
time_constant = 4.0
dead_time = 0.5

[feedback]
form = "pi"
tuning = "simc"

[feedforward]
structure = "lead-lag"

[simulation]
duration = 30.0
step = 0.1

[[event]]
kind = "disturbance-step"
at = 1.0
size = 1.0

[uncertainty]
"disturbance.gain" = { relative = 0.3 }   # the load varies
"process.dead_time" = { uniform = [1.0, 2.5] }

[study]
samples = 150
seed = 4
sampling = "random"

[recommendation]     # lenient: 60 harm-free plants bound the harm at 6 %
max_harm = 0.07
"""


@pytest.fixture()
def small_case(tmp_path: Path) -> Path:
    path = tmp_path / "small-loop.toml"
    path.write_text(SMALL_CASE, encoding="utf-8")
    return path


def test_json_output_and_tuned_case(small_case: Path, tmp_path: Path, capsys) -> None:
    out = tmp_path / "out"
    (out).mkdir()
    (out / "keep.txt").write_text("other file")
    assert main(["tune", str(small_case), "--json", "--out", str(out), "--objective", "cvar"]) == 0
    payload = json.loads(capsys.readouterr().out)
    assert payload["objective"] == "cvar"
    for key in ("gain_factor", "lead", "lag", "delay", "objective_value", "objective_fresh"):
        assert key in payload["robust"]
    assert payload["rule"] is not None  # disturbance dead time 0.5 < process dead time 1.5
    assert payload["nominal"]["gain_factor"] == 1.0
    assert payload["robust"]["objective_value"] <= payload["nominal"]["objective_value"]
    assert payload["sensitivity"][0]["name"] in {"disturbance.gain", "process.dead_time"}
    written = out / "small-loop-robust.toml"
    assert (out / "keep.txt").read_text() == "other file"
    text = written.read_text()
    assert "# A small fictional loop" in text and "# the load varies" in text  # comments kept
    tuned = load_case(written)
    assert tuned.feedforward.gain_factor == payload["robust"]["gain_factor"]
    assert tuned.feedforward.lag == payload["robust"]["lag"]
    assert tuned.feedforward.delay is None  # not searched for a lead-lag structure


def test_human_output_ends_with_caution(small_case: Path, tmp_path: Path, capsys) -> None:
    assert main(["tune", str(small_case), "--out", str(tmp_path), "--samples", "60",
                 "--sobol", "64"]) == 0
    text = capsys.readouterr().out
    assert "Sobol indices" in text
    assert "robust optimum" in text and "ISE lag rule" in text and "nominal ideal" in text
    assert "What drives the risk" in text
    assert text.rstrip().endswith(CAUTION)


def test_errors_exit_2_without_traceback(tmp_path: Path, capsys) -> None:
    assert main(["tune", str(tmp_path / "missing.toml")]) == 2
    assert "Traceback" not in capsys.readouterr().err
    none = tmp_path / "none.toml"
    none.write_text(SMALL_CASE.replace('structure = "lead-lag"', 'structure = "none"'))
    assert main(["tune", str(none), "--out", str(tmp_path)]) == 2
    assert "no feedforward to tune" in capsys.readouterr().err
    assert main(["tune", str(none), "--objective", "mean"]) == 2
    assert "invalid choice" in capsys.readouterr().err


def test_demo_cases_get_the_documented_search_box_around_their_nominal_design() -> None:
    # The demo cases load and get the search box of the documented defaults (the full search is
    # in benchmarks/): gain_factor in [0, 1.5]; lead in [0, 3 tau_max], lag in [h, 3 tau_max]
    # with tau_max the largest nominal lag of either path; delay in [0, 2 theta_d]. Worked out
    # by hand from the case files (common practice, no source, for the defaults themselves):
    # * surge-tank-level, static, integrating paths: gain_factor only;
    # * syrup-dilution, lead-lag-delay: tau_max = max(20, 20, 4) = 20 -> 60, h = 0.25,
    #   theta_d = 18 -> delay up to 36;
    # * wash-water-heater, lead-lag-delay: tau_max = max(45, 30) = 45 -> 135, h = 0.5,
    #   theta_d = 3 -> delay up to 6;
    # * steam-heater-sticky-valve, lead-lag: tau_max = max(40, 30) = 40 -> 120, h = 0.5;
    # * pasteuriser-tempering-tank, lead-lag-delay on its headline disturbance (feed_flow):
    #   tau_max = max(90, 60) = 90 -> 270, h = 1, theta_d = 6 -> delay up to 12.
    from robustff.design.tuning import design_loop
    from robustff.tune.search import search_space

    expected = {
        "surge-tank-level": (("gain_factor",), [0.0], [1.5]),
        "syrup-dilution": (("gain_factor", "lead", "lag", "delay"),
                           [0.0, 0.0, 0.25, 0.0], [1.5, 60.0, 60.0, 36.0]),
        "wash-water-heater": (("gain_factor", "lead", "lag", "delay"),
                              [0.0, 0.0, 0.5, 0.0], [1.5, 135.0, 135.0, 6.0]),
        "steam-heater-sticky-valve": (("gain_factor", "lead", "lag"),
                                      [0.0, 0.0, 0.5], [1.5, 120.0, 120.0]),
        "pasteuriser-tempering-tank": (("gain_factor", "lead", "lag", "delay"),
                                       [0.0, 0.0, 1.0, 0.0], [1.5, 270.0, 270.0, 12.0]),
    }
    # Left out: the two demo plants built from balances (the robust search refuses them).
    left_out = {"brine-makeup-tank", "rinse-water-heater"}
    assert sorted(p.stem for p in CASES.glob("*.toml")) == sorted([*expected, *left_out])
    for name, (names, low, high) in expected.items():
        case = load_case(CASES / f"{name}.toml")
        nominal = design_loop(case).feedforward
        space = search_space(case, nominal.structure)
        assert space.names == names, name
        assert list(space.low) == pytest.approx(low) and list(space.high) == pytest.approx(high)
        # the search starts from the nominal design: it must lie inside the box, not be clipped
        point = [getattr(nominal, n) for n in names]
        assert all(lo <= x <= hi for lo, x, hi in zip(space.low, point, space.high, strict=True))


def test_verdict_weighs_harm_in_the_printout_and_json(tmp_path: Path, capsys) -> None:
    # Closed-form case of tests/helpers/harm_case.py: the P90-optimal gain factor 1.5 harms the
    # plants with Kd < 0.75 (6.25 % of them), the nominal one (harm when Kd < 0.5) none.
    from harm_case import harm_case_text

    path = tmp_path / "blend.toml"
    path.write_text(harm_case_text(max_harm=0.03), encoding="utf-8")
    assert main(["tune", str(path), "--out", str(tmp_path / "a")]) == 0
    text = " ".join(capsys.readouterr().out.split())  # the verdict is wrapped to 100 columns
    assert "Recommended: keep the nominal design." in text
    assert "the robust optimum misses them (harm bound" in text and "> 3.0 %" in text
    assert "P50 IAE [CV*s]" in text and "P(harm) [%]" in text
    assert main(["tune", str(path), "--json", "--out", str(tmp_path / "b")]) == 0
    payload = json.loads(capsys.readouterr().out)
    verdict = payload["verdict"]
    assert payload["recommended"] == verdict["recommended"] == "nominal"
    assert verdict["criteria"] == {"max_harm": 0.03, "min_improvement": 0.2}
    robust = verdict["designs"]["robust"]
    assert not robust["passes"] and robust["harm_ci95"][1] > 0.03
    assert verdict["designs"]["nominal"]["passes"]
    assert verdict["reason"].startswith("Recommended: keep the nominal design")
    # the case written keeps the nominal gain factor, not the P90 optimum
    assert load_case(payload["case_file"]).feedforward.gain_factor == 1.0


def test_no_case_written_when_neither_design_meets_the_criteria(tmp_path: Path, capsys) -> None:
    from harm_case import harm_case_text

    path = tmp_path / "blend.toml"
    path.write_text(harm_case_text(max_harm=0.01), encoding="utf-8")  # 200 plants: bound 1.9 %
    out = tmp_path / "out"
    assert main(["tune", str(path), "--json", "--out", str(out)]) == 0
    payload = json.loads(capsys.readouterr().out)
    assert payload["recommended"] == "none" and payload["case_file"] is None
    assert payload["verdict"]["reason"].startswith("Not recommended: neither design meets")
    assert not out.exists()
    assert main(["tune", str(path), "--out", str(out)]) == 0
    text = " ".join(capsys.readouterr().out.split())
    assert "No tuned case written: neither design meets the criteria" in text
    assert text.endswith(CAUTION)
