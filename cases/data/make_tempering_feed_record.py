"""Generate the demo historian record of the tempering tank's feed flow (a fictional plant).

The plant is invented: the tempering tank ahead of the bottle pasteuriser of the "Aldermoor
brewery" (the plant of cases/pasteuriser-tempering-tank.toml). The record is the feed-water flow
into the tank (m3/h) over two hours at one value every 2 s, exported with ISO 8601 timestamps,
comma separated, decimal points. It holds a slow drift (the header pressure through the shift),
three steps (a bottle line started, a rinse skid switched on, the line stopped), measurement
noise, and a communication drop-out of 90 s with no rows at all.

Run from the repository root:  python cases/data/make_tempering_feed_record.py
It rewrites tempering-feed-record.csv next to this script and the package's copy.
"""

from __future__ import annotations

from datetime import UTC, datetime, timedelta
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
OUTPUTS = (HERE / "tempering-feed-record.csv",
           HERE.parents[1] / "robustff" / "demo" / "data" / "tempering-feed-record.csv")
SPACING = 2  # s between rows
ROWS = 3600  # two hours
START = datetime(2026, 9, 8, 14, 0, 0, tzinfo=UTC)
BASE_FLOW = 18.0  # m3/h


def flow_trace(rng: np.random.Generator) -> np.ndarray:
    """Feed-water flow at each row, m3/h."""
    t = np.arange(ROWS, dtype=float) * SPACING
    drift = 0.6 * np.sin(2 * np.pi * t / 5400.0) + np.cumsum(rng.normal(0.0, 0.006, t.size))
    steps = (np.where(t >= 900.0, 2.5, 0.0) + np.where(t >= 3000.0, 1.2, 0.0)
             - np.where(t >= 5400.0, 3.0, 0.0))
    noise = np.zeros(t.size)
    for k in range(1, t.size):  # first-order filtered noise, about 0.08 m3/h
        noise[k] = 0.85 * noise[k - 1] + rng.normal(0.0, 0.042)
    return BASE_FLOW + drift + steps + noise


def main() -> None:
    rng = np.random.default_rng(20260908)
    flow = flow_trace(rng)
    absent = set(range(2100, 2145))  # no rows for 90 s: a communication drop-out
    lines = ["# Aldermoor brewery (fictional), pasteuriser tempering tank FT-210 feed-water flow, "
             "historian export", "timestamp,FT210_m3h"]
    for k, value in enumerate(flow):
        if k in absent:
            continue
        stamp = (START + timedelta(seconds=SPACING * k)).strftime("%Y-%m-%dT%H:%M:%S")
        lines.append(f"{stamp},{value:.3f}")
    for out in OUTPUTS:
        out.parent.mkdir(parents=True, exist_ok=True)
        out.write_text("\n".join(lines) + "\n", encoding="utf-8")


if __name__ == "__main__":
    main()
