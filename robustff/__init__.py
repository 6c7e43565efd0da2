"""robustff: Monte Carlo robustness studies of feedforward compensation for process control loops.

Results are model-based estimates. Commission any change under your site's management-of-change
procedure, with operations present, and defer to local codes and licensed engineering practice.
"""

from __future__ import annotations

__version__ = "0.1.0"

CAUTION = (
    "Caution: these are model-based estimates, not a guarantee. Commission any change under your "
    "site's management-of-change procedure, with operations present; local codes and licensed "
    "engineering practice prevail."
)

__all__ = ["__version__", "CAUTION"]
