"""Case texts shared by the case-loader and check-command tests: a minimal valid case and one
malformed variant per validation rule."""

from __future__ import annotations

MINIMAL = """\
title = "Test loop"
time_unit = "s"

[process]
model = "fopdt"
gain = 2.0
time_constant = 10.0
dead_time = 2.0

[disturbance]
model = "fopdt"
gain = 1.0
time_constant = 5.0
dead_time = 3.0

[simulation]
duration = 100.0
step = 0.5

[[event]]
kind = "disturbance-step"
at = 5.0
size = 1.0
"""

# One malformed case per rule: (change to MINIMAL, key path that must be named).
_UNC = "\n[uncertainty]\n"
MALFORMED: dict[str, tuple[str, str]] = {
    "unknown top key": ("titel = 'x'\n" + MINIMAL, "titel"),
    "unknown key in table": (MINIMAL.replace("dead_time = 2.0", "dead_time = 2.0\ndeadtime = 1"),
                             "process.deadtime"),
    "missing key": (MINIMAL.replace("dead_time = 2.0\n", ""), "process.dead_time"),
    "missing table": (MINIMAL.replace("[simulation]", "[simul]"), "simulation"),
    "bool is not a number": (MINIMAL.replace("gain = 2.0", "gain = true"), "process.gain"),
    "string is not a number": (MINIMAL.replace("gain = 2.0", 'gain = "2"'), "process.gain"),
    "negative time constant": (MINIMAL.replace("time_constant = 10.0", "time_constant = -1.0"),
                               "process.time_constant"),
    "negative dead time": (MINIMAL.replace("dead_time = 3.0", "dead_time = -0.5"),
                           "disturbance.dead_time"),
    "zero process gain": (MINIMAL.replace("gain = 2.0", "gain = 0.0"), "process.gain"),
    "unknown model": (MINIMAL.replace('model = "fopdt"', 'model = "foptd"', 1), "process.model"),
    "ipdt has no time constant": (MINIMAL.replace('model = "fopdt"', 'model = "ipdt"', 1),
                                  "process.time_constant"),
    "low above high": (MINIMAL + _UNC + '"process.time_constant" = { uniform = [12.0, 8.0] }',
                       "uncertainty.process.time_constant"),
    "parameter the model lacks": (MINIMAL + _UNC + '"process.time_constant_2" = { relative = 0.1 }',
                                  "uncertainty.process.time_constant_2"),
    "unknown block": (MINIMAL + _UNC + '"valve.gain" = { relative = 0.1 }',
                      "uncertainty.valve.gain"),
    "normal time constant without clip": (
        MINIMAL + _UNC + '"process.time_constant" = { normal = [10.0, 2.0] }',
        "uncertainty.process.time_constant.normal"),
    "relative of 1 or more on a dead time": (
        MINIMAL + _UNC + '"process.dead_time" = { relative = 1.2 }',
        "uncertainty.process.dead_time.relative"),
    "uniform reaching a negative dead time": (
        MINIMAL + _UNC + '"process.dead_time" = { uniform = [-1.0, 3.0] }',
        "uncertainty.process.dead_time.uniform"),
    "lognormal on a negative process gain": (
        MINIMAL.replace("gain = 2.0", "gain = -2.0") + _UNC
        + '"process.gain" = { lognormal = [2.0, 1.2] }', "uncertainty.process.gain.lognormal"),
    "process gain distribution crossing zero": (
        MINIMAL + _UNC + '"process.gain" = { uniform = [-1.0, 3.0] }',
        "uncertainty.process.gain.uniform"),
    "lognormal factor not above 1": (
        MINIMAL + _UNC + '"process.time_constant" = { lognormal = [10.0, 0.5] }',
        "uncertainty.process.time_constant.lognormal"),
    "clip on a uniform": (
        MINIMAL + _UNC + '"process.time_constant" = { uniform = [8.0, 12.0], clip = [0.0, 20.0] }',
        "uncertainty.process.time_constant.clip"),
    "two distributions": (
        MINIMAL + _UNC + '"process.time_constant" = { uniform = [8.0, 12.0], relative = 0.1 }',
        "uncertainty.process.time_constant"),
    "duplicate spelling": (
        MINIMAL + _UNC + '"process.gain" = { relative = 0.1 }\n[uncertainty.process]\n'
        "gain = { relative = 0.2 }", "uncertainty.process.gain"),
    "manual tuning without kc": (MINIMAL + '[feedback]\ntuning = "manual"\nti = 5.0\n',
                                 "feedback.kc"),
    "manual pid without td": (MINIMAL + '[feedback]\nform = "pid"\ntuning = "manual"\n'
                              "kc = 1.0\nti = 5.0\n", "feedback.td"),
    "output limits reversed": (MINIMAL + "[feedback]\noutput_low = 100.0\noutput_high = 0.0\n",
                               "feedback.output_low"),
    "bias outside limits": (MINIMAL + "[feedback]\noutput_bias = 120.0\n", "feedback.output_bias"),
    "non-positive step": (MINIMAL.replace("step = 0.5", "step = 0.0"), "simulation.step"),
    "duration not above step": (MINIMAL.replace("duration = 100.0", "duration = 0.5"),
                                "simulation.duration"),
    "too many steps": (MINIMAL.replace("step = 0.5", "step = 0.0001"), "simulation.step"),
    "no event": (MINIMAL.split("[[event]]")[0], "event"),
    "event as a single table": (MINIMAL.replace("[[event]]", "[event]"), "event"),
    "event outside window": (MINIMAL.replace("at = 5.0", "at = 100.0"), "event[1].at"),
    "ramp without duration": (MINIMAL.replace('"disturbance-step"', '"disturbance-ramp"'),
                              "event[1].duration"),
    "noise without time constant": (MINIMAL.replace('"disturbance-step"', '"disturbance-noise"'),
                                    "event[1].time_constant"),
    "duration on a step": (MINIMAL + "duration = 3.0\n", "event[1].duration"),
    "correlation with a certain parameter": (
        MINIMAL + _UNC + '"process.gain" = { relative = 0.1 }\n[[uncertainty.correlation]]\n'
        'first = "process.gain"\nsecond = "process.dead_time"\nrank_correlation = 0.5\n',
        "uncertainty.correlation[1].second"),
    "rank correlation of one": (
        MINIMAL + _UNC + '"process.gain" = { relative = 0.1 }\n'
        '"process.dead_time" = { uniform = [1.0, 3.0] }\n[[uncertainty.correlation]]\n'
        'first = "process.gain"\nsecond = "process.dead_time"\nrank_correlation = 1.0\n',
        "uncertainty.correlation[1].rank_correlation"),
    "inconsistent correlations": (
        MINIMAL + _UNC + '"process.gain" = { relative = 0.1 }\n'
        '"process.dead_time" = { uniform = [1.0, 3.0] }\n'
        '"disturbance.gain" = { relative = 0.1 }\n'
        + "".join(f'[[uncertainty.correlation]]\nfirst = "{a}"\nsecond = "{b}"\n'
                  f"rank_correlation = {r}\n" for a, b, r in (
                      ("process.gain", "process.dead_time", 0.9),
                      ("process.gain", "disturbance.gain", 0.9),
                      ("process.dead_time", "disturbance.gain", -0.9))),
        "uncertainty.correlation"),
    "too few samples": (MINIMAL + "[study]\nsamples = 5\n", "study.samples"),
    "too many samples": (MINIMAL + "[study]\nsamples = 20_000_000\n", "study.samples"),
    "fractional samples": (MINIMAL + "[study]\nsamples = 2.5\n", "study.samples"),
    "negative seed": (MINIMAL + "[study]\nseed = -1\n", "study.seed"),
    "unknown sampling": (MINIMAL + '[study]\nsampling = "grid"\n', "study.sampling"),
    "unknown time unit": (MINIMAL.replace('time_unit = "s"', 'time_unit = "hours"'), "time_unit"),
    "unknown structure": (MINIMAL + '[feedforward]\nstructure = "dynamic"\n',
                          "feedforward.structure"),
    "gain factor not finite": (MINIMAL + "[feedforward]\ngain_factor = inf\n",
                               "feedforward.gain_factor"),
    "lead on a static feedforward": (MINIMAL + '[feedforward]\nstructure = "static"\nlead = 2.0\n',
                                     "feedforward.lead"),
    "negative sensor noise": (MINIMAL + "[sensor]\nnoise_std = -1.0\n", "sensor.noise_std"),
    "signal without a name": (MINIMAL + '[signals.controlled]\nname = ""\n',
                              "signals.controlled.name"),
    "unreadable TOML": (MINIMAL.replace("gain = 2.0", "gain = = 2.0"), "line 6"),
}
