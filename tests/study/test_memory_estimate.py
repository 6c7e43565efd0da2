"""A study too big for the machine is refused before it starts, never a memory traceback."""

from __future__ import annotations

from pathlib import Path

from robustff.case import load_case
from robustff.cli import EXIT_USAGE, main
from robustff.study import run_study
from robustff.study.memory import estimated_study_bytes

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "cases" / "wash-water-heater.toml"


def test_the_estimate_covers_what_a_study_keeps():
    case = load_case(DEMO)
    result = run_study(case, samples=3000, jobs=1, margins=False)
    kept = result.parameters.nbytes + result.unstable.nbytes + sum(
        values.nbytes for values in result.metrics.values())
    assert estimated_study_bytes(case, 3000) - 200e6 >= kept
    # and it grows linearly with the number of samples
    a, b = (estimated_study_bytes(case, n) for n in (10_000, 20_000))
    assert b - a == a - estimated_study_bytes(case, 0)


def test_run_refuses_a_study_larger_than_free_memory(tmp_path, capsys, monkeypatch):
    from robustff.study import memory

    monkeypatch.setattr(memory, "available_memory_bytes", lambda: 100_000_000)
    status = main(["run", str(DEMO), "--samples", "5000000", "--out", str(tmp_path / "out")])
    assert status == EXIT_USAGE
    err = capsys.readouterr().err
    assert "--samples 5,000,000" in err and "GB" in err and "Traceback" not in err
    assert not (tmp_path / "out").exists()


def test_a_memory_error_is_one_line(tmp_path, capsys, monkeypatch):
    from robustff.study import runner

    def exhausted(*args, **kwargs):
        raise MemoryError

    monkeypatch.setattr(runner, "sample", exhausted)
    status = main(["run", str(DEMO), "--samples", "100", "--out", str(tmp_path / "out")])
    assert status == EXIT_USAGE
    assert "out of memory" in capsys.readouterr().err
