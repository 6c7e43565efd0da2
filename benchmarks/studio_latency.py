"""Studio latency: time from an edit to the first refreshed result and to the full result.

Runs the app headless (Textual's pilot) on a demo case, waits for the first run (which loads the
compiled simulator), then edits an uncertainty bound several times and reports, per edit, the
time until the quick pass reaches the panes and until the full-sample result does (times
logged by the app itself). The baseline in the
same run is ``run_study`` called directly with the same sample counts, so the ratio shows the
studio's own overhead (thread hand-over, summary, drawing).

The whole launch is measured too, as a person sees it: ``python -m robustff studio CASE`` in a
pseudo-terminal (120 x 40), from starting the process to the first numbers on its screen (the
text "P(harm)" in what it draws), best of ``--launches`` [3]; the interpreter's start, the
imports and Textual's first frame included. Linux and macOS only (``pty``).

Usage: python benchmarks/studio_latency.py [--case NAME] [--edits N] [--launches N]
"""

from __future__ import annotations

import argparse
import asyncio
import statistics
import time
from pathlib import Path

from textual.widgets import Input

from robustff.case import load_case
from robustff.demo import DEMO_CASES, demo_case_path
from robustff.study import run_study
from robustff.tui.app import QUICK_SAMPLES, StudioApp
from robustff.tui.messages import field_id


async def _measure(path: Path, edits: int, cache: Path) -> dict[str, list[float]]:
    app = StudioApp(path, recovery_folder=cache)
    timings: dict[str, list[float]] = {"startup_first": [], "quick": [], "full": []}
    started = time.perf_counter()
    async with app.run_test(size=(100, 30)) as pilot:
        # Waiting polls with a plain sleep: the pilot's pause() posts a message to every widget
        # and waits for all of them each time (about 170 widgets, 16,000 messages to the first
        # result), work a person at a terminal does not cause, which slowed the app's own run.
        while app.results_version < 1:
            await asyncio.sleep(0.01)
        timings["startup_first"].append(app.result_log[0][0] - started)
        while app.last_view is None or app.last_view.quick:
            await asyncio.sleep(0.01)
        key = app.case.uncertainty[0].key
        row = app.query_one(f"#u-{field_id(key)}")
        params = row.query_one(".uparams", Input)
        base = params.value
        for index in range(edits):
            version = app.results_version
            params.focus()
            params.value = base if index % 2 else _widened(app, key)
            logged = len(app.result_log)
            edited = time.perf_counter()
            await pilot.press("enter")
            while app.results_version <= version or app.last_view.quick:
                await asyncio.sleep(0.005)
            # The app logs when each pass reaches the panes: the pilot's own waits (press
            # returns only when the app is idle) would otherwise blur the quick pass.
            fresh = app.result_log[logged:]
            timings["quick"].append(fresh[0][0] - edited)
            timings["full"].append(next(at for at, quick in fresh if not quick) - edited)
            await asyncio.sleep(0.2)  # idle between edits, as a person would be
    return timings


def _widened(app: StudioApp, key: str) -> str:
    params = app.case.uncertainty[0].distribution.params
    return ", ".join(f"{1.2 * value:g}" for value in params)


def _baseline(path: Path, repeats: int) -> tuple[float, float]:
    case = load_case(path)
    quick, full = [], []
    run_study(case, samples=QUICK_SAMPLES)
    for _ in range(repeats):
        started = time.perf_counter()
        run_study(case, samples=QUICK_SAMPLES)
        quick.append(time.perf_counter() - started)
        started = time.perf_counter()
        run_study(case)
        full.append(time.perf_counter() - started)
    return statistics.median(quick), statistics.median(full)


def _launch_to_first_numbers(path: Path, folder: Path, timeout: float = 30.0) -> float:
    """Seconds from starting the studio in a pseudo-terminal to "P(harm)" on its screen."""
    import fcntl
    import os
    import pty
    import select
    import struct
    import subprocess
    import sys
    import termios

    case = folder / path.name
    case.write_bytes(path.read_bytes())
    master, slave = pty.openpty()
    fcntl.ioctl(slave, termios.TIOCSWINSZ, struct.pack("HHHH", 40, 120, 0, 0))
    env = dict(os.environ, TERM="xterm-256color", COLUMNS="120", LINES="40")
    started = time.perf_counter()
    child = subprocess.Popen([sys.executable, "-m", "robustff", "studio", str(case)],
                             stdin=slave, stdout=slave, stderr=slave, env=env, cwd=folder,
                             close_fds=True)
    os.close(slave)
    seen = b""
    found = None
    try:
        while found is None and time.perf_counter() - started < timeout:
            ready, _, _ = select.select([master], [], [], 0.05)
            if ready:
                try:
                    seen = seen[-200:] + os.read(master, 65536)
                except OSError:  # the child ended
                    break
                if b"P(harm)" in seen:
                    found = time.perf_counter() - started
        os.write(master, b"\x11")  # Ctrl-Q: quit
        ended = time.perf_counter() + 10.0
        while child.poll() is None and time.perf_counter() < ended:
            # keep reading: a child whose terminal output is not read blocks on its writes
            ready, _, _ = select.select([master], [], [], 0.05)
            if ready:
                try:
                    os.read(master, 65536)
                except OSError:
                    break
    finally:
        if child.poll() is None:
            child.kill()
        os.close(master)
    if found is None:
        raise RuntimeError("the studio showed no numbers within the time allowed")
    return found


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--case", default="wash-water-heater", choices=DEMO_CASES)
    parser.add_argument("--edits", type=int, default=6)
    parser.add_argument("--launches", type=int, default=3)
    args = parser.parse_args()
    path = demo_case_path(args.case)
    import tempfile

    with tempfile.TemporaryDirectory() as cache:
        timings = asyncio.run(_measure(path, args.edits, Path(cache)))
    launches = []
    for _ in range(args.launches):
        with tempfile.TemporaryDirectory() as folder:
            launches.append(_launch_to_first_numbers(path, Path(folder)))
    base_quick, base_full = _baseline(path, 3)
    samples = load_case(path).study.samples
    quick, full = statistics.median(timings["quick"]), statistics.median(timings["full"])
    print(f"case {args.case}: quick pass {QUICK_SAMPLES} samples, full {samples} samples")
    print(f"start to first result (cold: loads the simulator): {timings['startup_first'][0]:.2f} s")
    print(f"whole launch in a terminal, process start to first numbers: best {min(launches):.2f} s"
          f" of {len(launches)} (all: {', '.join(f'{t:.2f}' for t in launches)}; target 1.5 s)")
    print(f"edit -> first refreshed result: median {quick:.3f} s "
          f"(min {min(timings['quick']):.3f}, max {max(timings['quick']):.3f})")
    print(f"edit -> full result:            median {full:.3f} s "
          f"(min {min(timings['full']):.3f}, max {max(timings['full']):.3f})")
    print(f"baseline run_study: {base_quick:.3f} s ({QUICK_SAMPLES}), "
          f"{base_full:.3f} s ({samples})")
    print(f"ratio studio/baseline: quick {quick / base_quick:.2f}, "
          f"full {full / (base_quick + base_full):.2f} (full includes the quick pass)")


if __name__ == "__main__":
    main()
