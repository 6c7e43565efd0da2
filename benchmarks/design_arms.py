"""What an extra feedforward design costs: one more arm on the same plants, not one more study.

Runs ``robustff.study.run_study`` in this process (warm: compilation excluded) on a demo case
with no extra design, then with the standard ladder (six more designs, ``--designs standard``),
best of ``--repeat`` runs each, margins off (they do not depend on the designs). Prints the
cost of the case alone (feedback arm plus the case's design), the extra cost per added design,
and its ratio to the first: the target is at most 0.40 (40 %).

Usage::

    python benchmarks/design_arms.py [--case cases/wash-water-heater.toml] [--samples 20000]
        [--repeat 3] [--jobs N]
"""

from __future__ import annotations

import argparse
import os
import time
from pathlib import Path

from robustff.case import load_case
from robustff.design.alternatives import with_design_set
from robustff.study import run_study

ROOT = Path(__file__).resolve().parents[1]


def _best(case, samples: int, repeat: int, jobs: int) -> float:
    best = float("inf")
    for _ in range(repeat):
        started = time.perf_counter()
        run_study(case, samples=samples, jobs=jobs, margins=False)
        best = min(best, time.perf_counter() - started)
    return best


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--case", default=str(ROOT / "cases" / "wash-water-heater.toml"))
    parser.add_argument("--samples", type=int, default=20_000)
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--jobs", type=int, default=os.cpu_count() or 1)
    args = parser.parse_args()
    case = load_case(args.case)
    ladder = with_design_set(case, "standard")
    run_study(ladder, samples=200, jobs=args.jobs, margins=False)  # compile and warm up
    print(f"load average before: {os.getloadavg()}")
    alone = _best(case, args.samples, args.repeat, args.jobs)
    with_ladder = _best(ladder, args.samples, args.repeat, args.jobs)
    added = len(ladder.designs) - len(case.designs)
    per_design = (with_ladder - alone) / added
    print(f"{args.samples} plants, jobs {args.jobs}, best of {args.repeat}")
    print(f"case alone (feedback + its design): {alone:.3f} s")
    print(f"with {added} more designs:            {with_ladder:.3f} s")
    print(f"extra cost per design: {per_design:.3f} s = {per_design / alone:.2f} of the case "
          f"alone (target <= 0.40)")
    print(f"load average after: {os.getloadavg()}")


if __name__ == "__main__":
    main()
