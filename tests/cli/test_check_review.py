"""``robustff check`` and ``robustff run`` share the case review: refuse what cannot run (exit 2,
naming the key), print ``warning:`` lines for the suspicious rest, and show the nominal margins."""

from __future__ import annotations

from pathlib import Path

import pytest
from case_texts import MINIMAL

from robustff.cli import EXIT_OK, EXIT_USAGE, main

TINY_GAIN = MINIMAL.replace("gain = 2.0", "gain = 1e-320")
ODD_STEP = MINIMAL.replace("step = 0.5", "step = 0.3")


def _case(tmp_path: Path, text: str) -> Path:
    path = tmp_path / "case.toml"
    path.write_text(text, encoding="utf-8")
    return path


def test_check_refuses_a_gain_that_gives_an_infinite_controller_gain(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    assert main(["check", str(_case(tmp_path, TINY_GAIN))]) == EXIT_USAGE
    captured = capsys.readouterr()
    assert "process.gain" in captured.err and "Kc = inf" in captured.err
    assert "OK" not in captured.out and "Traceback" not in captured.err


def test_check_warns_and_exits_0(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["check", str(_case(tmp_path, ODD_STEP))]) == EXIT_OK
    out = capsys.readouterr().out
    warnings = [line for line in out.splitlines() if line.startswith("warning: ")]
    assert warnings == [
        "warning: simulation.step: 0.3 s does not divide the duration 100 s: the window is "
        "333 steps = 99.9 s"
    ]
    assert "OK: the case is valid and runs (1 warning above)." in out


def test_check_prints_the_nominal_margins_with_units(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    assert main(["check", str(_case(tmp_path, MINIMAL))]) == EXIT_OK
    out = capsys.readouterr().out
    lines = [line for line in out.splitlines() if "Nominal feedback margins" in line]
    assert [line.split(":")[0].strip() for line in lines] == [
        "Nominal feedback margins (as simulated, 0.5 s scan period)",
        "Nominal feedback margins (continuous controller)"]
    for line in lines:
        assert "(ratio)" in line and " deg" in line and "delay margin" in line
    assert "warning:" not in out and "OK: the case is valid." in out


def test_run_refuses_before_simulating_and_names_the_key(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    out = tmp_path / "out"
    status = main(["run", str(_case(tmp_path, TINY_GAIN)), "--samples", "20", "--jobs", "1",
                   "--out", str(out)])
    err = capsys.readouterr().err
    assert status == EXIT_USAGE
    assert "process.gain" in err and "progress:" not in err
    assert not out.exists()


def test_run_prints_the_same_warnings_before_starting(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    status = main(["run", str(_case(tmp_path, ODD_STEP)), "--samples", "20", "--jobs", "1",
                   "--out", str(tmp_path / "out")])
    err = capsys.readouterr().err
    assert status == EXIT_OK
    lines = err.splitlines()
    first_warning = next(i for i, line in enumerate(lines) if line.startswith("warning: "))
    first_progress = next(i for i, line in enumerate(lines) if line.startswith("progress:"))
    assert first_warning < first_progress
    assert "warning: simulation.step: 0.3 s does not divide" in err
