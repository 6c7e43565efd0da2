"""``robustff run`` says what it is doing when no chunk has finished for a while (the first run
on a machine compiles the simulator before any chunk), and says nothing when progress comes."""

from __future__ import annotations

import io
import threading
import time
from pathlib import Path

import pytest

import robustff.study as study_package
from robustff.cli import main, run_command
from robustff.cli.run_command import WAITING_NOTICE, ProgressPrinter, WaitingNotice

DEMO = Path(__file__).resolve().parents[2] / "cases" / "wash-water-heater.toml"


def test_the_notice_comes_once_without_progress_and_not_after_it() -> None:
    quiet, waiting = io.StringIO(), io.StringIO()
    prompt = WaitingNotice(quiet, 0.05)
    prompt.start()
    prompt.stop()  # progress before the deadline: no notice
    slow = WaitingNotice(waiting, 0.05)
    slow.start()
    time.sleep(0.3)
    slow.stop()
    ProgressPrinter(waiting)(1, 10)
    time.sleep(0.1)
    assert quiet.getvalue() == ""
    assert waiting.getvalue().count(WAITING_NOTICE) == 1
    assert waiting.getvalue().index(WAITING_NOTICE) < waiting.getvalue().index("progress:")


def test_the_command_prints_the_notice_while_the_study_is_slow(
        tmp_path: Path, capsys: pytest.CaptureFixture[str],
        monkeypatch: pytest.MonkeyPatch) -> None:
    real = study_package.run_study
    started = threading.Event()

    def slow_study(*args, **kwargs):
        started.set()
        time.sleep(0.4)  # as the first compilation of the simulator
        return real(*args, **kwargs)

    monkeypatch.setattr(study_package, "run_study", slow_study)
    monkeypatch.setattr(run_command, "WAITING_SECONDS", 0.1)
    status = main(["run", str(DEMO), "--samples", "60", "--jobs", "1",
                   "--out", str(tmp_path / "out")])
    assert status == 0 and started.is_set()
    assert capsys.readouterr().err.count(WAITING_NOTICE) == 1
