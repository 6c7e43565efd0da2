"""``robustff fit`` prints poor-fit warnings, refuses ``--resamples 0`` with the bootstrap, and
never claims to write an uncertainty it does not have."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from robustff.case import load_case
from robustff.cli import EXIT_OK, EXIT_USAGE, main

DATA = Path(__file__).resolve().parents[2] / "cases" / "data"
BUMP = str(DATA / "stock-heater-bump-1.csv")
COLUMNS = ["--time", "time_min", "--input", "steam_valve_pct", "--output", "stock_temp_degC"]


def test_resamples_0_with_the_bootstrap_is_refused(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["fit", BUMP, *COLUMNS, "--resamples", "0"]) == EXIT_USAGE
    err = capsys.readouterr().err
    assert "--resamples 0" in err and "--ci none" in err


def test_no_interval_writes_no_uncertainty_and_says_so(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    out = tmp_path / "fitted.toml"
    status = main(["fit", BUMP, *COLUMNS, "--ci", "none",
                   "--template", str(DATA / "stock-heater-template.toml"),
                   "--case-out", str(out)])
    printed = capsys.readouterr().out
    assert status == EXIT_OK
    assert "no [uncertainty] entries" in printed and "uniform" not in printed
    assert not [p for p in load_case(out).uncertainty if p.key.startswith("process.")]


def test_integrating_model_prints_warnings_and_json_lists_them(
    capsys: pytest.CaptureFixture[str]
) -> None:
    assert main(["fit", BUMP, *COLUMNS, "--model", "ipdt", "--ci", "jacobian"]) == EXIT_OK
    warnings = [line for line in capsys.readouterr().out.splitlines()
                if line.startswith("warning: ")]
    assert any("poor fit" in line for line in warnings)
    assert main(["fit", BUMP, *COLUMNS, "--model", "ipdt", "--ci", "jacobian", "--json"]) == 0
    document = json.loads(capsys.readouterr().out)
    assert any("self-regulating" in text for text in document["poor_fit"])
