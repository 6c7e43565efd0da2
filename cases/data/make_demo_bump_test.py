"""Generate the demo bump tests of a fictional plant and the case fitted from them.

The plant is invented: the stock heater of the "Larchmere board mill", where a steam valve
(controller output, %) heats pulp stock (controlled variable: stock temperature, degC). Three
bump tests were "taken" at three operating points; the true models differ a little between them,
as a real loop's do. The responses are computed independently of robustff (scipy.signal.lsim on
a fine grid, the held valve signal shifted by the dead time), with correlated measurement noise
and a few blank cells, then written as CSV with times in minutes.

Run from the repository root:  python cases/data/make_demo_bump_test.py
It rewrites stock-heater-bump-*.csv and stock-heater-fitted.toml next to this script.
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import numpy as np
from scipy.signal import lsim

HERE = Path(__file__).resolve().parent
SAMPLE_TIME = 0.1  # min
DURATION = 45.0  # min
FINE = 20  # fine-grid points per sample for the reference simulation

#: (valve before, valve step, gain degC/%, time constant min, dead time min, temperature before)
TESTS = (
    (35.0, 6.0, 0.64, 5.1, 1.32, 61.0),
    (50.0, -5.0, 0.58, 5.6, 1.41, 70.4),
    (65.0, 5.0, 0.52, 6.2, 1.27, 78.9),
)


def response(gain: float, tau: float, theta: float, valve: np.ndarray) -> np.ndarray:
    """Temperature deviation at the samples for a held valve signal (deviation), by lsim."""
    n = valve.size
    t_fine = np.arange(n * FINE) * (SAMPLE_TIME / FINE)
    held = np.repeat(valve, FINE)
    shift = int(round(theta / (SAMPLE_TIME / FINE)))
    delayed = np.concatenate([np.zeros(shift), held[: held.size - shift]])
    _, y, _ = lsim(([gain], [tau, 1.0]), delayed, t_fine)
    return y[::FINE]


def make_test(index: int, rng: np.random.Generator) -> str:
    before, step, gain, tau, theta, temp0 = TESTS[index]
    n = int(round(DURATION / SAMPLE_TIME)) + 1
    times = np.arange(n) * SAMPLE_TIME
    valve_dev = np.where(times >= 5.0 - 1e-9, step, 0.0)
    noise = np.zeros(n)
    e = rng.normal(0.0, 0.04, n)
    for k in range(1, n):  # AR(1) measurement noise, std about 0.05 degC
        noise[k] = 0.6 * noise[k - 1] + e[k]
    temp = temp0 + response(gain, tau, theta, valve_dev) + noise
    lines = ["# Larchmere board mill (fictional), stock heater TIC-214 bump test "
             f"{index + 1}: steam valve step {step:+g} % at 5 min",
             "time_min,steam_valve_pct,stock_temp_degC"]
    blanks = set(rng.choice(np.arange(20, n), size=2, replace=False)) if index == 0 else set()
    for k in range(n):
        temp_text = "" if k in blanks else f"{temp[k]:.3f}"
        lines.append(f"{times[k]:.1f},{before + valve_dev[k]:.2f},{temp_text}")
    return "\n".join(lines) + "\n"


def main() -> None:
    rng = np.random.default_rng(20240611)
    files = []
    for index in range(len(TESTS)):
        path = HERE / f"stock-heater-bump-{index + 1}.csv"
        path.write_text(make_test(index, rng), encoding="utf-8")
        files.append(str(path))
    subprocess.run(
        [sys.executable, "-m", "robustff", "fit", *files, "--input", "steam_valve_pct",
         "--output", "stock_temp_degC", "--time", "time_min", "--time-unit", "min",
         "--template", str(HERE / "stock-heater-template.toml"), "--block", "process",
         "--case-out", str(HERE / "stock-heater-fitted.toml"),
         "--plot", str(HERE / "stock-heater-fit.png")],
        check=True,
    )


if __name__ == "__main__":
    main()
