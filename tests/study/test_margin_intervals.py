"""Each margin percentile in summary.json carries its 95 % interval, computed as the metrics'
intervals are (order statistics of the stable samples)."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from robustff.case import load_case
from robustff.stats import summarize
from robustff.study import run_study
from robustff.study.summary import summarize_study

DEMO = Path(__file__).resolve().parents[2] / "cases" / "surge-tank-level.toml"


def test_margin_intervals_match_the_metric_intervals_and_bracket_the_percentile():
    result = run_study(load_case(DEMO), samples=150, seed=3, jobs=1)
    margins = summarize_study(result, (10, 50, 90))["margins"]
    for name in ("phase_margin", "ms"):
        values = getattr(result.margins, name)[result.margins.stable]
        assert np.isfinite(values).all()  # this loop always has both crossovers
        reference = summarize(values, (10, 50, 90)).to_dict()
        for key in ("p10", "p50", "p90"):
            low, high = margins[name][f"{key}_ci95"]
            assert [low, high] == reference[f"{key}_ci95"]
            assert low <= margins[name][key] <= high
