"""Every kernel accumulator is written by the kernel and consumed by the metric conversion.

The accumulator list is the single source of the columns; these tests fail when a name is added
to it without the kernel writing the column or ``metrics_from_accumulators`` using it.
"""

from __future__ import annotations

import numpy as np
import pytest

import robustff.engine as engine
from robustff.case import Case, Event, FeedbackSpec, FeedforwardSpec, SimulationSpec
from robustff.design.tuning import design_loop
from robustff.engine import build_scenario, nominal_batch, simulate
from robustff.engine.kernel import ACCUMULATOR_NAMES, N_ACCUMULATORS
from robustff.engine.metrics import METRIC_NAMES, metrics_from_accumulators
from robustff.plant.models import TransferModel

# A value no accumulator can reach on this case: marks a column the kernel did not write.
SENTINEL = -1.2345e300


def tiny_case() -> Case:
    """A short FOPDT loop with a disturbance step and a tight output range (limits are hit)."""
    return Case(
        "records", "min",
        TransferModel("fopdt", 2.0, 10.0, 0.0, 3.0), TransferModel("fopdt", 1.5, 5.0, 0.0, 4.0),
        FeedbackSpec(output_low=49.0, output_high=51.0, output_bias=50.0),
        FeedforwardSpec("lead-lag-delay"), SimulationSpec(60.0, 0.1),
        (Event("disturbance-step", 3.0, 4.0),),
    )


def test_kernel_writes_every_accumulator_column(monkeypatch: pytest.MonkeyPatch) -> None:
    # The kernel's output array is pre-filled with the sentinel; a column the kernel's finishing
    # step skips keeps it. Three plants: nominal, and two with other process gains.
    case = tiny_case()
    design = design_loop(case)
    scenario = build_scenario(case, design)
    batch = nominal_batch(case, 3)
    batch.set_parameter("process.gain", np.array([2.0, 1.5, 2.6]))
    seen: list[np.ndarray] = []

    def spying(real_kernel):  # noqa: ANN001, ANN202 - a wrapper of either kernel layout
        def spying_kernel(*args: object) -> None:
            acc = next(a for a in args if isinstance(a, np.ndarray)
                       and a.ndim == 3 and a.shape[1:] == (2, N_ACCUMULATORS))
            acc.fill(SENTINEL)
            real_kernel(*args)
            seen.append(acc)
        return spying_kernel

    # This loop has no valve or secondary loop, so the lane layout runs it; both are spied on.
    monkeypatch.setattr(engine, "simulate_kernel", spying(engine.simulate_kernel))
    monkeypatch.setattr(engine, "simulate_lanes", spying(engine.simulate_lanes))
    result = simulate(batch, design, scenario)
    assert len(seen) == 1 and not result.unstable.any()
    acc = seen[0]
    untouched = [name for q, name in enumerate(ACCUMULATOR_NAMES)
                 if np.any(acc[:, :, q] == SENTINEL)]
    assert untouched == []
    assert np.all(np.isfinite(acc))


@pytest.mark.parametrize("setpoint_step", [None, 2.0], ids=["disturbance", "setpoint"])
def test_every_accumulator_feeds_a_metric(setpoint_step: float | None) -> None:
    # Change one column at a time; a column no metric reads leaves every metric unchanged.
    rng = np.random.default_rng(3)
    base = rng.uniform(0.5, 2.0, size=(4, 2, N_ACCUMULATORS))
    reference = metrics_from_accumulators(base, ACCUMULATOR_NAMES, setpoint_step,
                                          window=60.0, cv_band=0.5)
    assert tuple(reference) == METRIC_NAMES
    unused = []
    for q, name in enumerate(ACCUMULATOR_NAMES):
        changed = base.copy()
        changed[:, :, q] *= 1.5
        out = metrics_from_accumulators(changed, ACCUMULATOR_NAMES, setpoint_step, window=60.0,
                                        cv_band=0.5)
        if all(np.array_equal(out[m], reference[m]) for m in METRIC_NAMES):
            unused.append(name)
    assert unused == []


def test_conversion_reads_columns_by_name_not_position() -> None:
    # The same accumulators in reversed column order give the same metrics.
    rng = np.random.default_rng(5)
    base = rng.uniform(0.5, 2.0, size=(3, 2, N_ACCUMULATORS))
    reversed_names = ACCUMULATOR_NAMES[::-1]
    expected = metrics_from_accumulators(base, ACCUMULATOR_NAMES, None, window=60.0, cv_band=0.5)
    got = metrics_from_accumulators(base[:, :, ::-1], reversed_names, None, window=60.0,
                                    cv_band=0.5)
    for name in METRIC_NAMES:
        np.testing.assert_array_equal(got[name], expected[name])
