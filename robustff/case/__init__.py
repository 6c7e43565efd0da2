"""The case: schema dataclasses, loading with engineer's messages, saving, uncertainty sampling.

``schema`` holds the dataclasses; ``fields`` the small TOML field readers; ``loader`` and
``uncertainty_section`` validate a file into a :class:`Case`; ``writer`` saves one atomically
keeping the user's comments; ``sampling`` draws the perturbed plants from the uncertainty table.
"""

from __future__ import annotations

from robustff.case.loader import load_case, parse_case
from robustff.case.schema import *  # noqa: F403 (the schema's names are the package's face)
from robustff.case.schema import __all__ as _schema_names
from robustff.case.writer import case_to_toml, save_case

__all__ = [*_schema_names, "load_case", "parse_case", "save_case", "case_to_toml"]
