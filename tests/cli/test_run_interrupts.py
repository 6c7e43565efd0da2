"""Ctrl-C during ``robustff run``: a second interrupt while the results are written loses nothing,
and an interrupt before the first finished chunk says that nothing was kept."""

from __future__ import annotations

import csv
import json
import os
import signal
import sys
from pathlib import Path

import pytest

import robustff.output.result_files as result_files
import robustff.study as study_package
from robustff.cli import EXIT_INTERRUPTED, EXIT_OK, main, run_command

DEMO = Path(__file__).resolve().parents[2] / "cases" / "syrup-dilution.toml"

pytestmark = pytest.mark.skipif(os.name != "posix", reason="sends SIGINT to this process")


def _ctrl_c() -> None:
    """Press Ctrl-C: SIGINT to this process (handled in the main thread, where the run is)."""
    os.kill(os.getpid(), signal.SIGINT)


class CtrlCAfterFirstChunk(run_command.ProgressPrinter):
    """Progress printer that presses Ctrl-C once, after the first finished chunk."""

    def __init__(self, stream=None) -> None:
        super().__init__(stream or sys.stderr)
        self.pressed = False

    def __call__(self, done: int, total: int) -> None:
        super().__call__(done, total)
        if not self.pressed:
            self.pressed = True
            _ctrl_c()


def _ctrl_c_while_writing(monkeypatch: pytest.MonkeyPatch) -> None:
    real = result_files.write_results

    def write_results(*args, **kwargs):
        _ctrl_c()  # the second press, while the finished samples are being written
        return real(*args, **kwargs)

    monkeypatch.setattr(result_files, "write_results", write_results)


def _rows(path: Path) -> list[dict[str, str]]:
    with path.open(newline="") as handle:
        return list(csv.DictReader(handle))


def test_second_ctrl_c_while_writing_keeps_the_finished_chunks(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setattr(run_command, "ProgressPrinter", CtrlCAfterFirstChunk)
    _ctrl_c_while_writing(monkeypatch)
    out = tmp_path / "out"
    status = main(["run", str(DEMO), "--samples", "3000", "--jobs", "1", "--out", str(out)])
    err = capsys.readouterr().err
    assert status == EXIT_INTERRUPTED
    assert "Ctrl-C cannot stop this step" in err
    summary = json.loads((out / "summary.json").read_text())
    assert summary["partial"] is True and summary["samples"] == 1000
    assert len(_rows(out / "samples.csv")) == 1000
    assert signal.getsignal(signal.SIGINT) is signal.default_int_handler  # handler restored


def test_ctrl_c_while_writing_a_finished_run_still_writes_it(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    _ctrl_c_while_writing(monkeypatch)
    out = tmp_path / "out"
    status = main(["run", str(DEMO), "--samples", "200", "--jobs", "1", "--out", str(out)])
    err = capsys.readouterr().err
    assert status == EXIT_OK
    assert "Ctrl-C cannot stop this step" in err
    summary = json.loads((out / "summary.json").read_text())
    assert summary["partial"] is False and summary["samples"] == 200


def test_ctrl_c_before_any_chunk_says_nothing_was_kept(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    out = tmp_path / "out"
    out.mkdir()
    (out / "summary.json").write_text('{"earlier": true}\n')

    def interrupted_study(*args, **kwargs):
        raise KeyboardInterrupt  # as Ctrl-C during the nominal run or the kernel's compilation

    monkeypatch.setattr(study_package, "run_study", interrupted_study)
    status = main(["run", str(DEMO), "--samples", "200", "--jobs", "1", "--out", str(out)])
    err = capsys.readouterr().err
    assert status == EXIT_INTERRUPTED
    assert "nothing was kept" in err
    assert json.loads((out / "summary.json").read_text()) == {"earlier": True}  # untouched
