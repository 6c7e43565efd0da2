"""What the nonlinear balance-plant simulation costs against the linear one of its linearisation.

Runs ``robustff.engine.simulate`` in this process (warm: compilation excluded, timed apart) on a
demo case built from balances and on its linear twin (the same loop, the plant replaced by its
FOPDT/SOPDT linearisation at the nominal operating point, simulated by the transfer-function
kernel), best of ``--repeat`` runs each, one thread. Prints the cold compile time of the balance
kernel in this process (zero when numba's cache was warm), the cost per plant of each, and
their ratio.

Usage::

    python benchmarks/balance_speed.py [--case cases/brine-makeup-tank.toml] [--samples 2000]
        [--repeat 3]
"""

from __future__ import annotations

import argparse
import time
from dataclasses import replace
from pathlib import Path

import numpy as np

from robustff.case import load_case
from robustff.case.sampling import plant_batch, sample
from robustff.design.tuning import design_loop
from robustff.engine import build_scenario, simulate

ROOT = Path(__file__).resolve().parents[1]


def _linear_twin(case):
    """The case with its balance plant replaced by its linearisation: the same named
    disturbance paths, simulated by the transfer-function kernel."""
    names = [p for p in case.uncertainty if not p.key.startswith("process.")]
    linear = replace(case.feedforward, law="linear", trim="add")
    return replace(case, balance=None, uncertainty=tuple(names), designs=(),
                   feedforward=linear,
                   disturbances=tuple(replace(item, feedforward=None)
                                      for item in case.disturbances))


def _best(batch, design, scenario, repeat: int) -> float:
    best = float("inf")
    for _ in range(repeat):
        started = time.perf_counter()
        simulate(batch, design, scenario)
        best = min(best, time.perf_counter() - started)
    return best


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--case", default=str(ROOT / "cases" / "brine-makeup-tank.toml"))
    parser.add_argument("--samples", type=int, default=2000)
    parser.add_argument("--repeat", type=int, default=3)
    args = parser.parse_args()
    case = load_case(args.case)
    design = design_loop(case)
    started = time.perf_counter()
    scenario = build_scenario(case, design)  # the nominal run compiles (or loads) the kernel
    compile_time = time.perf_counter() - started
    values, names = sample(case, args.samples, case.study.seed)
    batch = plant_batch(case, names, values)
    balance = _best(batch, design, scenario, args.repeat)
    twin = _linear_twin(case)
    twin_design = design_loop(twin)
    twin_scenario = build_scenario(twin, twin_design)
    twin_batch = plant_batch(twin, [], np.zeros((args.samples, 0)))
    linear = _best(twin_batch, twin_design, twin_scenario, args.repeat)
    steps = scenario.n_steps * scenario.substeps
    print(f"{case.name}: {args.samples} plants x {steps} internal steps, both arms")
    print(f"  nominal run incl. compile or cache load: {compile_time:.2f} s")
    print(f"  balance plants (nonlinear, with margins of the linearisation): "
          f"{1e6 * balance / args.samples:.1f} us per plant")
    print(f"  linear twin (transfer-function kernel): {1e6 * linear / args.samples:.1f} us per "
          f"plant")
    print(f"  ratio: {balance / linear:.2f}")


if __name__ == "__main__":
    main()
