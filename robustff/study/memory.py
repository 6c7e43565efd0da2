"""How much memory a study will need, estimated before it starts.

A study keeps, for the whole run, the sampled parameters and every per-sample metric of every
design (the per-chunk simulation state is bounded by the chunk size and small); the summary
then works on copies of a few columns at a time. A large study keeps its metrics in files
instead (:mod:`robustff.study.result_columns`), so only the parameters and a few columns count.
The estimate is deliberately generous (twice what is kept).
"""

from __future__ import annotations

import os

from robustff.case import Case
from robustff.engine.metrics import METRIC_NAMES
from robustff.study.result_columns import spills

__all__ = ["estimated_study_bytes", "available_memory_bytes"]

_BYTES = 8  # float64


def estimated_study_bytes(case: Case, samples: int) -> int:
    """Peak memory of a study of ``samples`` plants, bytes (an upper estimate).

    Parameters
    ----------
    case : Case
        Its uncertain parameters and ``[[design]]`` tables set the per-sample columns.
    samples : int
        Number of perturbed plants.
    """
    arms = 2 + len(case.designs)
    per_sample = _BYTES * (len(case.uncertainty) + 1)          # parameters and the seed
    per_sample += arms                                         # unstable flags
    if not spills(samples, len(METRIC_NAMES), arms):
        per_sample += _BYTES * arms * len(METRIC_NAMES)        # metrics, unless in files
    else:
        per_sample += 4 * _BYTES                               # the columns being summarised
    return int(2 * per_sample * samples + 200e6)


def available_memory_bytes() -> int | None:
    """Memory the system can still give this process, bytes (None where it cannot be read)."""
    try:
        with open("/proc/meminfo", encoding="ascii") as info:
            for line in info:
                if line.startswith("MemAvailable:"):
                    return int(line.split()[1]) * 1024
    except OSError:
        pass
    try:
        return os.sysconf("SC_AVPHYS_PAGES") * os.sysconf("SC_PAGE_SIZE")
    except (OSError, ValueError, AttributeError):
        return None
