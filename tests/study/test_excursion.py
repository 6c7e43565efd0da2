"""Excursion studies: the case's events scaled to growing throughput changes, every design."""

from __future__ import annotations

from pathlib import Path

import pytest
from balance_cases import balance_case, event
from case_texts import MINIMAL

from robustff.case import case_to_toml, parse_case
from robustff.cli import main
from robustff.errors import CaseError
from robustff.study.excursion import excursion_study, scaled_events

DESIGNS = '\n[[design]]\nname = "linear"\nlaw = "linear"\nstructure = "static"\n'


def _case():
    # A wild-flow step, then a (measured) wild-composition step: the linear compensator's gain
    # for the composition is the nominal throughput's, the balance law's is the current one's.
    return balance_case(measured='["wild_flow", "wild_composition"]', feedforward='law = "balance"',
                        events=event("wild_flow", 2.0, -50.0) + event("wild_composition", 20.0,
                                                                      0.02)
                        + event("wild_flow", 30.0, 25.0),
                        extra=DESIGNS + '\n[uncertainty]\n"process.volume" = { relative = 0.2 }\n')


def test_the_first_event_moves_the_input_by_the_fraction_and_the_rest_scale_with_it() -> None:
    scaled, change = scaled_events(_case(), "wild_flow", 0.4)
    assert change == pytest.approx(-0.4 * 500.0)  # the sign of the first event
    sizes = [(e.disturbance, e.size) for e in scaled.events]
    assert sizes == [("wild_flow", pytest.approx(-200.0)), ("wild_composition", 0.02),
                     ("wild_flow", pytest.approx(100.0))]


@pytest.mark.parametrize("arguments, message", [
    (("wild_flw", 0.2), "--input"),
    (("wild_composition", -0.1), "--fractions"),
])
def test_bad_arguments_are_named(arguments, message) -> None:
    with pytest.raises(CaseError, match=message):
        scaled_events(_case(), *arguments)


def test_a_transfer_function_case_is_refused() -> None:
    with pytest.raises(CaseError, match="balances"):
        scaled_events(parse_case(MINIMAL), "wild_flow", 0.1)


def test_an_excursion_that_empties_a_flow_is_refused_naming_the_fraction() -> None:
    with pytest.raises(CaseError, match="--fractions 1.2: .*a flow must stay above zero"):
        excursion_study(_case(), "wild_flow", [1.2], samples=10)


def test_the_linear_design_degrades_with_the_excursion_and_the_balance_law_does_not() -> None:
    rows = excursion_study(_case(), "wild_flow", [0.1, 0.2, 0.4], samples=20, seed=3, jobs=1)
    table = {(row.design, row.fraction): row for row in rows}
    linear = [table["linear", f].iae_ratio_p50 for f in (0.1, 0.2, 0.4)]
    assert linear[0] < linear[1] < linear[2]
    assert all(table["case", f].iae_ratio_p90 < 1e-6 for f in (0.1, 0.2, 0.4))
    assert {row.samples for row in rows} == {20}


def test_the_command_prints_every_design_and_writes_the_csv(tmp_path: Path, capsys) -> None:
    path = tmp_path / "blend.toml"
    path.write_text(case_to_toml(_case()), encoding="utf-8")
    status = main(["excursions", str(path), "--input", "wild_flow", "--fractions", "0.1,0.3",
                   "--samples", "10", "--jobs", "1", "--out", str(tmp_path / "out")])
    assert status == 0
    out = capsys.readouterr().out
    assert "-50 kg/min" in out and "-150 kg/min" in out and "linear" in out
    lines = (tmp_path / "out" / "excursions.csv").read_text().splitlines()
    assert lines[0].startswith("fraction,change [kg/min],design") and len(lines) == 1 + 2 * 2


def test_the_command_refuses_a_bad_fraction_list(tmp_path: Path, capsys) -> None:
    path = tmp_path / "blend.toml"
    path.write_text(case_to_toml(_case()), encoding="utf-8")
    assert main(["excursions", str(path), "--input", "wild_flow", "--fractions", "0,x"]) == 2
    assert "fraction" in capsys.readouterr().err


def test_a_balance_inputs_driver_is_its_operating_value() -> None:
    from robustff.study.disturbance_drivers import disturbance_drivers

    case = _case()
    ranking = [{"name": "process.volume", "rho": 0.7}, {"name": "process.wild_flow", "rho": -0.4}]
    drivers = {d.disturbance: (d.key, d.rho) for d in disturbance_drivers(case, ranking)}
    assert drivers == {"wild_flow": ("process.wild_flow", -0.4),
                       "wild_composition": (None, None)}
