"""Tests of ``robustff fit`` (robustff.cli.fit_command)."""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import numpy as np
import pytest

from robustff import CAUTION
from robustff.cli import main
from robustff.fit.response import simulate_response
from robustff.plant.models import TransferModel

DEMO = Path(__file__).resolve().parents[2] / "cases" / "data"


def _bump_csv(path: Path, gain: float = 1.2, tau: float = 4.0, theta: float = 1.3,
              seed: int = 0) -> Path:
    h, n = 0.25, 160
    t = np.arange(n) * h
    u = np.full(n, 40.0)
    u[12:] = 46.0
    y = 75.0 + simulate_response(TransferModel("fopdt", gain, tau, 0, theta), u - 40.0, h)
    y += np.random.default_rng(seed).normal(0, 0.02, n)
    rows = "\n".join(f"{a:g},{b:g},{c:.4f}" for a, b, c in zip(t, u, y, strict=True))
    path.write_text("t,valve,temp\n" + rows + "\n", encoding="utf-8")
    return path


ARGS = ["--input", "valve", "--output", "temp", "--time", "t", "--resamples", "40"]


def test_json_output_has_the_documented_shape(tmp_path, capsys) -> None:
    path = _bump_csv(tmp_path / "a.csv")
    assert main(["fit", str(path), *ARGS, "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["model"] == "fopdt"
    for name, true in (("gain", 1.2), ("time_constant", 4.0), ("dead_time", 1.3)):
        low, high = out[name]["ci95"]
        assert low <= out[name]["value"] <= high
        assert out[name]["value"] == pytest.approx(true, rel=0.05)
    assert out["ci_method"] == "bootstrap" and out["rmse"] < 0.05


def test_human_output_ends_with_the_caution(tmp_path, capsys) -> None:
    path = _bump_csv(tmp_path / "a.csv")
    assert main(["fit", str(path), *ARGS, "--method", "two-point"]) == 0
    assert capsys.readouterr().out.strip().endswith(CAUTION)


@pytest.mark.parametrize(
    ("edit", "message"),
    [
        (lambda text: text.replace("valve", "flow"), "no column 'valve'"),
        (lambda text: text.replace("46,", "x46,", 1), "non-numeric value 'x46'"),
        (lambda text: text.replace(",46,", ",40,"), "no step in the input"),
        (lambda text: "\n".join(text.splitlines()[:15]), "too short"),
    ],
)
def test_bad_data_exits_2_without_traceback(tmp_path, capsys, edit, message) -> None:
    path = _bump_csv(tmp_path / "a.csv")
    path.write_text(edit(path.read_text()), encoding="utf-8")
    assert main(["fit", str(path), *ARGS]) == 2
    err = capsys.readouterr().err
    assert message in err and "Traceback" not in err


def test_case_out_from_template_keeps_other_content(tmp_path, capsys) -> None:
    import robustff.case as case_module

    files = [str(_bump_csv(tmp_path / f"{i}.csv", 1.1 + 0.1 * i, 4.0 + i * 0.3, 1.2, i))
             for i in range(3)]
    template = tmp_path / "template.toml"
    shutil.copy(DEMO / "stock-heater-template.toml", template)
    out = tmp_path / "fitted.toml"
    code = main(["fit", *files, *ARGS, "--time-unit", "s", "--template", str(template),
                 "--case-out", str(out), "--plot", str(tmp_path / "fit.svg")])
    assert code == 0, capsys.readouterr().err
    case = case_module.load_case(out)
    keys = {p.key: p.distribution for p in case.uncertainty}
    assert keys["process.gain"].kind == "uniform"
    assert "disturbance.gain" in keys  # the template's other entries survive
    # data in seconds, case in minutes: 1.2 s = 0.02 min
    assert case.process.dead_time == pytest.approx(1.2 / 60, rel=0.1)
    assert "Larchmere" in out.read_text()
    assert (tmp_path / "fit.svg").read_text().lstrip().startswith("<?xml")


def test_demo_fitted_case_is_valid() -> None:
    import robustff.case as case_module

    case = case_module.load_case(DEMO / "stock-heater-fitted.toml")
    assert case.process.kind == "fopdt"
    assert {"process.gain", "process.time_constant", "process.dead_time"} <= {
        p.key for p in case.uncertainty}
