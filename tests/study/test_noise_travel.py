"""Valve travel from transmitter noise passed through the lead-lag: said in the summary with the
remedy (a filter on the feedforward input), and gone once that filter is in the case."""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from robustff.case import load_case
from robustff.demo import demo_case_path
from robustff.design.tuning import design_loop
from robustff.study import run_study
from robustff.study.noise_travel import (
    TRAVEL_RATIO,
    filter_trial,
    high_frequency_gain,
    noise_travel_warning,
    suggested_input_filter,
)
from robustff.study.summary import summarize_study


def _travel_ratio(result) -> float:
    travel = result.metrics["valve_travel"]
    return float(np.median(travel[:, 1]) / np.median(travel[:, 0]))


@pytest.fixture(scope="module")
def wash_water():
    case = load_case(demo_case_path("wash-water-heater"))
    return case, run_study(case, samples=200, seed=3, jobs=1, margins=False)


def test_high_frequency_gain_of_the_lead_lag() -> None:
    # |Kff| lead / lag of the wash-water design: 3 %/(m3/h) x 45 s / 30 s = 4.5 %/(m3/h)
    ff = design_loop(load_case(demo_case_path("wash-water-heater"))).feedforward
    assert (ff.gain, ff.lead, ff.lag) == pytest.approx((3.0, 45.0, 30.0))
    assert high_frequency_gain(ff) == pytest.approx(4.5)


def test_noisy_lead_lag_travel_is_explained_with_the_remedy(wash_water) -> None:
    case, result = wash_water
    assert case.sensor.noise_std > 0 and _travel_ratio(result) > TRAVEL_RATIO
    summary = summarize_study(result, (50.0, 90.0))
    [warning] = summary["warnings"]
    suggested = suggested_input_filter(result.design.feedforward, case.simulation.step)
    assert "transmitter noise" in warning and "lead-lag" in warning
    assert f"input_filter = {suggested:.3g} {case.time_unit}" in warning
    assert "%/(m3/h)" in warning and "IAE" in warning


def test_the_suggested_filter_cuts_the_travel_and_costs_iae(wash_water) -> None:
    case, result = wash_water
    suggested = suggested_input_filter(result.design.feedforward, case.simulation.step)
    filtered_case = dataclasses.replace(case, feedforward=dataclasses.replace(
        case.feedforward, input_filter=suggested))
    filtered = run_study(filtered_case, samples=200, seed=3, jobs=1, margins=False)
    assert _travel_ratio(filtered) < 0.5 * _travel_ratio(result)
    assert noise_travel_warning(filtered) is None  # below twice the feedback-only travel
    iae = [float(np.median(r.metrics["iae"][:, 1])) for r in (result, filtered)]
    assert iae[1] > iae[0]  # the filter slows the feedforward: its cost in IAE
    assert iae[1] < float(np.median(filtered.metrics["iae"][:, 0]))  # still better than fb


def test_no_transmitter_noise_no_warning() -> None:
    case = load_case(demo_case_path("syrup-dilution"))
    assert case.sensor.noise_std == 0 and not any(
        p.key == "sensor.noise_std" for p in case.uncertainty)
    result = run_study(case, samples=50, seed=1, jobs=1, margins=False)
    assert noise_travel_warning(result) is None
    assert summarize_study(result, (50.0,))["warnings"] == []


def test_filter_trial_measures_the_cost_on_the_same_plants(wash_water) -> None:
    case, result = wash_water  # 200 samples: the trial uses exactly these plants
    trial = filter_trial(result, samples=500, jobs=1)
    assert trial is not None and trial.samples == result.samples
    suggested = suggested_input_filter(result.design.feedforward, case.simulation.step)
    assert trial.input_filter == suggested
    assert trial.iae[0] == pytest.approx(float(np.median(result.metrics["iae"][:, 1])))
    # the filtered design equals a separate study of the case with the filter in [feedforward]
    filtered_case = dataclasses.replace(case, feedforward=dataclasses.replace(
        case.feedforward, input_filter=suggested))
    separate = run_study(filtered_case, samples=result.samples, seed=result.seed, jobs=1,
                         margins=False)
    assert trial.iae[1] == pytest.approx(float(np.median(separate.metrics["iae"][:, 1])))
    assert trial.valve_travel[1] == pytest.approx(
        float(np.median(separate.metrics["valve_travel"][:, 1])))
    text = trial.sentence(result)
    assert "degC*s" in text and "input_filter = 9 s" in text and "%" in text
