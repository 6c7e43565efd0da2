"""Speed of the vectorised loop margins: 10,000 perturbed SOPDT plants under a SIMC PID.

Prints the time for all samples at once (the continuous loop, and the loop as simulated with
the controller sampled every 0.1 time units) and, as baselines measured in the same run, the
time per sample when samples are computed one by one with the same function, and with
python-control's ``stability_margins`` on a 10th-order Pade model (both extrapolated from a
subset).

Run: ``/work/venv/bin/python benchmarks/margins_speed.py [n]``
"""

from __future__ import annotations

import math
import sys
import time
import warnings

import numpy as np

from robustff.design.margins import loop_margins
from robustff.design.tuning import FeedbackSettings
from robustff.plant.models import PlantBatch, SensorModel, TransferModel

SAMPLE_TIME = 0.1  # controller sample time for the sampled-loop timing, time units


def fictional_spread(n: int, seed: int = 2024) -> tuple[PlantBatch, FeedbackSettings]:
    """An invented heat-exchanger-like SOPDT loop with +-50 % spread (k, tau1, tau2, theta)."""
    nominal = TransferModel("sopdt", 1.0, 6.0, 2.0, 1.0)
    batch = PlantBatch.from_nominal(nominal, nominal, SensorModel(), n)
    rng = np.random.default_rng(seed)
    for name in ("gain", "time_constant", "time_constant_2", "dead_time"):
        value = getattr(nominal, name)
        batch.set_parameter(f"process.{name}", value * rng.uniform(0.5, 1.5, n))
    # SIMC PID, tau_c = theta, series (3, 6, 2) -> ideal form (4, 8, 1.5); filter 0.1 Td.
    feedback = FeedbackSettings("pid", 4.0, 8.0, 1.5, 0.15, math.sqrt(12.0), -1e9, 1e9, 0.0, 1.0,
                                "SIMC")
    return batch, feedback


def pade_seconds_per_sample(batch: PlantBatch, feedback: FeedbackSettings, count: int) -> float:
    import control

    s = control.tf("s")
    controller = feedback.kc * (1 + 1 / (feedback.ti * s)
                                + feedback.td * s / (feedback.filter_time * s + 1))
    start = time.perf_counter()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for i in range(count):
            control.stability_margins(controller * batch.model("process", i).to_control(10))
    return (time.perf_counter() - start) / count


def main(n: int = 10_000) -> None:
    batch, feedback = fictional_spread(n)
    loop_margins(batch.subset(slice(0, 10)), feedback)  # warm-up
    start = time.perf_counter()
    result = loop_margins(batch, feedback)
    vectorised = time.perf_counter() - start
    # The loop as the simulation runs it: controller sampled every 0.1 time units (a tenth of
    # the nominal dead time), output held.
    loop_margins(batch.subset(slice(0, 10)), feedback, sample_time=SAMPLE_TIME)  # warm-up
    start = time.perf_counter()
    sampled_result = loop_margins(batch, feedback, sample_time=SAMPLE_TIME)
    sampled = time.perf_counter() - start

    subset = 200
    start = time.perf_counter()
    for i in range(subset):
        loop_margins(batch.subset(slice(i, i + 1)), feedback)
    one_by_one = (time.perf_counter() - start) / subset * n
    pade = pade_seconds_per_sample(batch, feedback, 50) * n

    summary = result.summary()
    print(f"loop margins for {n} samples: {vectorised:.2f} s "
          f"({vectorised / n * 1e6:.0f} us per sample)")
    print(f"  sampled loop (h = {SAMPLE_TIME:g}): {sampled:.2f} s "
          f"({sampled / n * 1e6:.0f} us per sample, {sampled / vectorised:.2f}x the continuous), "
          f"{int(np.count_nonzero(~sampled_result.stable))} unstable")
    print(f"  one sample per call (extrapolated from {subset}): {one_by_one:.1f} s, "
          f"ratio {one_by_one / vectorised:.1f}x")
    print(f"  python-control, Pade 10 per sample (extrapolated from 50): {pade:.1f} s, "
          f"ratio {pade / vectorised:.1f}x")
    print(f"  unstable samples: {summary['unstable']}; median GM "
          f"{summary['gain_margin']['p50']:.3f}, PM {summary['phase_margin']['p50']:.2f} deg, "
          f"Ms {summary['ms']['p50']:.3f}")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 10_000)
