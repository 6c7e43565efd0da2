"""Case texts with plants built from balances, for the balance-plant tests."""

from __future__ import annotations

from robustff.case import Case, parse_case

#: The stirred blending tank of Seborg, Edgar and Mellichamp, Process Dynamics and Control,
#: Example 2.1 (rho = 900 kg/m3, V = 2 m3, w1 = 500 kg/min, x1 = 0.4, x2 = 0.75, x = 0.5).
BLENDING = """\
title = "Blending tank"
time_unit = "min"

[process]
model = "blending-tank"
density = 900.0
volume = 2.0
wild_flow = 500.0
wild_composition = 0.4
manipulated_composition = 0.75
outlet_composition = 0.5
pipe_volume = {pipe_volume}
analyzer_dead_time = {analyzer_dead_time}
measured = {measured}
{process_extra}

[feedback]
output_high = 2000.0
{feedback}

[feedforward]
{feedforward}

[simulation]
duration = {duration}
step = {step}
substeps = {substeps}

{events}
{extra}
"""

#: A heated tank of our own invention (water-like liquid, steam at about 2100 kJ/kg).
HEATER = """\
title = "Heated tank"
time_unit = "min"

[process]
model = "heated-tank"
density = 990.0
volume = 1.2
heat_capacity = 4.18
latent_heat = 2100.0
process_flow = 300.0
inlet_temperature = 15.0
outlet_temperature = 60.0
pipe_volume = {pipe_volume}
sensor_dead_time = {analyzer_dead_time}
measured = {measured}
{process_extra}

[feedback]
output_high = 200.0
{feedback}

[feedforward]
{feedforward}

[simulation]
duration = {duration}
step = {step}
substeps = {substeps}

{events}
{extra}
"""


def event(disturbance: str | None, at: float, size: float, kind: str = "disturbance-step",
          duration: float | None = None) -> str:
    """One ``[[event]]`` table."""
    lines = ["[[event]]", f'kind = "{kind}"', f"at = {at!r}", f"size = {size!r}"]
    if disturbance is not None:
        lines.append(f'disturbance = "{disturbance}"')
    if duration is not None:
        lines.append(f"duration = {duration!r}")
    return "\n".join(lines) + "\n"


def balance_case(template: str = BLENDING, *, pipe_volume: float = 0.0,
                 analyzer_dead_time: float = 0.0, measured: str = '["wild_flow"]',
                 feedback: str = "", feedforward: str = 'structure = "none"',
                 duration: float = 40.0, step: float = 0.05, substeps: int = 1,
                 events: str | None = None, extra: str = "", process_extra: str = "") -> Case:
    """A balance-plant case; by default a 40 % drop of the blending tank's wild flow."""
    text = template.format(
        pipe_volume=pipe_volume, analyzer_dead_time=analyzer_dead_time, measured=measured,
        feedback=feedback, feedforward=feedforward, duration=duration, step=step,
        substeps=substeps, process_extra=process_extra,
        events=events if events is not None else event("wild_flow", 2.0, -200.0), extra=extra)
    return parse_case(text)
