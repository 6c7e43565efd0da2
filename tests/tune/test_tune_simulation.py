"""The search's evaluations: the feedforward arm alone on the recorded disturbance."""

from dataclasses import replace
from pathlib import Path

import numpy as np

from robustff.case import load_case
from robustff.case.sampling import plant_batch, sample
from robustff.design.tuning import design_loop
from robustff.engine import build_scenario
from robustff.study import noise_seeds
from robustff.tune.simulation import reference_run, simulate_iae

ROOT = Path(__file__).resolve().parents[2]


def test_a_design_on_the_reference_gives_the_numbers_of_a_full_run():
    # Arithmetic identity: the feedback arm and the disturbance (transmitter noise included) do
    # not depend on the feedforward, so replaying them must give the full run's IAE exactly.
    case = load_case(ROOT / "cases" / "wash-water-heater.toml")
    design = design_loop(case)
    scenario = build_scenario(case, design)
    values, names = sample(case, 40, 3)
    batch, seeds = plant_batch(case, names, values), noise_seeds(3, 40, 1000)
    reference = reference_run(batch, design, scenario, seeds)
    assert reference.noise is not None  # small enough to be recorded and replayed
    other = design.with_headline(replace(design.feedforward, gain=0.7 * design.feedforward.gain,
                                         input_filter=3.0), case)
    replayed = simulate_iae(batch, other, scenario, seeds, reference)
    full = simulate_iae(batch, other, scenario, seeds)
    np.testing.assert_array_equal(replayed, full)
    assert not np.array_equal(full[:, 1], simulate_iae(batch, design, scenario, seeds)[:, 1])
