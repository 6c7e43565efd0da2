"""Tests of ``robustff run``: exit codes, one-line errors, result files, determinism, Ctrl-C."""

from __future__ import annotations

import csv
import io
import json
import os
import queue
import signal
import subprocess
import sys
import threading
from pathlib import Path

import pytest

from robustff import CAUTION
from robustff.cli import EXIT_INTERRUPTED, EXIT_OK, EXIT_USAGE, main, run_command
from robustff.cli.run_command import ProgressPrinter as OriginalPrinter
from robustff.output.result_files import RESULT_FILES

DEMO = Path(__file__).resolve().parents[2] / "cases" / "syrup-dilution.toml"
# The command line (here --jobs and --out), the time stamp and the host differ between runs.
VOLATILE_KEYS = ("elapsed_seconds", "versions", "reproducibility")


def run_cli(argv: list[str]) -> int:
    """Exit status of ``robustff ARGV``, whether ``main`` returns it or exits with it."""
    try:
        return main(argv)
    except SystemExit as exc:  # argparse usage errors leave through SystemExit
        return int(exc.code or 0)


def _rows(path: Path) -> list[dict[str, str]]:
    with path.open(newline="") as handle:
        return list(csv.DictReader(handle))


def _stable_summary(path: Path) -> dict:
    data = json.loads(path.read_text())
    for key in VOLATILE_KEYS:
        data.pop(key)
    return data


class LateStderrPrinter(run_command.ProgressPrinter):
    """The progress printer, writing to ``sys.stderr`` as it is when the run starts."""

    def __init__(self, stream=None) -> None:
        super().__init__(stream or sys.stderr)


@pytest.fixture(autouse=True)
def _in_tmp(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    # A run without --out writes results/<case>/ under the working folder: keep it in tmp_path.
    monkeypatch.chdir(tmp_path)


def _write(path: Path, text: str) -> Path:
    path.write_text(text)
    return path


@pytest.mark.parametrize(
    ("extra", "expected"),
    [
        (["--no-such-option"], "unrecognized arguments: --no-such-option"),
        (["--samples", "0"], "--samples"),
        (["--samples", "abc"], "whole number"),
        (["--samples", "-5"], "--samples"),
        (["--percentiles", "0,50"], "strictly between 0 and 100"),
        (["--percentiles", "50,100"], "strictly between 0 and 100"),
        (["--percentiles", "x"], "numbers separated by commas"),
        (["--seed", "-1"], "--seed"),
        (["--jobs", "0"], "--jobs"),
    ],
)
def test_bad_arguments_exit_2_with_one_line(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], extra: list[str], expected: str
) -> None:
    runs = tmp_path / "runs"
    runs.mkdir()
    status = run_cli(["run", str(DEMO), "--out", str(runs / "out"), *extra])
    captured = capsys.readouterr()
    assert status == EXIT_USAGE
    lines = captured.err.strip().splitlines()
    assert len(lines) == 1, captured.err
    assert lines[0].startswith("robustff: error:") and expected in lines[0]
    assert "Traceback" not in captured.err + captured.out
    assert list(runs.iterdir()) == []
    assert sorted(p.name for p in tmp_path.iterdir()) == ["runs"]


MALFORMED = 'title = "broken"\n[process\nmodel = "fopdt"\n'
ONE_PROBLEM = DEMO.read_text().replace("time_constant = 20.0\ndead_time = 12.0",
                                       "time_constant = -20.0\ndead_time = 12.0", 1)


@pytest.mark.parametrize(
    ("name", "text", "expected"),
    [
        ("missing.toml", None, "no such case file"),
        ("malformed.toml", MALFORMED, "not readable as TOML"),
        ("negative-lag.toml", ONE_PROBLEM, "process.time_constant"),
    ],
)
def test_bad_cases_exit_2_with_one_line_and_write_nothing(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], name: str, text: str | None,
    expected: str,
) -> None:
    assert ONE_PROBLEM != DEMO.read_text()
    cases = tmp_path / "cases"
    cases.mkdir()
    path = cases / name
    if text is not None:
        path.write_text(text)
    runs = tmp_path / "runs"
    runs.mkdir()
    status = run_cli(["run", str(path), "--samples", "20", "--out", str(runs / "out")])
    captured = capsys.readouterr()
    assert status == EXIT_USAGE
    lines = captured.err.strip().splitlines()
    assert len(lines) == 1, captured.err
    assert lines[0].startswith("robustff: error:") and expected in lines[0] and name in lines[0]
    assert "Traceback" not in captured.err + captured.out
    assert list(runs.iterdir()) == []
    assert not (tmp_path / "results").exists()


