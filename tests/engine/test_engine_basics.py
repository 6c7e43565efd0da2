"""Basic closed-loop checks of the simulation engine against analytic results."""

import numpy as np
import pytest

from robustff.case import Case, Event, FeedbackSpec, FeedforwardSpec, SimulationSpec
from robustff.design.tuning import design_loop
from robustff.engine import build_scenario, nominal_batch, simulate
from robustff.plant.models import TransferModel


def make_case(structure="lead-lag-delay", process_dead=3.0, disturbance_dead=4.0, step=0.05):
    return Case(
        "test",
        "min",
        TransferModel("fopdt", 2.0, 10.0, 0.0, process_dead),
        TransferModel("fopdt", 1.5, 5.0, 0.0, disturbance_dead),
        FeedbackSpec(),
        FeedforwardSpec(structure),
        SimulationSpec(150.0, step),
        (Event("disturbance-step", 5.0, 1.0),),
    )


def test_integral_of_error_matches_final_value_theorem():
    # Source: Astrom and Hagglund, Advanced PID Control, ISA 2006 (from memory): for PI control and
    # a load step at the process input, IE = d Ti / Kc. A disturbance through Gd with gain Kd is an
    # equivalent input load Kd d / Kp, so IE (e = r - y) = -(Kd d / Kp) Ti / Kc without feedforward.
    # With feedforward of static gain Kff the net input load is (Kd/Kp + Kff) d.
    case = make_case()
    design = design_loop(case)
    scenario = build_scenario(case, design)
    result = simulate(nominal_batch(case), design, scenario)
    fb = design.feedback
    assert result.metrics["ie"][0, 0] == pytest.approx(-(1.5 / 2.0) * fb.ti / fb.kc, rel=1e-4)
    case_half = make_case()
    from dataclasses import replace

    case_half = replace(case, feedforward=FeedforwardSpec("static", gain_factor=0.5))
    design_half = design_loop(case_half)
    result_half = simulate(nominal_batch(case_half), design_half, scenario)
    load = 1.5 / 2.0 + design_half.feedforward.gain
    assert result_half.metrics["ie"][0, 1] == pytest.approx(-load * fb.ti / fb.kc, rel=1e-4)


def test_perfect_feedforward_cancels_the_disturbance():
    # Analytic: with the nominal plant, a realizable exact compensator makes Gp Gff + Gd = 0.
    case = make_case()
    design = design_loop(case)
    result = simulate(nominal_batch(case), design, build_scenario(case, design))
    assert result.metrics["iae"][0, 1] < 1e-6 * result.metrics["iae"][0, 0]


def test_identical_samples_give_identical_results_regardless_of_batch():
    case = make_case(disturbance_dead=1.7)
    design = design_loop(case)
    scenario = build_scenario(case, design)
    batch = nominal_batch(case, 5)
    batch.set_parameter("process.gain", np.array([1.5, 2.0, 2.5, 3.0, 3.5]))
    whole = simulate(batch, design, scenario)
    part = simulate(batch.subset(slice(2, 4)), design, scenario)
    np.testing.assert_array_equal(whole.metrics["iae"][2:4], part.metrics["iae"])


def test_unstable_sample_is_flagged_not_averaged():
    case = make_case()
    design = design_loop(case)
    batch = nominal_batch(case, 2)
    batch.set_parameter("process.gain", np.array([2.0, 20.0]))  # 10x gain: beyond the gain margin
    result = simulate(batch, design, build_scenario(case, design))
    assert result.unstable[1].all() and not result.unstable[0].any()
    assert np.isnan(result.metrics["iae"][1]).all()


def test_overshoot_side_follows_each_event():
    # A step up and, later, the same step back down: with feedback only the CV returns after
    # each event without crossing to the other side of its push by more than a small amount,
    # so the over-compensation signature stays near zero; a feedforward with 1.5x the gain
    # over-compensates both events (source: linearity; error scales with 1 - 1.5 = -0.5).
    from dataclasses import replace

    case = make_case(structure="static", process_dead=3.0, disturbance_dead=3.0)
    case = replace(
        case,
        disturbance=TransferModel("fopdt", 1.5, 10.0, 0.0, 3.0),
        events=(Event("disturbance-step", 5.0, 1.0), Event("disturbance-step", 80.0, -1.0)),
        feedforward=FeedforwardSpec("static", gain_factor=1.5),
    )
    design = design_loop(case)
    result = simulate(nominal_batch(case), design, build_scenario(case, design))
    fb_overshoot, ff_overshoot = result.metrics["overshoot"][0]
    fb_peak = result.metrics["peak_deviation"][0, 0]
    assert fb_overshoot < 0.1 * fb_peak
    assert ff_overshoot > 0.2 * fb_peak
