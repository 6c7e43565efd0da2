"""The whole ``robustff run`` command against the DIY python-control script, measured together.

Every figure is a fresh ``python -m robustff run`` child process, as an engineer starts it
(interpreter start-up, imports, sampling, simulation, statistics, margins and the result files
all included), at the default ``--jobs`` (all cores), on a fictional FOPDT loop with a
lead-lag-delay feedforward, 2,000 controller steps, both arms, six plant parameters uniform
within +-30 % (the loop of ``engine_vs_reference.py``):

* marginal cost per plant: ``(wall(N_large) - wall(N_small)) / (N_large - N_small)``;
* fixed cost: the wall time of a default 2,000-plant run, and what is left of it after
  2,000 times the marginal cost;
* a big run (default 10^6 plants): wall time and the child's peak resident memory
  (``wait4`` rusage), plus the peak of the smaller runs to show memory growing linearly in N;
* the baseline, measured in the same run: the DIY script an engineer would write, a Python loop
  building each perturbed loop from python-control transfer functions with Pade(3) dead times
  and calling ``control.forced_response`` for both arms (``engine_vs_reference.reference_loop_iae``,
  start-up excluded, so its figure is also a marginal cost per plant; measured before and after
  the runs, the faster kept).

It prints the ratios against the baseline and against the targets of the speed issue: marginal
cost at least 1000x below the DIY script (aim 2000x), 10^6 plants within 10 s and under 400 MB,
a default run under 0.8 s. The machine's load average is printed before and after: other work
on the machine slows the runs, so quote it with the numbers.

Usage::

    python benchmarks/whole_command.py [--small 2000] [--large 50000] [--big 1000000]
        [--repeat 2] [--subset 10] [--samples-format csv|npy] [--jobs N]

``--big 0`` skips the big run (it loads every core for a minute or more).
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from engine_vs_reference import benchmark_case, perturbed_batch, time_reference  # noqa: E402

from robustff.design.tuning import design_loop  # noqa: E402

STEPS = 2000

# The loop of engine_vs_reference.benchmark_case as a case file (fictional heat exchanger).
CASE_TEXT = """\
title = "Benchmark loop: fictional heat-exchanger outlet temperature"
time_unit = "min"

[signals.controlled]
name = "outlet temperature"
unit = "degC"

[signals.output]
name = "steam valve"
unit = "%"

[process]
model = "fopdt"
gain = 0.8
time_constant = 12.0
dead_time = 2.5

[disturbance]
model = "fopdt"
gain = -1.2
time_constant = 6.0
dead_time = 3.7

[feedback]
output_low = 0.0
output_high = 100.0
output_bias = 50.0

[feedforward]
structure = "lead-lag-delay"

[simulation]
duration = 200.0
step = 0.1

[[event]]
kind = "disturbance-step"
at = 5.0
size = 4.0

[uncertainty]
"process.gain" = { relative = 0.3 }
"process.time_constant" = { relative = 0.3 }
"process.dead_time" = { relative = 0.3 }
"disturbance.gain" = { relative = 0.3 }
"disturbance.time_constant" = { relative = 0.3 }
"disturbance.dead_time" = { relative = 0.3 }

