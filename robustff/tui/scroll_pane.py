"""A scroll pane that restyles only itself when it gains or loses focus.

Textual restyles a widget's whole subtree when its focus changes (``Widget.watch_has_focus``).
The studio's focus mark on a pane (``#editor:focus`` in ``studio.tcss``) styles the pane
alone, and the editor holds about 300 widgets: restyling them all took a quarter of a second
at start (the pane takes the first focus) and at every Tab into or out of the pane.
"""

from __future__ import annotations

from textual.containers import VerticalScroll

__all__ = ["ScrollPane"]


class ScrollPane(VerticalScroll):
    """A :class:`~textual.containers.VerticalScroll` whose ``:focus`` rules style only itself
    (no rule of the studio's stylesheet styles a descendant by its pane's focus)."""

    def watch_has_focus(self, _has_focus: bool) -> None:
        self.app.stylesheet.update_nodes([self], animate=True)