def test_out_folder_with_foreign_files_is_refused(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    out = tmp_path / "runs" / "out"
    out.mkdir(parents=True)
    (out / "my-notes.txt").write_text("keep me")
    status = run_cli(["run", str(DEMO), "--samples", "20", "--out", str(out)])
    captured = capsys.readouterr()
    assert status == EXIT_USAGE
    lines = captured.err.strip().splitlines()
    assert len(lines) == 1 and "my-notes.txt" in lines[0] and "Traceback" not in captured.err
    assert [p.name for p in out.iterdir()] == ["my-notes.txt"]
    assert [p.name for p in out.parent.iterdir()] == ["out"]


def test_successful_run_writes_the_four_files_and_a_second_run_replaces_them(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    out = tmp_path / "runs" / "syrup"
    assert run_cli(["run", str(DEMO), "--samples", "300", "--seed", "8", "--jobs", "1",
                    "--out", str(out), "--percentiles", "5,50,95"]) == EXIT_OK
    captured = capsys.readouterr()
    assert sorted(p.name for p in out.iterdir()) == sorted(RESULT_FILES)
    assert captured.out.rstrip().endswith(CAUTION)
    assert "worse in" in captured.out and "P50" in captured.out
    assert "Traceback" not in captured.err
    summary = json.loads((out / "summary.json").read_text())
    assert (summary["samples"], summary["seed"], summary["partial"]) == (300, 8, False)
    assert set(summary["metrics"]["iae"]["fb"]) >= {"mean", "std", "p5", "p50", "p95"}
    assert len(_rows(out / "samples.csv")) == 300
    assert (out / "percentiles.md").read_text().rstrip().endswith(CAUTION)
    # A file an earlier run (with plots) left is robustff's own; the next run replaces it.
    (out / "plot-envelope.png").write_bytes(b"stale")
    assert run_cli(["run", str(DEMO), "--samples", "120", "--jobs", "1", "--out", str(out)]) == 0
    capsys.readouterr()
    assert sorted(p.name for p in out.iterdir()) == sorted(RESULT_FILES)
    assert len(_rows(out / "samples.csv")) == 120
    assert json.loads((out / "summary.json").read_text())["samples"] == 120
    assert [p.name for p in out.parent.iterdir()] == ["syrup"]


def test_default_out_folder_is_results_case_name(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    assert run_cli(["run", str(DEMO), "--samples", "50", "--jobs", "1"]) == EXIT_OK
    capsys.readouterr()
    out = tmp_path / "results" / "syrup-dilution"
    assert sorted(p.name for p in out.iterdir()) == sorted(RESULT_FILES)


def test_one_and_two_jobs_give_identical_files(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # 2500 samples = three chunks, so two workers really interleave them.
    for jobs in ("1", "2"):
        argv = ["run", str(DEMO), "--samples", "2500", "--seed", "12", "--jobs", jobs,
                "--out", str(tmp_path / f"jobs{jobs}")]
        assert run_cli(argv) == EXIT_OK
    capsys.readouterr()
    one, two = tmp_path / "jobs1", tmp_path / "jobs2"
    assert _stable_summary(one / "summary.json") == _stable_summary(two / "summary.json")
    for name in ("samples.csv", "percentiles.csv", "percentiles.md"):
        assert (one / name).read_bytes() == (two / name).read_bytes(), name


def test_main_returns_the_usage_status(
    capsys: pytest.CaptureFixture[str]
) -> None:
    assert main(["run", str(DEMO), "--samples", "abc"]) == EXIT_USAGE


def test_progress_printer_writes_to_the_current_stderr(monkeypatch: pytest.MonkeyPatch) -> None:
    replaced = io.StringIO()
    monkeypatch.setattr(sys, "stderr", replaced)
    OriginalPrinter()(1, 2)
    assert "1/2 samples" in replaced.getvalue()


def _first_progress_line(stream, timeout: float) -> str:
    lines: queue.Queue[str] = queue.Queue()

    def read() -> None:
        try:
            for line in stream:
                lines.put(line)
        except ValueError:  # the caller's communicate() closed the stream: nothing more to read
            pass

    threading.Thread(target=read, daemon=True).start()
    while True:
        line = lines.get(timeout=timeout)
        if line.startswith("progress:"):
            return line


@pytest.mark.skipif(os.name != "posix", reason="sends SIGINT to a child process")
def test_ctrl_c_writes_partial_results_and_exits_130(tmp_path: Path) -> None:
    out = tmp_path / "out"
    # 30 chunks take tens of seconds, so the signal surely arrives while the run is going.
    child = subprocess.Popen(
        [sys.executable, "-m", "robustff", "run", str(DEMO), "--samples", "30000", "--jobs", "1",
         "--out", str(out)],
        stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, cwd=tmp_path,
    )
    try:
        line = _first_progress_line(child.stderr, timeout=60)
        assert line.startswith("progress: 1000/30000")
        child.send_signal(signal.SIGINT)
        stdout, _ = child.communicate(timeout=60)
    finally:
        if child.poll() is None:
            child.kill()
            child.wait()
    assert child.returncode == EXIT_INTERRUPTED
    assert "PARTIAL" in stdout and stdout.rstrip().endswith(CAUTION)
    summary = json.loads((out / "summary.json").read_text())
    assert summary["partial"] is True and summary["requested"] == 30000
    done = summary["samples"]
    assert 1000 <= done < 30000 and done % 1000 == 0
    assert len(_rows(out / "samples.csv")) == done
    assert "PARTIAL" in (out / "percentiles.md").read_text()
    assert sorted(p.name for p in out.iterdir()) == sorted(RESULT_FILES)


def test_interrupt_inside_the_run_returns_130_with_partial_files(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    # In-process variant: the progress printer raises KeyboardInterrupt after the first chunk,
    # as Ctrl-C would between chunks.
    class InterruptingPrinter(LateStderrPrinter):
        def __call__(self, done: int, total: int) -> None:
            super().__call__(done, total)
            raise KeyboardInterrupt

    monkeypatch.setattr(run_command, "ProgressPrinter", InterruptingPrinter)
    out = tmp_path / "out"
    status = run_cli(["run", str(DEMO), "--samples", "3000", "--jobs", "1", "--out", str(out)])
    capsys.readouterr()
    assert status == EXIT_INTERRUPTED
    summary = json.loads((out / "summary.json").read_text())
    assert summary["partial"] is True and summary["samples"] == 1000
    assert len(_rows(out / "samples.csv")) == 1000