[study]
samples = 2000
seed = 7
sampling = "lhs"
"""


def run_command(case: Path, samples: int | None, out: Path, jobs: int | None,
                samples_format: str) -> dict[str, float]:
    """One ``robustff run`` child: wall time (s), study time (s), peak resident memory (MB)."""
    argv = [sys.executable, "-m", "robustff", "run", str(case), "--out", str(out),
            "--samples-format", samples_format]
    if samples is not None:
        argv += ["--samples", str(samples)]
    if jobs is not None:
        argv += ["--jobs", str(jobs)]
    started = time.perf_counter()
    child = subprocess.Popen(argv, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    assert child.stderr is not None
    err = child.stderr.read()
    _, status, usage = os.wait4(child.pid, 0)
    wall = time.perf_counter() - started
    child.returncode = os.waitstatus_to_exitcode(status)
    if child.returncode != 0:
        raise SystemExit(f"robustff run failed ({child.returncode}):\n{err.decode()}")
    summary = json.loads((out / "summary.json").read_text())
    return {"wall": wall, "study": float(summary["elapsed_seconds"]),
            "rss_mb": usage.ru_maxrss / 1024.0, "samples": summary["samples"]}


def best_of(repeat: int, *args) -> dict[str, float]:
    """The fastest of ``repeat`` runs (least disturbed by other load)."""
    return min((run_command(*args) for _ in range(repeat)), key=lambda run: run["wall"])


def _load() -> str:
    one, five, _ = os.getloadavg()
    return f"{one:.2f} (1 min), {five:.2f} (5 min)"


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--small", type=int, default=2_000)
    parser.add_argument("--large", type=int, default=50_000)
    parser.add_argument("--big", type=int, default=1_000_000, help="0 skips the big run")
    parser.add_argument("--repeat", type=int, default=2, help="runs per size (best kept)")
    parser.add_argument("--subset", type=int, default=10, help="plants for the DIY script")
    parser.add_argument("--pade-order", type=int, default=3)
    parser.add_argument("--algebra", choices=("ss", "tf"), default="tf",
                        help="DIY script's interconnection (default tf, as most scripts do)")
    parser.add_argument("--samples-format", choices=("csv", "npy"), default="csv")
    parser.add_argument("--jobs", type=int, default=None, help="default: robustff's (all cores)")
    args = parser.parse_args(argv)
    load_before = _load()
    benchmark = benchmark_case(STEPS)
    design = design_loop(benchmark)
    batch = perturbed_batch(benchmark, args.subset + 1)

    def diy_per_plant() -> float:
        return time_reference(benchmark, design, batch, args.subset, args.pade_order,
                              args.algebra)[0]

    diy_before = diy_per_plant()  # before and after the runs: the load may change meanwhile
    with tempfile.TemporaryDirectory() as temp:
        folder = Path(temp)
        case = folder / "benchmark-loop.toml"
        case.write_text(CASE_TEXT)

        def measure(n: int | None, name: str, repeat: int) -> dict[str, float]:
            return best_of(repeat, case, n, folder / name, args.jobs, args.samples_format)

        measure(20, "warm-up", 1)  # fills the compiled-kernel cache: no run pays compilation
        default = measure(None, "default", args.repeat)
        small = measure(args.small, "small", args.repeat)
        large = measure(args.large, "large", args.repeat)
        big = measure(args.big, "big", 1) if args.big else None
    diy = min(diy_before, diy_per_plant())
    load_after = _load()

    marginal = (large["wall"] - small["wall"]) / (args.large - args.small)
    jobs = args.jobs or os.cpu_count()
    print(f"{os.cpu_count()} cores; robustff run --jobs {jobs}; samples file "
          f"{args.samples_format}; load average before {load_before}, after {load_after} "
          "(other work on the machine slows the runs)")
    print(f"case: FOPDT loop, lead-lag-delay feedforward, {STEPS} steps, both arms, "
          "six parameters +-30 %")
    print("   plants   wall s  study s  peak MB")
    for label, run in (("default", default), ("", small), ("", large), ("", big)):
        if run is not None:
            print(f"{run['samples']:9d}  {run['wall']:7.2f}  {run['study']:7.2f}  "
                  f"{run['rss_mb']:7.1f}  {label}")
    print(f"DIY python-control script (Pade({args.pade_order}), {args.algebra} algebra, "
          f"forced_response, both arms, {args.subset} plants, best of before and after the "
          f"runs): {diy * 1e3:.2f} ms per plant")
    ratio = diy / marginal if marginal > 0 else float("inf")
    print(f"whole command, marginal cost per plant ({args.small}->{args.large}): "
          f"{marginal * 1e6:.1f} us = {ratio:,.0f}x faster than the DIY script "
          f"(target >= 1000x, aim 2000x: {'met' if ratio >= 1000 else 'NOT met'})")
    fixed = default["wall"] - default["samples"] * marginal
    print(f"default {default['samples']}-plant run: {default['wall']:.2f} s whole command, "
          f"{fixed:.2f} s of it fixed cost; = {default['wall'] / diy:,.0f} DIY plants "
          f"(target < 0.8 s: {'met' if default['wall'] < 0.8 else 'NOT met'})")
    if big is not None:
        per_plant_mb = (big["rss_mb"] - small["rss_mb"]) / (args.big - args.small)
        predicted = small["rss_mb"] + per_plant_mb * (args.large - args.small)
        print(f"{args.big:,} plants: {big['wall']:.1f} s wall (target 10 s: "
              f"{'met' if big['wall'] <= 10 else 'NOT met'}), {big['rss_mb']:.0f} MB peak "
              f"(target 400 MB: {'met' if big['rss_mb'] < 400 else 'NOT met'}); "
              f"{big['wall'] / (args.big * diy):.2e} of the DIY script's time")
        print(f"memory: {per_plant_mb * 1024:.2f} kB per plant above the "
              f"{args.small}-plant run; a straight line through it predicts {predicted:.0f} MB "
              f"at {args.large:,}, measured {large['rss_mb']:.0f} MB")


if __name__ == "__main__":
    main()
