"""A study on a real Dask cluster survives a lost worker (issue: cluster that survives faults).

A ``dask scheduler`` and two ``dask worker`` processes run on loopback, started here as separate
processes, as an engineer would start them; workers are killed by their process id mid-run.
"""

from __future__ import annotations

import json
import logging
import os
import signal
import subprocess
import sys
import threading
import time
from collections.abc import Callable
from pathlib import Path

import numpy as np
import pytest

from robustff.case import parse_case
from robustff.cli import EXIT_INTERRUPTED, main
from robustff.study import cluster as cluster_module
from robustff.study import run_study

distributed = pytest.importorskip(
    "distributed", reason="dask.distributed (the 'cluster' extra) is not installed"
)

pytestmark = pytest.mark.slow  # a scheduler and two worker processes per test: 20-40 s each

CASE = """
title = "Lost-worker check loop (fictional)"
time_unit = "min"

[process]
model = "fopdt"
gain = 1.5
time_constant = 8.0
dead_time = 1.5

[disturbance]
model = "fopdt"
gain = -0.8
time_constant = 6.0
dead_time = 2.5

[feedforward]
structure = "lead-lag-delay"

[simulation]
duration = 300.0
step = 0.15

[[event]]
kind = "disturbance-step"
at = 2.0
size = 5.0

[[event]]
kind = "disturbance-noise"
at = 0.0
size = 0.3
time_constant = 1.0

[uncertainty]
"process.gain" = { relative = 0.3 }
"process.dead_time" = { uniform = [1.0, 2.5] }
"disturbance.gain" = { normal = [-0.8, 0.1] }

[study]
samples = 30000
seed = 91
sampling = "lhs"
"""


def _start(argv: list[str], log: Path) -> subprocess.Popen:
    handle = log.open("w")
    return subprocess.Popen(argv, stdout=handle, stderr=subprocess.STDOUT,
                            start_new_session=True)


class Cluster:
    """A scheduler and two single-threaded workers (no nanny, so a killed worker stays dead)."""

    def __init__(self, folder: Path) -> None:
        self.folder = folder
        info = folder / "scheduler.json"
        self.scheduler = _start([sys.executable, "-m", "distributed.cli.dask_scheduler",
                                 "--host", "127.0.0.1", "--port", "0", "--no-dashboard",
                                 "--scheduler-file", str(info)], folder / "scheduler.log")
        self.workers: list[subprocess.Popen] = []
        try:
            deadline = time.monotonic() + 60
            while not info.exists() or not info.read_text().strip():
                if time.monotonic() > deadline or self.scheduler.poll() is not None:
                    raise RuntimeError("the scheduler did not start: "
                                       + (folder / "scheduler.log").read_text())
                time.sleep(0.2)
            time.sleep(0.2)  # the file is written in one piece, but give it a moment
            self.address = json.loads(info.read_text())["address"]
            self.workers = [
                _start([sys.executable, "-m", "distributed.cli.dask_worker", self.address,
                        "--nthreads", "1", "--no-nanny", "--no-dashboard", "--name", f"w{i}"],
                       folder / f"worker{i}.log")
                for i in range(2)
            ]
            with distributed.Client(self.address, timeout=30) as client:
                client.wait_for_workers(2, timeout=60)
        except BaseException:
            self.close()
            raise

    def kill_worker(self, index: int) -> None:
        """SIGKILL: the worker gets no chance to hand its work back (a crashed machine)."""
        os.kill(self.workers[index].pid, signal.SIGKILL)
        self.workers[index].wait(timeout=30)

    def close(self) -> None:
        for process in [*self.workers, self.scheduler]:
            if process.poll() is None:
                process.terminate()
        for process in [*self.workers, self.scheduler]:
            try:
                process.wait(timeout=20)
            except subprocess.TimeoutExpired:
                process.kill()
                process.wait()


@pytest.fixture
def cluster(tmp_path: Path):
    running = Cluster(tmp_path)
    try:
        yield running
    finally:
        running.close()


@pytest.fixture(scope="module")
def local_run():
    """The reference: the same study on local threads."""
    return run_study(parse_case(CASE), jobs=2, margins=False)


def _run_until_first_progress(cluster, case_file: Path,
                              on_first_progress: Callable[[], None]) -> tuple[int, str, Path]:
    """``robustff run`` of CASE on the cluster as a separate process; ``on_first_progress`` is
    called once, when the first progress line arrives. Returns the exit status, the whole
    standard error and the output folder."""
    case_file.write_text(CASE)
    out = case_file.parent / "out"
    command = subprocess.Popen(
        [sys.executable, "-m", "robustff", "run", str(case_file), "--cluster", cluster.address,
         "--out", str(out)],
        stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
    )
    assert command.stderr is not None
    lines = []
    for line in command.stderr:
        lines.append(line)
        if line.startswith("progress:"):
            on_first_progress()
            break
    _, rest_err = command.communicate(timeout=300)
    return command.returncode, "".join(lines) + rest_err, out


