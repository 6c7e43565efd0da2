"""Speed and memory of ``robustff run`` on a demo case.

Each measurement is a fresh ``python -m robustff run`` child process, as a user would start it:

* wall time of 10,000 samples with ``--jobs 1`` (the baseline) and ``--jobs 2``, and the speed-up;
  the study's own time (``elapsed_seconds`` in summary.json, without interpreter start-up and
  imports) and the child's CPU time (CPU / wall above 1 shows both workers busy) are shown beside
  it;
* peak resident memory (``resource.getrusage(RUSAGE_SELF).ru_maxrss`` inside the child, at the
  end of the run) for a tiny run (the baseline: interpreter, libraries, compiled kernel), for
  10,000 and for 40,000 samples: memory should grow about linearly with N and stay small, since
  the study keeps only per-sample metrics.

A warm-up run first fills the compiled-kernel cache so that no measurement pays for compilation.

Usage: ``python benchmarks/run_speed.py [CASE.toml] [--repeat R]``
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

DEFAULT_CASE = Path(__file__).resolve().parents[1] / "cases" / "syrup-dilution.toml"

# Runs the command line in the child and prints the child's own peak memory (kB on Linux).
_CHILD = (
    "import resource, sys\n"
    "from robustff.cli import main\n"
    "status = main(sys.argv[1:])\n"
    "print('maxrss_kb', resource.getrusage(resource.RUSAGE_SELF).ru_maxrss, file=sys.stderr)\n"
    "sys.exit(status)\n"
)


def run_once(case: Path, samples: int, jobs: int, out: Path) -> dict[str, float]:
    """One ``robustff run`` in a child process: wall, study and CPU time (s), peak memory (MB)."""
    argv = [sys.executable, "-c", _CHILD, "run", str(case), "--samples", str(samples),
            "--jobs", str(jobs), "--out", str(out)]
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    started = time.perf_counter()
    done = subprocess.run(argv, capture_output=True, text=True, check=False)
    wall = time.perf_counter() - started
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    if done.returncode != 0:
        raise SystemExit(f"robustff run failed ({done.returncode}):\n{done.stderr}")
    rss_kb = next(int(line.split()[1]) for line in done.stderr.splitlines()
                  if line.startswith("maxrss_kb"))
    summary = json.loads((out / "summary.json").read_text())
    return {"wall": wall, "study": float(summary["elapsed_seconds"]), "rss_mb": rss_kb / 1024.0,
            "cpu": cpu}


def best_of(case: Path, samples: int, jobs: int, repeat: int, folder: Path) -> dict[str, float]:
    """The fastest of ``repeat`` runs (least disturbed by other load); memory of that run."""
    runs = [run_once(case, samples, jobs, folder / f"n{samples}-j{jobs}") for _ in range(repeat)]
    return min(runs, key=lambda run: run["wall"])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("case", nargs="?", type=Path, default=DEFAULT_CASE)
    parser.add_argument("--repeat", type=int, default=2, help="runs per setting (best is kept)")
    args = parser.parse_args()
    load = os.getloadavg()
    with tempfile.TemporaryDirectory() as temp:
        folder = Path(temp)
        run_once(args.case, 20, 1, folder / "warm-up")
        one = best_of(args.case, 10_000, 1, args.repeat, folder)
        two = best_of(args.case, 10_000, 2, args.repeat, folder)
        tiny = best_of(args.case, 10, 1, 1, folder)
        big = best_of(args.case, 40_000, 2, 1, folder)
    print(f"case: {args.case.name}; {os.cpu_count()} cores; load average before/after: "
          f"{load[0]:.1f} / {os.getloadavg()[0]:.1f} (other work on the machine slows the runs)")
    print("samples  jobs   wall s  study s    CPU s  peak MB")
    for label, run, n, jobs in (("baseline", tiny, 10, 1), ("", one, 10_000, 1),
                                ("", two, 10_000, 2), ("", big, 40_000, 2)):
        print(f"{n:7d}  {jobs:4d}  {run['wall']:7.2f}  {run['study']:7.2f}  {run['cpu']:7.2f}"
              f"  {run['rss_mb']:7.1f}  {label}")
    print(f"speed-up of 2 jobs over 1 (10,000 samples): wall {one['wall'] / two['wall']:.2f}x, "
          f"study {one['study'] / two['study']:.2f}x")
    per_10k = (two["rss_mb"] - tiny["rss_mb"], big["rss_mb"] - tiny["rss_mb"])
    print(f"memory above the baseline: {per_10k[0]:.1f} MB at 10,000, {per_10k[1]:.1f} MB at "
          f"40,000 samples (ratio {per_10k[1] / max(per_10k[0], 1e-9):.2f}, linear would be 4)")


if __name__ == "__main__":
    main()
