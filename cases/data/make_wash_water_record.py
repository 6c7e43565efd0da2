"""Generate the demo historian record of a fictional plant's measured disturbance.

The plant is invented: the wash-water heater of the "Fernbrook creamery" crate washer (the
plant of cases/wash-water-heater.toml). The record is the cold-water flow into the heater
(m3/h) over 40 minutes at one value per second, as a historian on a European site exports it:
semicolon separated, decimal commas, ISO 8601 timestamps. It holds a slow drift (supply
pressure), two steps (a second washer line starting and stopping), measurement noise, a short
run of blank cells (a communication drop-out) and a few seconds with no rows at all.

Run from the repository root:  python cases/data/make_wash_water_record.py
It rewrites wash-water-flow-record.csv next to this script.
"""

from __future__ import annotations

from datetime import UTC, datetime, timedelta
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
OUT = HERE / "wash-water-flow-record.csv"
SECONDS = 2400
START = datetime(2026, 3, 14, 6, 0, 0, tzinfo=UTC)
BASE_FLOW = 12.0  # m3/h


def flow_trace(rng: np.random.Generator) -> np.ndarray:
    """Cold-water flow at each second, m3/h."""
    t = np.arange(SECONDS, dtype=float)
    drift = 0.35 * np.sin(2 * np.pi * t / 1500.0) + np.cumsum(rng.normal(0.0, 0.004, t.size))
    steps = np.where(t >= 300.0, 2.0, 0.0) - np.where(t >= 1500.0, 1.6, 0.0)
    noise = np.zeros(t.size)
    for k in range(1, t.size):  # first-order filtered noise, about 0.05 m3/h
        noise[k] = 0.9 * noise[k - 1] + rng.normal(0.0, 0.022)
    return BASE_FLOW + drift + steps + noise


def main() -> None:
    rng = np.random.default_rng(20260314)
    flow = flow_trace(rng)
    blank = set(range(1040, 1052))  # drop-out: rows written, values blank
    absent = set(range(1900, 1906))  # no rows at all for six seconds
    lines = ["# Fernbrook creamery (fictional), wash-water heater FI-3107 cold-water flow, "
             "historian export", "Zeitstempel;FI3107_m3h;Status"]
    for k, value in enumerate(flow):
        if k in absent:
            continue
        stamp = (START + timedelta(seconds=k)).strftime("%Y-%m-%dT%H:%M:%S")
        cell = "" if k in blank else f"{value:.3f}".replace(".", ",")
        lines.append(f"{stamp};{cell};{'comm' if k in blank else 'ok'}")
    OUT.write_text("\n".join(lines) + "\n", encoding="utf-8")


if __name__ == "__main__":
    main()
