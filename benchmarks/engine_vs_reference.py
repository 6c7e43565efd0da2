"""Speed of the engine against the obvious python-control loop, and memory growth with N.

Measured in one run:

* the engine (:func:`robustff.engine.simulate`) on N perturbed FOPDT plants, both arms
  (feedback only and with feedforward), ``--steps`` controller steps, after a warm-up call so
  that compilation is excluded; best of ``--repeat`` calls;
* the baseline an engineer would write: a Python loop that, for each perturbed plant, builds
  the closed loop with python-control transfer-function algebra and Pade dead times and calls
  ``control.forced_response`` for both arms, on a subset of ``--subset`` samples. Its start-up
  (import, first call) is excluded: one sample is run before the clock starts, so the figure is
  the marginal cost per sample;
* the speed ratio of the marginal costs per sample, and the agreement of the two on the subset
  (relative IAE difference; the Pade approximation and sample-and-hold set its size);
* memory for several N: peak of Python/numpy allocations traced by ``tracemalloc`` during the
  call, and the growth of peak resident memory (``ru_maxrss``) in a fresh child process per N
  (allocations made inside compiled code are not traced by ``tracemalloc``).

Usage::

    python benchmarks/engine_vs_reference.py [--samples 10000] [--steps 2000] [--subset 20]
        [--pade-order 8] [--algebra ss|tf] [--repeat 3] [--memory-sizes 2000 10000 40000]
"""

from __future__ import annotations

import argparse
import os
import resource
import subprocess
import sys
import time
import tracemalloc

import numpy as np

from robustff.case import Case, Event, FeedbackSpec, FeedforwardSpec, SimulationSpec
from robustff.design.tuning import LoopDesign, design_loop
from robustff.engine import build_scenario, nominal_batch, simulate
from robustff.plant.models import PlantBatch, TransferModel

STEP = 0.1  # controller sample time, min
SPREAD = {  # relative half-width of the uniform perturbation of each parameter
    "process.gain": 0.3, "process.time_constant": 0.3, "process.dead_time": 0.3,
    "disturbance.gain": 0.3, "disturbance.time_constant": 0.3, "disturbance.dead_time": 0.3,
}


def benchmark_case(steps: int) -> Case:
    """A fictional heat-exchanger outlet temperature loop with a lead-lag-delay feedforward."""
    return Case(
        "benchmark loop", "min",
        TransferModel("fopdt", 0.8, 12.0, 0.0, 2.5), TransferModel("fopdt", -1.2, 6.0, 0.0, 3.7),
        FeedbackSpec(output_low=0.0, output_high=100.0, output_bias=50.0),
        FeedforwardSpec("lead-lag-delay"), SimulationSpec(steps * STEP, STEP),
        (Event("disturbance-step", 5.0, 4.0),),
    )


def perturbed_batch(case: Case, n: int, seed: int = 7) -> PlantBatch:
    """``n`` plants with every uncertain parameter drawn uniformly around its nominal value."""
    rng = np.random.default_rng(seed)
    batch = nominal_batch(case, n)
    for key, spread in SPREAD.items():
        batch.set_parameter(key, case.nominal_value(key) * rng.uniform(1 - spread, 1 + spread, n))
    return batch


def time_engine(case: Case, design: LoopDesign, batch: PlantBatch,
                repeat: int) -> tuple[float, np.ndarray]:
    """Best wall time (s) of ``simulate`` on ``batch``, and the IAE (N, 2) of the last call."""
    scenario = build_scenario(case, design)
    simulate(batch.subset(slice(0, 10)), design, scenario)  # warm-up: compile or load the cache
    best, iae = np.inf, np.empty((0, 2))
    for _ in range(repeat):
        started = time.perf_counter()
        result = simulate(batch, design, scenario)
        best = min(best, time.perf_counter() - started)
        iae = result.metrics["iae"]
    return best, iae


