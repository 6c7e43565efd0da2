"""The simulation's stability verdict with the valve's actuator lag and a secondary loop.

The stability probe runs the loop linearised at the nominal position (actuator lag included,
the secondary loop linear), and the exact sampled loop's margins, which include both, confirm
its unstable samples.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from robustff.case import Case, Event, FeedbackSpec, FeedforwardSpec, SecondarySpec, SimulationSpec
from robustff.design.margins import loop_margins
from robustff.design.tuning import design_loop
from robustff.engine import _confirmed_unstable, build_scenario, nominal_batch, simulate
from robustff.plant.models import TransferModel as Model
from robustff.plant.valve import ValveModel


def _case(kc: float, ti: float, valve: ValveModel | None = None,
          secondary: SecondarySpec | None = None, substeps: int = 1) -> Case:
    feedback = FeedbackSpec(tuning="manual", kc=kc, ti=ti, output_low=-1e6, output_high=1e6,
                            output_bias=0.0)
    return Case("installed loop", "s", Model("fopdt", 1.0, 10.0, 0.0, 1.0),
                Model("fopdt", 1.0, 10.0, 0.0, 1.0), feedback, FeedforwardSpec("none"),
                SimulationSpec(400.0, 0.1, substeps), (Event("disturbance-step", 5.0, 1.0),),
                valve=valve, secondary=secondary)


def _verdicts(case: Case) -> tuple[bool, bool, bool]:
    """(simulation unstable, sampled loop stable, continuous loop stable) of the nominal plant."""
    design = design_loop(case)
    result = simulate(nominal_batch(case), design, build_scenario(case, design, 0.01))
    sampled = loop_margins(nominal_batch(case), design.feedback, sample_time=case.simulation.step,
                           secondary=design.secondary)
    plain = loop_margins(nominal_batch(case), design.feedback, secondary=design.secondary)
    return bool(result.loop_unstable[0]), bool(sampled.stable[0]), bool(plain.stable[0])


def test_an_actuator_lag_that_destabilises_the_loop_is_seen_by_margins_and_simulation():
    # 1 e^{-s}/(10 s + 1) under PI Kc = 12, Ti = 8: stable with an ideal actuator (gain
    # margin about 1.3, python-control-checked in tests/design/test_installed_margins.py),
    # unstable with a 2 s actuator lag on a linear valve.
    assert _verdicts(_case(12.0, 8.0)) == (False, True, True)
    assert _verdicts(_case(12.0, 8.0, ValveModel(time_constant=2.0))) == (True, False, False)
    # the same loop with a mild gain stays stable with the lag
    assert _verdicts(_case(4.0, 8.0, ValveModel(time_constant=2.0))) == (False, True, True)


def _cascade(kc: float, scans: int, tau_s: float = 0.3) -> Case:
    # Flow path 2 e^{-0.05 s}/(tau_s s + 1) under PI Kc_s = 0.5, Ti_s = tau_s (closed-loop time
    # Ti_s/(Kc_s K_s) = tau_s), actuator lag 0.1 s, secondary scan 0.1/scans s; the primary
    # dead time is 1 s.
    secondary = SecondarySpec(Model("fopdt", 2.0, tau_s, 0.0, 0.05), "manual", kc=0.5, ti=tau_s,
                              output_low=-1e6, output_high=1e6, output_bias=0.0,
                              scans_per_primary=scans)
    return _case(kc, 8.0, ValveModel(time_constant=0.1), secondary, substeps=4)


@pytest.mark.parametrize("scans", [1, 4])
@pytest.mark.parametrize("tau_s", [0.3, 2.0])
def test_the_secondary_loop_enters_the_stability_limit(scans, tau_s):
    # The sampled margins take the secondary closed loop continuous, without its own scan (an
    # approximation). Stated range: a secondary closed-loop time up to twice the primary's
    # dead time and a secondary scan of a scan period or less; the predicted stability limit
    # Kc * GM then holds within 5 % in the simulation (linear probe, secondary scan h/scans;
    # measured: within 2.5 %).
    base = _cascade(4.0, scans, tau_s)
    design = design_loop(base)
    margins = loop_margins(nominal_batch(base), design.feedback, sample_time=0.1,
                           secondary=design.secondary)
    limit = 4.0 * float(margins.gain_margin[0])
    # Without the secondary loop the limit would be noticeably higher: the inner loop matters.
    ideal = loop_margins(nominal_batch(_case(4.0, 8.0)), design_loop(_case(4.0, 8.0)).feedback,
                         sample_time=0.1)
    assert 4.0 * float(ideal.gain_margin[0]) > 1.25 * limit
    below = _verdicts(_cascade(0.95 * limit, scans, tau_s))
    above = _verdicts(_cascade(1.05 * limit, scans, tau_s))
    assert below[0] is False and below[1] is True
    assert above[0] is True and above[1] is False


def test_confirmation_applies_with_a_secondary_loop():
    # A stable cascade whose window (6 s) is far shorter than its recovery (primary lag 10 s,
    # Ti 8 s, low gain): the probe's error still grows in the last quarter, so the probe flags
    # it; the sampled loop's margins, which include the secondary loop, find it stable, and
    # that verdict stands, as without a secondary loop.
    case = dataclasses.replace(_cascade(0.5, 2), simulation=SimulationSpec(6.0, 0.1, 4))
    design = design_loop(case)
    scenario = build_scenario(case, design, 0.01)
    batch = nominal_batch(case)
    flagged = np.array([True])
    assert not _confirmed_unstable(batch, design, scenario, flagged)[0]
    unstable, sampled, _ = _verdicts(case)
    assert sampled and not unstable
