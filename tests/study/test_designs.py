"""Several feedforward designs in one study, on the same plants (common random numbers).

The main oracle is closed-form. With the process and disturbance paths sharing their lag and
dead time, a static feedforward of gain factor ``g`` leaves the residual disturbance gain
``Kd - g Kd0`` (Kd0 the nominal disturbance gain the compensator was designed for); the loop
is linear (no output limit reached, no noise), so every sample's CV with feedforward is the
feedback-only CV scaled by ``(Kd - g Kd0) / Kd``. Feedforward therefore makes IAE worse exactly
when ``|Kd - g Kd0| > |Kd|``, which for ``Kd > 0`` and ``g > 0`` is ``Kd < g Kd0 / 2``; with Kd
uniform on [a, b] the harm probability is ``(g Kd0 / 2 - a) / (b - a)`` (clipped to [0, 1]).
Source: superposition for linear systems (e.g. Seborg, Edgar, Mellichamp and Doyle, "Process
Dynamics and Control", 4th ed., 2016, ch. 15 on feedforward: perfect compensation when
Gf = -Gd/Gp), the closed form derived here.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import jsonschema
import numpy as np
import pytest
from case_texts import MINIMAL
from harm_case import matched_case_text

from robustff.case import case_to_toml, parse_case
from robustff.cli import EXIT_OK, EXIT_USAGE, main
from robustff.design.alternatives import DESIGN_SETS, standard_designs, with_design_set
from robustff.errors import CaseError, DesignError
from robustff.study import run_study
from robustff.study.summary import summarize_study

ROOT = Path(__file__).resolve().parents[2]
KD0, KD_LOW, KD_HIGH = 2.0, 0.2, 3.8

MATCHED = matched_case_text(
    title="Matched paths, disturbance gain uncertain", kd0=KD0, kd_low=KD_LOW, kd_high=KD_HIGH,
    duration=200.0, event_at=10.0, study="samples = 3000\nseed = 7",
) + """
[[design]]
name = "half"
gain_factor = 0.5

