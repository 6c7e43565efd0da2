"""The lane layout of the kernel gives the general kernel's numbers, bit for bit.

Loops without a valve element or a secondary loop run in :mod:`robustff.engine.lane_kernel`,
many samples advanced together; every output (accumulators, run-away flags, the stability
probe's verdict, envelope histograms, kept trajectories, the recorded and replayed disturbance)
must equal :func:`robustff.engine.kernel.simulate_kernel`'s exactly, whatever the batch, the
order of the samples and how they fall into blocks of lanes. The general kernel is itself
checked against continuous-time references in ``test_engine_reference.py``.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

import robustff.engine as engine
from robustff.case.loader import load_case
from robustff.case.sampling import plant_batch, sample
from robustff.design.tuning import design_loop
from robustff.engine import EnvelopeGrid, SimulationResult, build_scenario, simulate
from robustff.engine.lane_kernel import LANES
from robustff.engine.lane_open_loop import SCRATCH_LIMIT, scratch_bytes

_HEAD = """\
time_unit = "min"
[signals.controlled]
name = "outlet temperature"
unit = "degC"
[signals.output]
name = "steam valve"
unit = "%"
"""

# A second-order process with a PID (setpoint weight, derivative), two disturbances (one
# unmeasured, one with a noisy transmitter), filtered noise, a ramp and a setpoint step, internal
# sub-steps and a detuned design: every path of the lane layout but the integrator.
SOPDT_PID = 'title = "Lane check: second-order loop with PID, noise and sub-steps"\n' + _HEAD + """\
[process]
model = "sopdt"
gain = 0.8
time_constant = 12.0
time_constant_2 = 3.0
dead_time = 2.5
[disturbance.feed_flow]
model = "fopdt"
gain = -1.2
time_constant = 6.0
dead_time = 3.7
[disturbance.feed_flow.sensor]
time_constant = 0.5
noise_std = 0.05
[disturbance.inlet_temp]
model = "sopdt"
gain = 0.5
time_constant = 9.0
time_constant_2 = 2.0
dead_time = 1.3
measured = false
[feedback]
form = "pid"
tuning = "manual"
kc = 3.0
ti = 10.0
td = 1.5
output_low = 0.0
output_high = 100.0
output_bias = 50.0
setpoint_weight = 0.6
[feedforward]
structure = "lead-lag-delay"
input_filter = 0.7
[simulation]
duration = 60.0
step = 0.2
substeps = 3
[[event]]
kind = "disturbance-step"
disturbance = "feed_flow"
at = 5.0
size = 4.0
[[event]]
kind = "disturbance-noise"
disturbance = "inlet_temp"
at = 10.0
size = 0.5
time_constant = 4.0
[[event]]
kind = "setpoint-step"
at = 30.0
size = 2.0
[[event]]
kind = "disturbance-ramp"
disturbance = "feed_flow"
at = 40.0
size = -3.0
duration = 10.0
[[design]]
name = "half"
gain_factor = 0.5
[uncertainty]
"process.gain" = { relative = 0.6 }
"process.time_constant" = { relative = 0.4 }
"process.dead_time" = { relative = 0.6 }
"disturbance.feed_flow.gain" = { relative = 0.3 }
"disturbance.feed_flow.dead_time" = { relative = 0.5 }
"disturbance.inlet_temp.dead_time" = { relative = 0.5 }
[study]
samples = 150
seed = 11
"""

# An integrating level loop tuned so hard that part of the spread runs away: the lanes whose
# arm diverges must freeze exactly as the general kernel stops them.
IPDT_RUNAWAY = 'title = "Lane check: integrating loop, some samples unstable"\n' + _HEAD + """\
[process]
model = "ipdt"
gain = -0.05
dead_time = 0.6
[disturbance]
model = "ipdt"
gain = 0.04
dead_time = 0.2
[feedback]
form = "pi"
tuning = "manual"
kc = -30.0
ti = 3.0
output_low = 0.0
output_high = 100.0
output_bias = 45.0
[feedforward]
structure = "static"
[simulation]
duration = 40.0
step = 0.1
[[event]]
kind = "disturbance-step"
at = 2.0
size = 10.0
[uncertainty]
"process.gain" = { relative = 0.8 }
"process.dead_time" = { relative = 0.8 }
[study]
samples = 150
seed = 5
"""


def _setup(tmp_path: Path, text: str) -> tuple:
    path = tmp_path / "case.toml"
    path.write_text(text, encoding="utf-8")
    case = load_case(path)
    design = design_loop(case)
    scenario = build_scenario(case, design)
    values, names = sample(case, case.study.samples, case.study.seed)
    batch = plant_batch(case, names, values)
    grid = EnvelopeGrid.spanning(-5.0, 5.0, scenario, points=40, bins=30)
    return case, design, scenario, batch, grid


def _general(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(engine, "simulate_lanes", engine.simulate_kernel)


def _assert_same(a: SimulationResult, b: SimulationResult) -> None:
    np.testing.assert_array_equal(a.accumulators, b.accumulators)
    np.testing.assert_array_equal(a.unstable, b.unstable)
    np.testing.assert_array_equal(a.loop_unstable, b.loop_unstable)
    for x, y in ((a.envelope_counts, b.envelope_counts), (a.trajectories, b.trajectories),
                 (a.noise, b.noise)):
        assert (x is None) == (y is None)
        if x is not None:
            np.testing.assert_array_equal(x, y)
    for name in a.metrics:
        np.testing.assert_array_equal(a.metrics[name], b.metrics[name])


@pytest.mark.parametrize("text", [SOPDT_PID, IPDT_RUNAWAY], ids=["sopdt-pid", "ipdt-runaway"])
def test_lanes_equal_the_general_kernel(tmp_path: Path, monkeypatch: pytest.MonkeyPatch,
                                        text: str) -> None:
    _, design, scenario, batch, grid = _setup(tmp_path, text)
    keep = np.array([0, 7, batch.size - 1])
    seeds = np.arange(100, 100 + batch.size, dtype=np.uint64)
    lanes = simulate(batch, design, scenario, seeds=seeds, envelope=grid, keep=keep,
                     record_noise=True)
    _general(monkeypatch)
    general = simulate(batch, design, scenario, seeds=seeds, envelope=grid, keep=keep,
                       record_noise=True)
    _assert_same(lanes, general)
    if text is IPDT_RUNAWAY:  # the case does exercise lanes that run away
        assert 0 < lanes.unstable[:, 0].sum() < batch.size
    assert lanes.envelope_counts is not None and lanes.envelope_counts.sum() > 0


def test_lanes_equal_the_general_kernel_for_another_design(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    # The feedforward arm alone, replaying the reference run's disturbance (another design on
    # the same plants and noise).
    _, design, scenario, batch, _ = _setup(tmp_path, SOPDT_PID)
    reference = simulate(batch, design, scenario, record_noise=True)
    half = design.alternatives[0]
    detuned = design.with_feedforward(half.settings, half.compensators)
    lanes = simulate(batch, detuned, scenario, reference=reference)
    _general(monkeypatch)
    general = simulate(batch, detuned, scenario, reference=reference)
    _assert_same(lanes, general)


def test_a_sample_does_not_depend_on_its_block(tmp_path: Path) -> None:
    # Each sample alone, and the batch reversed, give the numbers the whole batch gives: the
    # lanes of a block never mix (blocks of LANES samples grouped by dead time).
    _, design, scenario, batch, _ = _setup(tmp_path, IPDT_RUNAWAY)
    assert batch.size > 2 * LANES
    seeds = np.arange(batch.size, dtype=np.uint64)
    whole = simulate(batch, design, scenario, seeds=seeds)
    backwards = np.arange(batch.size)[::-1]
    reversed_run = simulate(batch.subset(backwards), design, scenario, seeds=seeds[backwards])
    np.testing.assert_array_equal(reversed_run.accumulators, whole.accumulators[backwards])
    for i in (0, 3, batch.size - 1):
        alone = simulate(batch.subset(np.array([i])), design, scenario, seeds=seeds[i:i + 1])
        np.testing.assert_array_equal(alone.accumulators[0], whole.accumulators[i])


def test_a_window_too_long_for_the_lanes_runs_in_the_general_kernel(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    # The lane layout's scratch grows with the window (LANES samples' signals at once); past
    # its limit the general kernel, with one sample's signals, runs the same loop.
    _, design, scenario, batch, _ = _setup(tmp_path, IPDT_RUNAWAY)
    calls: list[str] = []
    real_general, real_lanes = engine.simulate_kernel, engine.simulate_lanes

    def general(*args: object) -> None:
        calls.append("general")
        real_general(*args)

    def lanes(*args: object) -> None:
        calls.append("lanes")
        real_lanes(*args)

    monkeypatch.setattr(engine, "simulate_kernel", general)
    monkeypatch.setattr(engine, "simulate_lanes", lanes)
    fitting = simulate(batch, design, scenario)
    monkeypatch.setattr(engine, "SCRATCH_LIMIT", scratch_bytes(1, scenario.n_steps) - 1)
    too_long = simulate(batch, design, scenario)
    assert calls == ["lanes", "general"]
    _assert_same(fitting, too_long)
    # 200,000 internal steps (the most a case may have) with one disturbance do not fit.
    assert scratch_bytes(1, 200_000) > SCRATCH_LIMIT >= scratch_bytes(3, 7_200)