def time_engine_threads(case: Case, design: LoopDesign, batch: PlantBatch, jobs: int,
                        repeat: int) -> float:
    """Best wall time (s) of ``simulate`` on ``batch`` split into ``jobs`` parts run in threads,
    as the study runner does (the compiled kernel releases the GIL)."""
    from concurrent.futures import ThreadPoolExecutor

    scenario = build_scenario(case, design)
    bounds = np.linspace(0, batch.size, jobs + 1).astype(int)
    parts = [batch.subset(slice(a, b)) for a, b in zip(bounds[:-1], bounds[1:], strict=True)]
    best = np.inf
    with ThreadPoolExecutor(jobs) as pool:
        for _ in range(repeat):
            started = time.perf_counter()
            list(pool.map(lambda part: simulate(part, design, scenario), parts))
            best = min(best, time.perf_counter() - started)
    return best


def reference_loop_iae(case: Case, design: LoopDesign, batch: PlantBatch, i: int,
                       order: int, algebra: str = "ss") -> np.ndarray:
    """Both arms of plant ``i`` with python-control and Pade delays: IAE (2,).

    Each block is written as a transfer function; ``algebra = "ss"`` converts the blocks to
    state space before connecting them (numerically sound), ``"tf"`` connects the transfer
    functions directly (polynomial products of high degree: loses accuracy with Pade delays).
    """
    import control

    s = control.tf("s")
    gp = batch.model("process", i).to_control(order)
    gd = batch.model("disturbance", i).to_control(order)
    fb, ff = design.feedback, design.feedforward
    controller = fb.kc * (1 + 1 / (fb.ti * s))
    gff = ff.gain * (ff.lead * s + 1) / (ff.lag * s + 1)
    if ff.delay > 0:
        gff = gff * control.tf(*control.pade(ff.delay, order))
    one = control.tf(1, 1)
    if algebra == "ss":
        gp, gd, controller, gff, one = (control.ss(g) for g in (gp, gd, controller, gff, one))
    t = np.arange(case.simulation.n_steps) * case.simulation.step
    event = case.events[0]
    d = np.where(t >= event.at, event.size, 0.0)
    iae = np.empty(2)
    for arm, path in enumerate((gd, gd + gp * gff)):
        closed = control.feedback(one, gp * controller) * path
        with np.errstate(all="ignore"):  # an unstable sample overflows; reported, not hidden
            y = control.forced_response(closed, t, d).outputs
        iae[arm] = np.sum(np.abs(y)) * case.simulation.step  # setpoint 0: |e| = |y|
    return iae


def time_reference(case: Case, design: LoopDesign, batch: PlantBatch, subset: int, order: int,
                   algebra: str) -> tuple[float, np.ndarray]:
    """Marginal seconds per sample of the python-control loop on the first ``subset`` plants
    of ``batch`` (start-up, paid on another plant, excluded), and their IAE (subset, 2)."""
    reference_loop_iae(case, design, batch, subset, order, algebra)  # start-up: import, 1st call
    started = time.perf_counter()
    iae = np.array([reference_loop_iae(case, design, batch, i, order, algebra)
                    for i in range(subset)])
    return (time.perf_counter() - started) / subset, iae


def _status_mb(field: str) -> float:
    """A field of /proc/self/status (Linux), MB; NaN elsewhere."""
    try:
        with open("/proc/self/status") as status:
            for line in status:
                if line.startswith(field + ":"):
                    return float(line.split()[1]) / 1024.0
    except OSError:
        pass
    return float("nan")


def memory_child(n: int, steps: int) -> None:
    """In a fresh process: peak resident memory during one call on ``n`` plants minus the
    resident memory just before it (MB), and the process peak (MB)."""
    case = benchmark_case(steps)
    design = design_loop(case)
    scenario = build_scenario(case, design)
    simulate(perturbed_batch(case, 10), design, scenario)
    batch = perturbed_batch(case, n)
    try:  # Linux: writing 5 resets the peak (VmHWM) to the current resident size
        with open("/proc/self/clear_refs", "w") as refs:
            refs.write("5")
    except OSError:
        pass
    before = _status_mb("VmRSS")
    simulate(batch, design, scenario)
    peak = max(_status_mb("VmHWM"), _status_mb("VmRSS"))
    print(f"{peak - before:.2f} {resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0:.1f}")


