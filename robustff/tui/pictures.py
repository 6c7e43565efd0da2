"""The picture pane: IAE-ratio histogram and CV band plot, redrawn to the pane's width."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.containers import Vertical
from textual.events import Resize
from textual.widgets import Static

from robustff.tui.charts import band_chart, histogram_chart
from robustff.tui.view import StudyView

__all__ = ["PicturesPane"]

_HISTOGRAM_HEIGHT = 11
_BAND_HEIGHT = 15


class PicturesPane(Vertical):
    """Both charts; the app hands down each new view."""

    view: StudyView | None = None

    def compose(self) -> ComposeResult:
        yield Static("Histogram: waiting for the first run", id="histogram")
        yield Static("Band plot: waiting for the first run", id="band")

    def show_view(self, view: StudyView) -> None:
        """Keep the view and draw it."""
        self.view = view
        self._draw()

    def on_resize(self, event: Resize) -> None:
        self._draw()

    def _draw(self) -> None:
        view = self.view
        if view is None:
            return
        width = max(self.content_region.width - 1, 24)
        self.query_one("#histogram", Static).update(
            histogram_chart(view.ratio, width, _HISTOGRAM_HEIGHT))
        self.query_one("#band", Static).update(
            band_chart(view.times, view.bands, width, _BAND_HEIGHT, view.cv_label, view.time_unit))
