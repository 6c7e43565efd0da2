"""The whole-case review behind ``robustff check`` and ``robustff run``: designs that cannot run
are errors naming the key, suspicious ones are warnings naming the key."""

from __future__ import annotations

import math

import pytest
from case_texts import MINIMAL

from robustff.case import load_case, parse_case
from robustff.demo import DEMO_CASES, demo_case_path
from robustff.design.case_review import margin_line, review_case

_MANUAL = "\n[feedback]\ntuning = 'manual'\nkc = {kc}\nti = {ti}\n"
_UNC = "\n[uncertainty]\n"

#: (change to MINIMAL, key that must be named as an error)
CANNOT_RUN = {
    "gain 1e-320 gives Kc = inf": (MINIMAL.replace("gain = 2.0", "gain = 1e-320"),
                                   "process.gain"),
    "gain 1e308 gives Kc = 0": (MINIMAL.replace("gain = 2.0", "gain = 1e308"), "process.gain"),
    "gain 1e307 overflows the output range": (
        MINIMAL.replace("gain = 2.0", "gain = 1e307")
        + "\n[feedback]\nclosed_loop_time = 1e-300\n", "process.gain"),
    "feedforward gain inf": (
        MINIMAL.replace("gain = 1.0", "gain = 1e300").replace("gain = 2.0", "gain = 1e-10")
        + "\n[feedforward]\nstructure = 'static'\n", "disturbance.gain"),
}

#: (change to MINIMAL, key that must be named in a warning)
SUSPICIOUS = {
    "manual PI far too aggressive (GM ~ 0.06)": (MINIMAL + _MANUAL.format(kc=80.0, ti=1.0),
                                                 "feedback"),
    "manual PI with GM below 2": (MINIMAL + _MANUAL.format(kc=2.5, ti=10.0), "feedback"),
    "dead time longer than the window": (MINIMAL.replace("dead_time = 2.0", "dead_time = 150.0"),
                                         "process.dead_time"),
    "dead-time spread far beyond the window": (
        MINIMAL + _UNC + '"process.dead_time" = { uniform = [1.0, 5000.0] }\n',
        "uncertainty.process.dead_time"),
    "nominal outside its own range": (
        MINIMAL + _UNC + '"process.gain" = { uniform = [3.0, 4.0] }\n', "uncertainty.process.gain"),
    "nominal outside a triangular range": (
        MINIMAL + _UNC + '"process.time_constant" = { triangular = [1.0, 2.0, 3.0] }\n',
        "uncertainty.process.time_constant"),
    "ramp past the end of the window": (
        MINIMAL + "\n[[event]]\nkind = 'disturbance-ramp'\nat = 80.0\nsize = 1.0\n"
        "duration = 50.0\n",
        "event[2].duration"),
    "step does not divide the duration": (MINIMAL.replace("step = 0.5", "step = 0.3"),
                                          "simulation.step"),
    "NUL in the title": (MINIMAL.replace('title = "Test loop"', 'title = "Test\\u0000 loop"'),
                         "title"),
}


@pytest.mark.parametrize("name", CANNOT_RUN)
def test_designs_that_cannot_run_are_errors_naming_the_key(name: str) -> None:
    text, key = CANNOT_RUN[name]
    review = review_case(parse_case(text))
    assert not review.ok
    assert key in [finding.key for finding in review.errors], review.errors


@pytest.mark.parametrize("name", SUSPICIOUS)
def test_suspicious_designs_are_warnings_naming_the_key(name: str) -> None:
    text, key = SUSPICIOUS[name]
    review = review_case(parse_case(text))
    assert review.ok, review.errors
    assert key in [finding.key for finding in review.warnings], review.warnings


@pytest.mark.parametrize("name", DEMO_CASES)
def test_demo_cases_have_no_findings(name: str) -> None:
    review = review_case(load_case(demo_case_path(name)))
    # the record-driven demo's historian export has a drop-out on purpose (it shows the note)
    warnings = [w for w in review.warnings if not ("no rows from" in w.message
                                                   and w.key.endswith(".file"))]
    assert review.errors == () and warnings == []
    assert review.nominal_margins is not None and bool(review.nominal_margins.stable[0])


def test_minimal_case_is_clean() -> None:
    review = review_case(parse_case(MINIMAL))
    assert review.errors == () and review.warnings == ()


def test_manual_gain_margin_against_the_crossover_by_hand() -> None:
    # FOPDT K = 2, tau = 10 s, theta = 2 s with an integral-free check: a P-only limit is the
    # classical ultimate gain. With a PI of Ti = 1e6 s (integral action negligible), the phase
    # crossover w180 solves atan(w tau) + w theta = pi and Ku = sqrt(1 + (w tau)^2) / K
    # (Ziegler and Nichols 1942, ultimate gain of a FOPDT loop; from memory). A controller gain
    # of 0.8 Ku leaves a gain margin of 1.25 -> warned; 0.4 Ku leaves 2.5 -> no margin warning.
    lo, hi = 0.01, 1.0
    for _ in range(200):
        mid = 0.5 * (lo + hi)
        lo, hi = (mid, hi) if math.atan(mid * 10.0) + mid * 2.0 < math.pi else (lo, mid)
    ku = math.sqrt(1 + (lo * 10.0) ** 2) / 2.0
    aggressive = review_case(parse_case(MINIMAL + _MANUAL.format(kc=0.8 * ku, ti=1e6)))
    continuous = aggressive.nominal_continuous_margins
    assert continuous is not None
    assert float(continuous.gain_margin[0]) == pytest.approx(1.25, rel=1e-3)
    # The warning is judged on the loop as simulated (0.5 s scan period, output held), which
    # the hold's half sample of delay leaves with a little less margin, as robustff run does.
    simulated = aggressive.nominal_margins
    assert simulated is not None and 1.0 < float(simulated.gain_margin[0]) < 1.25
    assert any(f"gain margin {float(simulated.gain_margin[0]):.2f} < 2" in f.message
               for f in aggressive.warnings)
    calm = review_case(parse_case(MINIMAL + _MANUAL.format(kc=0.4 * ku, ti=1e6)))
    assert not any("gain margin" in f.message for f in calm.warnings)


def test_margin_line_carries_units() -> None:
    case = parse_case(MINIMAL)
    review = review_case(case)
    assert review.nominal_margins is not None
    line = margin_line(review.nominal_margins, case.time_unit)
    assert "phase margin" in line and " deg" in line and "delay margin" in line
    assert line.split("delay margin ")[1].split(",")[0].endswith(" s")
