"""Edge cases of `robustff run`: setpoint-only cases, cluster addresses, unwritable folders."""

import json
from pathlib import Path

from robustff.cli import main

DEMO = Path(__file__).resolve().parents[1] / "cases" / "wash-water-heater.toml"


def _setpoint_case(tmp_path: Path) -> Path:
    text = DEMO.read_text()
    events = '[[event]]\nkind = "setpoint-step"\nat = 20.0\nsize = 5.0\n\n'
    text = text[: text.index("[[event]]")] + events + text[text.index("[uncertainty]"):]
    path = tmp_path / "setpoint.toml"
    path.write_text(text)
    return path


def test_setpoint_overshoot_is_reported_in_percent_of_the_step(tmp_path, capsys):
    out = tmp_path / "out"
    assert main(["run", str(_setpoint_case(tmp_path)), "--samples", "200", "--jobs", "1",
                 "--out", str(out)]) == 0
    summary = json.loads((out / "summary.json").read_text())
    assert summary["units"]["overshoot"] == "%"
    metrics = summary["metrics"]
    assert metrics["overshoot"]["fb"]["p50"] == metrics["overshoot_percent"]["fb"]["p50"]
    # a PI loop tuned by SIMC overshoots a setpoint step by a few percent up to a few tens
    # (common practice, no source), never by more than the step itself
    assert 0.0 <= summary["metrics"]["overshoot"]["fb"]["p50"] < 100.0


def test_bad_cluster_address_is_one_line_and_exit_2(tmp_path, capsys):
    status = main(["run", str(DEMO), "--cluster", "foo", "--samples", "50",
                   "--out", str(tmp_path / "x")])
    err = capsys.readouterr().err
    assert status == 2 and "tcp://HOST:PORT" in err and "Traceback" not in err
    assert not (tmp_path / "x").exists()


def test_unwritable_out_is_refused_before_the_run(tmp_path, capsys):
    blocker = tmp_path / "file"
    blocker.write_text("not a folder")
    status = main(["run", str(DEMO), "--samples", "50", "--out", str(blocker / "sub")])
    err = capsys.readouterr().err
    assert status == 2 and "--out" in err and "progress" not in err
