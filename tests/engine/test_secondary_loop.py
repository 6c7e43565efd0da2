"""A secondary (flow) loop inside the primary loop.

Cascade control: a secondary loop much faster than the primary passes its setpoint through
almost unchanged, so the primary loop behaves as if it drove the flow directly (e.g. Seborg,
Edgar, Mellichamp and Doyle, "Process Dynamics and Control", 4th ed., 2016, ch. 16: the inner
loop should be 3 to 10 times faster, and its closed loop approaches unity as it gets faster).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from robustff.case import parse_case
from robustff.errors import CaseError
from robustff.study import run_study

ROOT = Path(__file__).resolve().parents[2]
DEMO = (ROOT / "cases" / "wash-water-heater.toml").read_text()


def _secondary(tau: float, scans: int) -> str:
    # Unit gain (1 flow unit per %), the valve's range and bias as the primary output's.
    return f"""
[secondary]
model = "fopdt"
gain = 1.0
time_constant = {tau}
dead_time = 0.0
closed_loop_time = {tau / 5.0}
output_low = 0.0
output_high = 100.0
output_bias = 45.0
scans_per_primary = {scans}
"""


def _percentiles(case_text: str) -> dict[str, np.ndarray]:
    result = run_study(parse_case(case_text), samples=300, jobs=1, margins=False)
    return {name: np.nanpercentile(result.metrics[name], [10, 50, 90], axis=0)
            for name in ("iae", "peak_deviation", "valve_travel")}


def test_a_fast_secondary_loop_leaves_the_results_of_the_direct_loop():
    substepped = DEMO.replace("step = 0.5", "step = 0.5\nsubsteps = 20")
    direct = _percentiles(substepped)
    differences = []
    for ratio in (10.0, 100.0):  # secondary time constant = process lag (45 s) / ratio
        inner = _percentiles(substepped + _secondary(45.0 / ratio, 20))
        differences.append(max(float(np.max(np.abs(inner[n] / direct[n] - 1.0)))
                               for n in direct))
    # The inner loop adds a lag of about its closed-loop time, so the difference shrinks about
    # in proportion to it: a tenfold faster secondary, about a tenfold smaller difference.
    assert differences[1] < 0.02, differences
    assert differences[1] < differences[0] / 5.0, differences


def test_a_slow_secondary_loop_costs_performance():
    substepped = DEMO.replace("step = 0.5", "step = 0.5\nsubsteps = 4")
    direct = _percentiles(substepped)
    slow = _percentiles(substepped + _secondary(15.0, 1))
    # A lag of a third of the process lag inside the loop delays the feedforward's action
    # (its timing was designed for the direct loop) and the feedback's: at P50 neither arm
    # gains, and the feedforward arm loses most.
    fb, fbff = 0, 1
    assert slow["iae"][1, fb] > direct["iae"][1, fb]
    assert slow["iae"][1, fbff] > 1.1 * direct["iae"][1, fbff]


@pytest.mark.parametrize(("extra", "key"), [
    ("[secondary]\ngain = 1.0\n", "secondary.model"),
    ('[secondary]\nmodel = "fopdt"\ngain = 0.0\ntime_constant = 1.0\ndead_time = 0.0\n',
     "secondary.gain"),
    ('[secondary]\nmodel = "fopdt"\ngain = 1.0\ntime_constant = 1.0\ndead_time = 0.0\n'
     'tuning = "manual"\n', "secondary.kc"),
    ('[secondary]\nmodel = "fopdt"\ngain = 1.0\ntime_constant = 1.0\ndead_time = 0.0\n'
     'scans_per_primary = 3\n', "secondary.scans_per_primary"),
    ('[secondary]\nmodel = "fopdt"\ngain = 1.0\ntime_constant = 1.0\ndead_time = 0.0\n'
     'output_bias = 120.0\n', "secondary.output_bias"),
    ('[uncertainty]\n"secondary.gain" = { relative = 0.2 }\n', "uncertainty"),
])
def test_bad_secondary_tables_are_refused_naming_the_key(extra, key):
    with pytest.raises(CaseError) as info:
        parse_case(DEMO.split("[uncertainty]")[0] + "\n" + extra)
    assert key in str(info.value)


def test_secondary_parameters_can_be_uncertain():
    text = DEMO.replace("[uncertainty]", _secondary(2.0, 1) + "\n[uncertainty]\n"
                        '"secondary.time_constant" = { uniform = [1.0, 3.0] }\n', 1)
    case = parse_case(text)
    assert "secondary.time_constant" in {p.key for p in case.uncertainty}
    result = run_study(case, samples=50, jobs=1, margins=False)
    assert np.isfinite(result.metrics["iae"]).all()


def test_the_secondary_loop_saves_and_reloads():
    from robustff.case import case_to_toml

    case = parse_case(DEMO + _secondary(2.0, 1))
    again = parse_case(case_to_toml(case))
    assert again.secondary == case.secondary
    manual = parse_case(DEMO + '[secondary]\nmodel = "fopdt"\ngain = 2.0\ntime_constant = 1.0\n'
                        'dead_time = 0.1\ntuning = "manual"\nkc = 0.3\nti = 1.2\n')
    assert parse_case(case_to_toml(manual)).secondary == manual.secondary
