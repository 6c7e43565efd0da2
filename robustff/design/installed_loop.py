"""The loop as installed, in words: the valve and the secondary (flow) loop of a case.

One home for the lines ``robustff check`` prints (and the report and studio can show), with
units on every value.
"""

from __future__ import annotations

from robustff.case import Case
from robustff.design.tuning import LoopDesign

__all__ = ["installed_loop_lines"]


def installed_loop_lines(case: Case, design: LoopDesign) -> list[str]:
    """Lines describing the valve and the secondary loop; empty for an ideal actuator."""
    lines: list[str] = []
    unit = case.time_unit
    valve = case.valve
    if valve is not None:
        shape = valve.characteristic
        if shape == "equal-percentage":
            shape += f", rangeability {valve.rangeability:g}"
        if shape == "installed":
            points = ", ".join(f"{p:g} % -> {f:g}" for p, f in valve.installed)
            shape += f" characteristic ({points})"
        stem = []
        if valve.stiction_s:
            stem.append(f"stiction S = {valve.stiction_s:g} %, J = {valve.stiction_j:g} % of "
                        "travel")
        if valve.deadband:
            stem.append(f"deadband {valve.deadband:g} % of travel")
        if valve.rate_limit:
            stem.append(f"rate limit {valve.rate_limit:g} %/{unit}")
        if valve.time_constant:
            stem.append(f"actuator lag {valve.time_constant:g} {unit}")
        lines.append(f"  valve: {shape}; " + ("; ".join(stem) if stem else "no stem effects"))
        lines.append("    the process gain holds at the nominal position (valve slope 1 "
                     "there); the margins, the feedforward design and the frequency view use that "
                     "linearisation with the actuator lag (stiction, deadband and rate limit "
                     "only in the simulation)")
    spec, inner = case.secondary, design.secondary
    if spec is not None and inner is not None:
        flow = case.signals.output.unit or "flow unit"
        scan = case.simulation.step / spec.scans_per_primary
        lines.append(f"  secondary loop (secondary output % -> {case.signals.output.name}): "
                     f"{spec.model.describe(unit)}; gain in {flow} per %")
        lines.append(f"    PI ({inner.rule}): Kc = {inner.kc:.4g} %/({flow}), Ti = "
                     f"{inner.ti:.4g} {unit}; output {inner.output_low:g} .. "
                     f"{inner.output_high:g} %, bias {inner.output_bias:g} %; scan {scan:g} "
                     f"{unit}")
        lines.append("    the margins, the feedforward design and the frequency view take its "
                     "closed loop, linearised at the nominal point, in series with the process")
    return ["", "Installed loop:", *lines] if lines else []
