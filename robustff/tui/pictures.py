"""The picture pane: IAE-ratio histogram, CV band plot (with the allowed band), the recorded
disturbance traces and where in frequency feedforward helps, redrawn to the pane's width."""

from __future__ import annotations

from rich.text import Text
from textual.app import ComposeResult
from textual.containers import Vertical
from textual.events import Resize
from textual.widgets import Static

from robustff.tui.charts import band_chart, histogram_chart, trace_chart
from robustff.tui.frequency_chart import frequency_chart
from robustff.tui.view import StudyView

__all__ = ["PicturesPane"]

_HISTOGRAM_HEIGHT = 11
_BAND_HEIGHT = 15
_RECORD_HEIGHT = 10
_FREQUENCY_HEIGHT = 14


class PicturesPane(Vertical):
    """The charts; the app hands down each new view."""

    view: StudyView | None = None

    def compose(self) -> ComposeResult:
        yield Static("Histogram: waiting for the first run", id="histogram")
        yield Static("Band plot: waiting for the first run", id="band")
        yield Static("", id="records")
        yield Static("Where feedforward helps: waiting for the first run", id="frequency")

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
            band_chart(view.times, view.bands, width, _BAND_HEIGHT, view.cv_label, view.time_unit,
                       view.cv_band, view.setpoint))
        records = self.query_one("#records", Static)
        records.update(_joined(trace_chart(record.times, record.values, width, _RECORD_HEIGHT,
                                           record.title, record.unit, view.time_unit)
                               for record in view.records))
        records.display = bool(view.records)
        self.query_one("#frequency", Static).update(self._frequency_text(view, width))

    @staticmethod
    def _frequency_text(view: StudyView, width: int) -> Text:
        if not view.frequencies:
            return Text("Where feedforward helps: no measured disturbance (feedback alone)")
        parts = []
        for found in view.frequencies:
            title = f"Where feedforward helps: {found.disturbance}, error ratio fbff/fb"
            chart = frequency_chart(found.omega, found.bands, found.crossover, width,
                                    _FREQUENCY_HEIGHT, title, view.time_unit)
            chart.append("\n" + found.words)
            parts.append(chart)
        return _joined(parts)


def _joined(parts: object) -> Text:
    """Charts one under another, a blank line between."""
    return Text("\n\n").join(list(parts))  # type: ignore[call-overload]
