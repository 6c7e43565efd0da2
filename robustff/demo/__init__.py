"""Demo cases shipped with robustff (fictional plants; copies of the repository's ``cases/``).

Each case file starts with a comment describing the plant it models.
"""

from __future__ import annotations

from pathlib import Path

from robustff.errors import CaseError

__all__ = ["DEMO_CASES", "demo_case_path"]

#: Names of the demo cases (file stems).
DEMO_CASES: tuple[str, ...] = (
    "wash-water-heater", "syrup-dilution", "surge-tank-level", "steam-heater-sticky-valve",
    "pasteuriser-tempering-tank", "brine-makeup-tank", "rinse-water-heater",
)


def demo_case_path(name: str = "wash-water-heater") -> Path:
    """Path of a demo case file inside the installed package.

    Parameters
    ----------
    name : str
        One of :data:`DEMO_CASES` (with or without ``.toml``).

    Raises
    ------
    CaseError
        If ``name`` is not a demo case.
    """
    stem = name.removesuffix(".toml")
    if stem not in DEMO_CASES:
        raise CaseError(f"no demo case {name!r}; choose one of {', '.join(DEMO_CASES)}")
    return Path(__file__).with_name(f"{stem}.toml")
