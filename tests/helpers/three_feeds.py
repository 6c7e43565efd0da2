"""A case of our own invention with three disturbances, for the studio's tests.

A glue kettle (fictional) is held at temperature by a hot-oil valve. Its feed flow and the feed's
temperature are both measured (two feedforwards); the solids content of the feed is not measured
(feedback alone handles it). Optionally the feed flow is replayed from a generated historian
record (drift, a step, noise and a short gap), with an allowed band on the kettle temperature.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

__all__ = ["THREE_FEEDS", "write_three_feeds", "RECORD_EVENT"]

THREE_FEEDS = """\
# Glue kettle K-2 (fictional plant): temperature by hot-oil valve
title = "Glue kettle: temperature by hot-oil valve, three feed disturbances"
time_unit = "s"

[signals.controlled]
name = "kettle temperature"
unit = "degC"
BAND_LINE

[signals.output]
name = "hot-oil valve"
unit = "%"

[process]              # hot-oil valve -> kettle temperature
model = "fopdt"
gain = 0.5
time_constant = 60.0
dead_time = 6.0

[disturbance.feed_flow]          # more cold feed, colder kettle
model = "fopdt"
gain = -0.9
time_constant = 40.0
dead_time = 4.0
unit = "m3/h"

[disturbance.feed_flow.sensor]   # magnetic flowmeter
time_constant = 1.0
noise_std = 0.01

[disturbance.feed_temperature]   # warmer feed, warmer kettle
model = "fopdt"
gain = 0.3
time_constant = 50.0
dead_time = 10.0
unit = "degC"

[disturbance.solids]             # nobody measures it
model = "fopdt"
gain = 0.2
time_constant = 80.0
dead_time = 12.0
unit = "%"
measured = false

[feedforward]
structure = "lead-lag"

[feedforward.feed_temperature]   # the slow one: static is enough
structure = "static"
gain_factor = 0.8

[simulation]
duration = 400.0
step = 1.0

[[event]]
kind = "disturbance-step"
disturbance = "feed_flow"
at = 20.0
size = 2.0

[[event]]
kind = "disturbance-step"
disturbance = "feed_temperature"
at = 120.0
size = -3.0

[[event]]
kind = "disturbance-step"
disturbance = "solids"
at = 200.0
size = 1.5

[uncertainty]
"process.gain" = { relative = 0.2 }                  # oil pressure varies
"disturbance.feed_flow.gain" = { relative = 0.2 }
"disturbance.feed_flow.sensor.time_constant" = { uniform = [0.5, 2.0] }
"disturbance.feed_temperature.time_constant" = { uniform = [40.0, 70.0] }
"disturbance.solids.gain" = { relative = 0.3 }

[[uncertainty.correlation]]      # a thicker feed mixes slower
first = "disturbance.feed_temperature.time_constant"
second = "disturbance.solids.gain"
rank_correlation = 0.4

[study]
samples = 300
seed = 7
"""

#: Replaces the first event: the feed flow replayed from ``feed-flow.csv``.
RECORD_EVENT = """[[event]]
kind = "disturbance-record"
disturbance = "feed_flow"
at = 0.0
file = "feed-flow.csv"
time_column = "time_s"
value_column = "flow_m3h"
"""


def _record_text() -> str:
    """A generated feed-flow record at 1 s: a slow drift, a step, noise and a short gap."""
    rng = np.random.default_rng(11)
    times = np.arange(0.0, 400.0, 1.0)
    flow = 12.0 + 0.004 * times + np.where(times >= 150.0, 1.2, 0.0)
    flow += 0.05 * rng.standard_normal(times.size)
    lines = ["time_s,flow_m3h"]
    for t, value in zip(times, flow, strict=True):
        lines.append(f"{t:g}," if 250.0 <= t < 255.0 else f"{t:g},{value:.3f}")
    return "\n".join(lines) + "\n"


def write_three_feeds(folder: Path, record: bool = False, band: float | None = None) -> Path:
    """Write the case (and, with ``record``, its record file) into ``folder``; its path.

    ``band``: ``[signals.controlled] band`` in degC (left out when None).
    """
    text = THREE_FEEDS.replace("BAND_LINE\n", "" if band is None else f"band = {band:g}\n")
    if record:
        first = text.index("[[event]]")
        second = text.index("[[event]]", first + 1)
        text = text[:first] + RECORD_EVENT + "\n" + text[second:]
        text = text.replace("duration = 400.0\n", "duration = 399.0\n")
        (folder / "feed-flow.csv").write_text(_record_text(), encoding="utf-8")
    path = folder / "kettle.toml"
    path.write_text(text, encoding="utf-8")
    return path
