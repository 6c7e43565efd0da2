"""A case whose P90-optimal feedforward gain harms a known share of the plants.

The process and disturbance paths share their lag and dead time and only the disturbance gain
Kd is uncertain (uniform on [KD_LOW, KD_HIGH], nominal KD0), the loop is linear (no output
limit reached, no noise). A static feedforward of gain factor ``g`` then leaves the residual
disturbance gain ``Kd - g KD0``, so every plant's CV with feedforward is its feedback-only CV
times ``(Kd - g KD0) / Kd``: IAE(fbff) = IAE(fb) |Kd - g KD0| / Kd, over any window. Hence

* feedforward makes IAE worse exactly when ``Kd < g KD0 / 2`` (for Kd > 0, g > 0), a harm
  probability of ``(g KD0 / 2 - KD_LOW) / (KD_HIGH - KD_LOW)`` (clipped to [0, 1]);
* IAE(fb) is proportional to Kd, so P90 of IAE(fbff) is proportional to the P90 of
  ``|Kd - g KD0|``, which for the uniform Kd falls as g rises up to the search's bound 1.5:
  the P90-optimal design is g = 1.5, which harms the plants with Kd < 0.75.

Source: superposition for linear systems (Seborg, Edgar, Mellichamp and Doyle, "Process
Dynamics and Control", 4th ed., 2016, ch. 15: perfect compensation when Gf = -Gd/Gp, from
memory); the closed form derived here, as in tests/study/test_designs.py.
"""

from __future__ import annotations

KD0 = 1.0
KD_HIGH = 3.0
#: With KD_LOW = 0.6 the nominal design (g = 1: harm when Kd < 0.5) never harms, g = 1.5 harms
#: (0.75 - 0.6) / 2.4 = 6.25 % of the plants; with KD_LOW = 0.8 neither harms.
KD_LOW_HARMFUL = 0.6
KD_LOW_SAFE = 0.8


def harm_probability(g: float, kd_low: float) -> float:
    """The closed-form probability that gain factor ``g`` makes IAE worse (fraction)."""
    return min(max((g * KD0 / 2.0 - kd_low) / (KD_HIGH - kd_low), 0.0), 1.0)


def matched_case_text(*, title: str, kd0: float, kd_low: float, kd_high: float,
                      duration: float, event_at: float, study: str) -> str:
    """Matched process and disturbance paths, only the disturbance gain uncertain (TOML text;
    ``study`` is the body of the ``[study]`` table)."""
    return f"""\
title = "{title}"
time_unit = "s"

[process]
model = "fopdt"
gain = 1.0
time_constant = 10.0
dead_time = 2.0

[disturbance]
model = "fopdt"
gain = {kd0}
time_constant = 10.0
dead_time = 2.0

[feedback]
output_low = -1000.0
output_high = 1000.0
output_bias = 0.0

[feedforward]
structure = "static"
gain_factor = 1.0

[simulation]
duration = {duration}
step = 0.5

[[event]]
kind = "disturbance-step"
at = {event_at}
size = 1.0

[uncertainty]
"disturbance.gain" = {{ uniform = [{kd_low}, {kd_high}] }}

[study]
{study}
"""


def harm_case_text(kd_low: float = KD_LOW_HARMFUL, max_harm: float = 0.03,
                   samples: int = 200, min_improvement: float = 0.2) -> str:
    """The case as TOML text (a fictional mixing loop)."""
    return matched_case_text(
        title="Blend tank, inlet flow uncertain (fictional)", kd0=KD0, kd_low=kd_low,
        kd_high=KD_HIGH, duration=100.0, event_at=5.0,
        study=f'samples = {samples}\nseed = 5\nsampling = "random"',
    ) + f"""
[recommendation]
max_harm = {max_harm}
min_improvement = {min_improvement}
"""
