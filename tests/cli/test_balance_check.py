"""``robustff check`` on plants built from balances: the steady state and the linearised paths,
as text and as JSON (``--json``)."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from balance_cases import BLENDING
from case_texts import MINIMAL

from robustff.cli import main

CASE = BLENDING.format(pipe_volume=0.35, analyzer_dead_time=0.5, measured='["wild_flow"]',
                       feedback="", feedforward='law = "balance"', duration=40.0, step=0.05,
                       substeps=1, extra="", process_extra="",
                       events='[[event]]\nkind = "disturbance-step"\n'
                       'at = 2.0\nsize = -100.0\ndisturbance = "wild_flow"\n')


def _write(tmp_path: Path, text: str) -> str:
    path = tmp_path / "case.toml"
    path.write_text(text, encoding="utf-8")
    return str(path)


def test_json_gives_the_published_linearisation(tmp_path: Path, capsys) -> None:
    assert main(["check", "--json", _write(tmp_path, CASE)]) == 0
    report = json.loads(capsys.readouterr().out)
    # Seborg, Edgar and Mellichamp, Process Dynamics and Control, Example 2.1 (from memory):
    # tau = rho V / w = 2.571 min, dx/dw2 = 3.5714e-4 and dx/dw1 = -1.4286e-4 per kg/min.
    process = report["process"]
    assert process["gain"] == pytest.approx(3.5714e-4, rel=1e-4)
    assert process["time_constant"] == pytest.approx(2.571, abs=5e-4)
    # dead time: the pipe's rho V_pipe / w = 900 * 0.35 / 700 plus the analyzer's 0.5 min
    assert process["dead_time"] == pytest.approx(0.45 + 0.5, rel=1e-12)
    assert process["gain_unit"] == "mass fraction per kg/min"
    assert set(report["disturbances"]) == {"wild_flow", "wild_composition"}
    wild = report["disturbances"]["wild_flow"]
    assert wild["gain"] == pytest.approx(-1.4286e-4, rel=1e-4)
    assert {"gain", "time_constant", "dead_time"} <= set(wild)
    steady = report["steady_state"]
    assert steady["manipulated_flow"]["value"] == pytest.approx(200.0, rel=1e-12)
    assert steady["manipulated_flow"]["unit"] == "kg/min"
    assert report["caution"]


def test_json_of_a_transfer_function_case_gives_its_two_paths(tmp_path: Path, capsys) -> None:
    assert main(["check", "--json", _write(tmp_path, MINIMAL)]) == 0
    report = json.loads(capsys.readouterr().out)
    assert report["plant"] == "transfer-function"
    assert (report["process"]["gain"], report["process"]["time_constant"],
            report["process"]["dead_time"]) == (2.0, 10.0, 2.0)
    assert report["disturbances"]["disturbance"]["dead_time"] == 3.0


def test_text_shows_the_steady_state_and_every_path(tmp_path: Path, capsys) -> None:
    assert main(["check", _write(tmp_path, CASE)]) == 0
    out = capsys.readouterr().out
    assert "Steady state at the nominal operating point:" in out
    assert "manipulated_flow = 200 kg/min" in out
    for path in ("process", "wild_flow", "wild_composition"):
        assert f"  {path} " in out
    assert "w2 = w1 (x_sp - x1) / (x2 - x_sp)" in out
    assert "disturbance-step, size -100 kg/min (disturbance wild_flow)" in out


def test_a_bad_balance_case_exits_2_naming_the_key(tmp_path: Path, capsys) -> None:
    text = CASE.replace("outlet_composition = 0.5", "outlet_composition = 0.9")
    assert main(["check", "--json", _write(tmp_path, text)]) == 2
    err = capsys.readouterr().err
    assert "process.outlet_composition" in err and "Traceback" not in err


@pytest.mark.parametrize("command", ["tune", "studio"])
def test_tune_and_the_studio_refuse_a_balance_plant_in_words(tmp_path: Path, capsys,
                                                             command: str) -> None:
    assert main([command, _write(tmp_path, CASE)]) == 2
    err = capsys.readouterr().err
    assert "built from balances" in err and "Traceback" not in err


def test_json_of_named_disturbances_lists_each_path(capsys) -> None:
    from robustff.demo import demo_case_path

    assert main(["check", "--json", str(demo_case_path("pasteuriser-tempering-tank"))]) == 0
    report = json.loads(capsys.readouterr().out)
    assert list(report["disturbances"]) == ["feed_flow", "feed_temperature", "steam_pressure"]
    assert all({"gain", "time_constant", "dead_time", "gain_unit"} <= set(entry)
               for entry in report["disturbances"].values())