[[design]]
name = "over"
gain_factor = 1.5
"""


@pytest.fixture(scope="module")
def matched():
    case = parse_case(MATCHED)
    result = run_study(case, jobs=1, margins=False)
    return case, result, summarize_study(result)


def test_each_design_harm_matches_the_closed_form(matched):
    _, result, summary = matched
    kd = result.parameters[:, result.names.index("disturbance.gain")]
    factors = {"case": 1.0, "half": 0.5, "over": 1.5}
    assert [d["name"] for d in summary["designs"]] == ["case", "half", "over"]
    for entry, arm in zip(summary["designs"], result.design_arms(), strict=True):
        g = factors[entry["name"]]
        assert entry["feedforward"]["gain_factor"] == g
        # Per plant: the harm flag is exactly Kd < g Kd0 / 2 ...
        iae_fb, iae_ff = result.metrics["iae"][:, 0], arm.metrics["iae"]
        assert np.array_equal(iae_ff > iae_fb, kd < g * KD0 / 2.0)
        # ... and the IAE ratio is |Kd - g Kd0| / Kd.
        np.testing.assert_allclose(iae_ff / iae_fb, np.abs(kd - g * KD0) / kd, rtol=1e-8)
        # The reported probability: the closed form lies in its 95 % Wilson interval.
        closed = min(max((g * KD0 / 2.0 - KD_LOW) / (KD_HIGH - KD_LOW), 0.0), 1.0)
        low, high = entry["ff_worse"]["iae"]["ci95"]
        assert low <= closed <= high, (entry["name"], closed, low, high)


def test_the_case_design_entry_repeats_the_top_level_keys(matched):
    _, _, summary = matched
    own = summary["designs"][0]
    assert own["ff_worse"] == summary["ff_worse"]
    assert own["ratio"] == summary["ratio"]
    assert own["improvement"] == summary["improvement"]
    assert own["metrics"] == summary["metrics"]
    assert own["feedforward"] == summary["design"]["feedforward"]


def test_designs_versus_case_are_paired_on_the_same_plants(matched):
    _, result, summary = matched
    kd = result.parameters[:, result.names.index("disturbance.gain")]
    iae_fb = result.metrics["iae"][:, 0]
    # IAE(design) = IAE(fb) |Kd - g Kd0| / Kd, so the paired difference has a closed form too.
    expected = iae_fb * (np.abs(kd - KD0) - np.abs(kd - 1.5 * KD0)) / kd
    over = summary["designs"][2]["versus_case"]["iae_improvement"]
    assert over["p50"] == pytest.approx(float(np.median(expected)), rel=1e-6)
    worse = summary["designs"][2]["versus_case"]["worse_than_case"]
    assert worse["count"] == int(np.sum(expected < 0))


def test_adding_designs_does_not_change_the_case_results():
    without = parse_case(MATCHED.split("[[design]]")[0])
    with_designs = parse_case(MATCHED)
    a = run_study(without, samples=200, jobs=1, margins=False)
    b = run_study(with_designs, samples=200, jobs=2, margins=False, chunk_size=64)
    for name in a.metrics:
        assert np.array_equal(a.metrics[name], b.metrics[name], equal_nan=True), name
    assert np.array_equal(a.unstable, b.unstable)


def test_a_design_equal_to_the_case_gives_identical_results_on_a_demo_case():
    # The alternative arm skips the feedback arm and the stability probe; its results must
    # still be exactly those of a full run (noise, sensor lag, limits, two events).
    text = (ROOT / "cases" / "wash-water-heater.toml").read_text() + '\n[[design]]\nname = "twin"\n'
    result = run_study(parse_case(text), samples=150, jobs=1, margins=False)
    own, twin = result.design_arms()
    for name in own.metrics:
        assert np.array_equal(own.metrics[name], twin.metrics[name], equal_nan=True), name
    assert np.array_equal(own.unstable, twin.unstable)


@pytest.mark.parametrize(("extra", "key"), [
    ('[[design]]\nname = "case"\n', "design[1].name"),
    ('[[design]]\nname = "a b"\n', "design[1].name"),
    ('[[design]]\nstructure = "static"\n', "design[1].name"),
    ('[[design]]\nname = "x"\n\n[[design]]\nname = "x"\n', "design[2].name"),
    ('[[design]]\nname = "x"\nstructure = "static"\nlead = 3.0\n', "design.x.lead"),
    ('[[design]]\nname = "x"\ngain = 3.0\n', "design.x.gain"),
    ('[[design]]\nname = "x"\ngain_factor = -1.0\n', "design.x.gain_factor"),
    ('[design]\nname = "x"\n', "design"),
])
def test_bad_design_tables_are_refused_naming_the_key(extra, key):
    with pytest.raises(CaseError) as info:
        parse_case(MINIMAL + "\n" + extra)
    assert f"{key}:" in str(info.value)


def test_a_design_changing_the_structure_drops_the_keys_of_the_old_one():
    text = MINIMAL.replace("[simulation]", '[feedforward]\nstructure = "lead-lag"\nlead = 4.0\n'
                           'lag = 2.0\n\n[simulation]', 1)
    case = parse_case(text + '\n[[design]]\nname = "plain"\nstructure = "static"\n'
                      '\n[[design]]\nname = "soft"\ngain_factor = 0.7\n')
    plain, soft = case.designs
    assert (plain.feedforward.structure, plain.feedforward.lead) == ("static", None)
    assert (soft.feedforward.structure, soft.feedforward.lead, soft.feedforward.lag) == (
        "lead-lag", 4.0, 2.0)


def test_designs_survive_save_and_reload():
    case = parse_case(MATCHED)
    again = parse_case(case_to_toml(case))
    assert again.designs == case.designs
    assert parse_case(case_to_toml(parse_case(MINIMAL))).designs == ()


def test_the_standard_ladder():
    names = [d.name for d in standard_designs()]
    assert names == ["static", "static-0.8", "lead-lag", "lead-lag-0.8", "lead-lag-delay",
                     "lead-lag-delay-0.8"]
    assert all(math.isclose(d.feedforward.gain_factor, 0.8) for d in standard_designs()[1::2])
    case = with_design_set(parse_case(MATCHED), "standard")
    assert [d.name for d in case.designs] == ["half", "over", *names]
    clash = parse_case(MATCHED.replace('name = "half"', 'name = "static"'))
    with pytest.raises(DesignError, match="static"):
        with_design_set(clash, "standard")


def test_run_designs_standard_writes_every_design(tmp_path: Path, capsys):
    from robustff.cli import run_command

    assert run_command.DESIGN_SETS == DESIGN_SETS
    out = tmp_path / "out"
    status = main(["run", str(ROOT / "cases" / "syrup-dilution.toml"), "--designs", "standard",
                   "--samples", "100", "--jobs", "1", "--out", str(out)])
    assert status == EXIT_OK
    summary = json.loads((out / "summary.json").read_text())
    assert [d["name"] for d in summary["designs"]][:2] == ["case", "static"]
    assert len(summary["designs"]) == 7
    header = (out / "samples.csv").read_text().splitlines()[0].split(",")
    assert "iae_fbff.lead-lag-0.8" in header and "unstable_fbff.static" in header
    printed = capsys.readouterr().out
    assert "static-0.8" in printed and "IAE gain vs case" in printed
    schema = json.loads((ROOT / "docs" / "summary.schema.json").read_text())
    jsonschema.Draft202012Validator(schema).validate(summary)
    broken = dict(summary, designs=[{k: v for k, v in summary["designs"][1].items()
                                     if k != "versus_case"}])
    assert not jsonschema.Draft202012Validator(schema).is_valid(broken)


def test_run_refuses_a_design_set_clashing_with_a_case_design(tmp_path: Path, capsys):
    case = tmp_path / "clash.toml"
    case.write_text(MATCHED.replace('name = "half"', 'name = "static"'))
    status = main(["run", str(case), "--designs", "standard", "--out", str(tmp_path / "o")])
    assert status == EXIT_USAGE
    assert "static" in capsys.readouterr().err


def test_replayed_noise_gives_the_results_of_drawn_noise(monkeypatch):
    # Extra designs replay the case run's noise when a chunk is small enough; drawing it again
    # from the same seeds must give the same numbers (the replay only saves the drawing).
    from robustff.study import runner

    text = (ROOT / "cases" / "wash-water-heater.toml").read_text() + (
        '\n[[design]]\nname = "gentle"\ngain_factor = 0.6\n')
    case = parse_case(text)
    replayed = run_study(case, samples=120, jobs=1, margins=False)
    monkeypatch.setattr(runner, "NOISE_REPLAY_LIMIT", 0)
    drawn = run_study(case, samples=120, jobs=1, margins=False)
    for a, b in zip(replayed.design_arms(), drawn.design_arms(), strict=True):
        for name in a.metrics:
            assert np.array_equal(a.metrics[name], b.metrics[name], equal_nan=True), name