def measure_memory(case: Case, design: LoopDesign, sizes: list[int], steps: int) -> list[tuple]:
    """Rows (N, traced peak MB, RSS growth MB, RSS peak MB) for each N."""
    scenario = build_scenario(case, design)
    rows = []
    for n in sizes:
        batch = perturbed_batch(case, n)
        tracemalloc.start()
        simulate(batch, design, scenario)
        traced = tracemalloc.get_traced_memory()[1] / 2**20
        tracemalloc.stop()
        child = subprocess.run(
            [sys.executable, __file__, "--memory-child", str(n), "--steps", str(steps)],
            capture_output=True, text=True, check=True,
        )
        growth, peak = (float(x) for x in child.stdout.split())
        rows.append((n, traced, growth, peak))
    return rows


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--samples", type=int, default=10_000)
    parser.add_argument("--steps", type=int, default=2_000)
    parser.add_argument("--subset", type=int, default=20)
    parser.add_argument("--pade-order", type=int, default=8)
    parser.add_argument("--algebra", choices=("ss", "tf"), default="ss",
                        help="connect the blocks as state space (default) or transfer functions")
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--jobs", type=int, default=os.cpu_count() or 1,
                        help="threads for the all-core engine figure (default: all cores)")
    parser.add_argument("--memory-sizes", type=int, nargs="+", default=[2_000, 10_000, 40_000])
    parser.add_argument("--memory-child", type=int, help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.memory_child:
        memory_child(args.memory_child, args.steps)
        return
    case = benchmark_case(args.steps)
    design = design_loop(case)
    batch = perturbed_batch(case, max(args.samples, args.subset + 1))
    engine_seconds, engine_iae = time_engine(case, design, batch.subset(slice(0, args.samples)),
                                             args.repeat)
    per_engine = engine_seconds / args.samples
    threaded_seconds = time_engine_threads(case, design, batch.subset(slice(0, args.samples)),
                                           args.jobs, args.repeat)
    per_threaded = threaded_seconds / args.samples
    per_reference, reference_iae = time_reference(case, design, batch, args.subset, args.pade_order,
                                                 args.algebra)
    stable = np.all(np.isfinite(engine_iae[: args.subset]), axis=1)
    failed = stable & ~np.all(np.isfinite(reference_iae), axis=1)
    both = stable & ~failed
    gap = np.abs(engine_iae[: args.subset][both] - reference_iae[both]) / reference_iae[both, :1]
    print(f"case: FOPDT loop, lead-lag-delay feedforward, {args.steps} steps of {STEP} min, "
          f"both arms, +-30 % on six plant parameters")
    print(f"engine:    N = {args.samples}: {engine_seconds:.3f} s (best of {args.repeat}), "
          f"{per_engine * 1e6:.2f} us per sample")
    print(f"reference: python-control ({args.algebra} interconnection), Pade order "
          f"{args.pade_order}, {args.subset} samples: "
          f"{per_reference * 1e3:.2f} ms per sample (start-up excluded)")
    print(f"engine on {args.jobs} threads (as the runner): {threaded_seconds:.3f} s, "
          f"{per_threaded * 1e6:.2f} us per sample")
    print(f"speed ratio (marginal cost per sample): {per_reference / per_engine:,.0f}x on one "
          f"core, {per_reference / per_threaded:,.0f}x on {args.jobs} threads")
    print(f"subset: {np.count_nonzero(~stable)} samples flagged unstable by the engine; the "
          f"reference overflowed on {np.count_nonzero(failed)} samples the engine found stable")
    print(f"agreement on the other {np.count_nonzero(both)}: max |IAE engine - IAE reference| / "
          f"IAE fb = {gap.max():.2e}, median {np.median(gap):.2e}")
    print("memory: N, traced peak during the call (MB), resident growth during the call in a fresh "
          "process (MB), process resident peak (MB)")
    for n, traced, growth, peak in measure_memory(case, design, args.memory_sizes, args.steps):
        print(f"  {n:>7d}  {traced:8.2f}  {growth:8.2f}  {peak:8.1f}")


if __name__ == "__main__":
    main()
