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


def test_the_optimisation_set_is_chunked_to_replay_and_gives_the_same_numbers(monkeypatch):
    # With the disturbance record of the whole set within the tune's budget, the optimisation
    # set is cut into chunks small enough to record theirs; the designs then replay it, and the
    # numbers are those of chunks that simulate the disturbance again (arithmetic identity).
    from concurrent.futures import ThreadPoolExecutor

    import robustff.study.runner as runner
    import robustff.tune.search as search

    case = load_case(ROOT / "cases" / "pasteuriser-tempering-tank.toml")  # 3 paths, noise
    design = design_loop(case)
    scenario = build_scenario(case, design)
    per_sample = scenario.n_steps * (scenario.substeps + len(case.disturbance_inputs))
    monkeypatch.setattr(runner, "NOISE_REPLAY_LIMIT", 10 * per_sample)
    monkeypatch.setattr(search, "NOISE_REPLAY_LIMIT", 10 * per_sample)
    values, names = sample(case, 40, 5)
    plants = (values, names, noise_seeds(5, 40, 1000))
    other = replace(design.feedforward, gain=0.8 * design.feedforward.gain)
    with ThreadPoolExecutor(2) as pool:
        kept = search._SampleSet(case, design, scenario, plants, pool, 2, replay=True)
        again = search._SampleSet(case, design, scenario, plants, pool, 2, replay=False)
        assert [b - a for a, b in kept.spans] == [10, 10, 10, 10]
        assert all(reference.noise is not None for reference in kept.references)
        assert [b - a for a, b in again.spans] == [40]
        assert again.references[0].noise is None  # too large for the (patched) limit
        np.testing.assert_array_equal(kept.iae_fbff(other), again.iae_fbff(other))
        np.testing.assert_array_equal(kept.iae_fb, again.iae_fb)
        monkeypatch.setattr(search, "TUNE_REPLAY_LIMIT", 39 * per_sample)  # the set exceeds it
        over = search._SampleSet(case, design, scenario, plants, pool, 2, replay=True)
        assert [b - a for a, b in over.spans] == [40]
