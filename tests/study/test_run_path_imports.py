"""The study path (sample, simulate, summarise, write) leaves the slow scientific imports alone."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

DEMO = Path(__file__).resolve().parents[2] / "cases" / "wash-water-heater.toml"

_PROBE = """
import sys
from robustff.case import load_case
from robustff.output.result_files import write_results
from robustff.study import run_study
from robustff.study.summary import summarize_study

result = run_study(load_case(sys.argv[1]), samples=200, jobs=1)
write_results(result, summarize_study(result), sys.argv[2], (5.0, 50.0, 95.0))
print(" ".join(sorted({m.split(".")[0] + "." + m.split(".")[1] for m in sys.modules
                       if m.startswith(("scipy.stats", "scipy.signal", "scipy.optimize"))}
                      | {m for m in sys.modules if m in ("control", "matplotlib", "pandas")})))
"""


def test_a_study_imports_neither_scipy_stats_nor_the_plotting_stack(tmp_path: Path) -> None:
    # The demo case uses a Latin hypercube and reports rank correlations: both without
    # scipy.stats (0.4-0.7 s to import on the project's machine).
    done = subprocess.run([sys.executable, "-c", _PROBE, str(DEMO), str(tmp_path / "out")],
                          capture_output=True, text=True, check=False)
    assert done.returncode == 0, done.stderr
    assert done.stdout.split() == [], done.stdout
    assert (tmp_path / "out" / "samples.csv").exists()