def test_a_killed_worker_changes_nothing_in_the_results(cluster, tmp_path: Path, local_run):
    # Kill worker 0 as soon as the first chunk has come back: the other chunks are then running
    # on the workers or finished and held there, so the killed worker takes some of each along.
    returncode, err, out = _run_until_first_progress(
        cluster, tmp_path / "lost-worker.toml", lambda: cluster.kill_worker(0))
    assert returncode == 0, err
    assert "Traceback" not in err, err
    assert cluster.workers[0].poll() is not None and cluster.workers[1].poll() is None
    done = json.loads((out / "summary.json").read_text())
    assert done["samples"] == 30000 and done["partial"] is False
    # Identical to the local run, plant by plant (noise is on: seeds travel with the chunks).
    table = np.genfromtxt(out / "samples.csv", delimiter=",", names=True)
    np.testing.assert_array_equal(table["iae_fbff"], _rounded(local_run.metrics["iae"][:, 1]))
    np.testing.assert_array_equal(table["valve_travel_fb"],
                                  _rounded(local_run.metrics["valve_travel"][:, 0]))
    assert np.std(table["valve_travel_fb"]) > 0


def _rounded(values: np.ndarray) -> np.ndarray:
    # samples.csv holds 10 significant digits
    return np.array([float(f"{v:.10g}") for v in values])


def test_a_lost_scheduler_ends_the_run_with_the_finished_chunks(cluster, tmp_path: Path):
    returncode, err, out = _run_until_first_progress(
        cluster, tmp_path / "lost-scheduler.toml",
        lambda: os.kill(cluster.scheduler.pid, signal.SIGKILL))
    assert returncode == EXIT_INTERRUPTED, err
    assert "Traceback" not in err, err  # Dask's own log lines come without their tracebacks
    assert "stopping with" in err and "kept, marked partial" in err
    done = json.loads((out / "summary.json").read_text())
    assert done["partial"] is True and 1000 <= done["samples"] < 30000


def test_losing_every_worker_keeps_the_finished_chunks_marked_partial(
    cluster, tmp_path: Path, local_run, monkeypatch, caplog, capsys
):
    monkeypatch.setattr(cluster_module, "NO_WORKER_GRACE", 3.0)  # 30 s in real use
    killed = threading.Event()

    class KillAllOnFirstChunk:
        """The run's progress printer; after the first chunk, every worker dies."""

        def __init__(self, stream=None) -> None:
            pass

        def __call__(self, done: int, total: int) -> None:
            if not killed.is_set():
                killed.set()
                cluster.kill_worker(0)
                cluster.kill_worker(1)

    from robustff.cli import run_command

    monkeypatch.setattr(run_command, "ProgressPrinter", KillAllOnFirstChunk)
    out = tmp_path / "out"
    case_file = tmp_path / "lost-cluster.toml"
    case_file.write_text(CASE)
    started = time.monotonic()
    with caplog.at_level(logging.WARNING, logger=cluster_module.__name__):
        status = main(["run", str(case_file), "--cluster", cluster.address, "--out", str(out)])
    assert killed.is_set()
    assert time.monotonic() - started < 120
    assert status == EXIT_INTERRUPTED
    assert "Traceback" not in capsys.readouterr().err
    assert any("no worker has been left for 3 s" in r.getMessage() for r in caplog.records)
    done = json.loads((out / "summary.json").read_text())
    assert done["partial"] is True and 1000 <= done["samples"] < 30000
    assert done["samples"] % 1000 == 0  # whole chunks only
    table = np.genfromtxt(out / "samples.csv", delimiter=",", names=True)
    n = done["samples"]
    np.testing.assert_array_equal(table["iae_fb"], _rounded(local_run.metrics["iae"][:n, 0]))


def test_a_cancelled_cluster_run_leaves_no_chunk_on_the_cluster(cluster, local_run):
    cancel = threading.Event()

    def stop_after_first_chunk(done: int, total: int) -> None:
        cancel.set()

    result = run_study(parse_case(CASE), cluster=cluster.address, cancel=cancel,
                       progress=stop_after_first_chunk, margins=False)
    assert result.partial and result.samples == 1000
    np.testing.assert_array_equal(result.metrics["iae"], local_run.metrics["iae"][:1000])
    with distributed.Client(cluster.address, timeout=30) as client:
        deadline = time.monotonic() + 30
        # the chunks not read were cancelled: the scheduler forgets them
        while client.run_on_scheduler(lambda dask_scheduler: len(dask_scheduler.tasks)):
            assert time.monotonic() < deadline, "chunks left running on the cluster"
            time.sleep(0.2)


def test_a_scheduler_without_workers_is_refused_in_one_line(tmp_path: Path, monkeypatch):
    scheduler = _start([sys.executable, "-m", "distributed.cli.dask_scheduler", "--host",
                        "127.0.0.1", "--port", "0", "--no-dashboard", "--scheduler-file",
                        str(tmp_path / "s.json")], tmp_path / "s.log")
    try:
        deadline = time.monotonic() + 60
        while not (tmp_path / "s.json").exists() or not (tmp_path / "s.json").read_text():
            assert time.monotonic() < deadline and scheduler.poll() is None
            time.sleep(0.2)
        time.sleep(0.2)
        address = json.loads((tmp_path / "s.json").read_text())["address"]
        monkeypatch.setattr(cluster_module, "NO_WORKER_GRACE", 2.0)
        from robustff.errors import RobustffError

        with pytest.raises(RobustffError, match="no worker joined the scheduler within 2 s"):
            run_study(parse_case(CASE), samples=100, cluster=address, margins=False)
    finally:
        scheduler.terminate()
        scheduler.wait(timeout=20)
