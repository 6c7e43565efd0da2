"""The text-UI studio (Textual): edit a case's models and uncertainty, watch the risk move.

Started by ``robustff studio [CASE.toml]``. Only :mod:`robustff.tui.app` and the widget modules
import Textual; :mod:`robustff.tui.editing`, :mod:`robustff.tui.recovery` and
:mod:`robustff.tui.view` are plain Python so they can be tested (and reused) without a terminal.
"""

from __future__ import annotations

__all__: list[str] = []
