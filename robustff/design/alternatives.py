"""Named sets of alternative feedforward designs a study can add without editing the case.

The standard ladder answers "how aggressive should the feedforward be": the three structures
(static, lead-lag, lead-lag with delay), each at the full model-based gain and detuned to
``DETUNED_GAIN_FACTOR`` of it, all simulated on the same plants as the case's own design.
"""

from __future__ import annotations

import dataclasses

from robustff.case import Case, DesignSpec, FeedforwardSpec
from robustff.errors import DesignError

__all__ = ["DESIGN_SETS", "DETUNED_GAIN_FACTOR", "standard_designs", "with_design_set"]

#: Detuned gain factor of the standard ladder (common practice, no source: detuning the
#: feedforward gain to 0.7-0.9 limits the harm of an overestimated disturbance gain).
DETUNED_GAIN_FACTOR = 0.8
#: Design sets known to ``--designs``.
DESIGN_SETS: tuple[str, ...] = ("standard",)

_LADDER_STRUCTURES = ("static", "lead-lag", "lead-lag-delay")


def standard_designs() -> tuple[DesignSpec, ...]:
    """The standard ladder: each structure at gain factor 1 and at :data:`DETUNED_GAIN_FACTOR`.

    Returns
    -------
    tuple of DesignSpec
        Named ``"static"``, ``"static-0.8"``, ``"lead-lag"``, ... in that order; lead, lag
        and delay come from the design rule (no explicit values).
    """
    designs = []
    for structure in _LADDER_STRUCTURES:
        for factor in (1.0, DETUNED_GAIN_FACTOR):
            name = structure if factor == 1.0 else f"{structure}-{factor:g}"
            designs.append(DesignSpec(name, FeedforwardSpec(structure, factor)))
    return tuple(designs)


def with_design_set(case: Case, design_set: str) -> Case:
    """The case with a named set of designs appended to its own ``[[design]]`` tables.

    Parameters
    ----------
    case : Case
    design_set : str
        One of :data:`DESIGN_SETS`.

    Returns
    -------
    Case

    Raises
    ------
    DesignError
        For an unknown set, or a case design whose name the set also uses.
    """
    if design_set not in DESIGN_SETS:
        raise DesignError(f"--designs {design_set}: unknown design set "
                          f"(known: {', '.join(DESIGN_SETS)})")
    added = standard_designs()
    taken = {design.name for design in case.designs}
    clash = [design.name for design in added if design.name in taken]
    if clash:
        raise DesignError(f"--designs {design_set}: the case already has a design named "
                          f"{clash[0]!r}; rename it in the case file")
    return dataclasses.replace(case, designs=case.designs + added)
