"""The spectrum plot widget: braille curves from ``plotlayout``, styled by theme roles."""

from __future__ import annotations

from dataclasses import replace
from typing import ClassVar

from rich.segment import Segment
from rich.style import Style
from textual.reactive import reactive
from textual.strip import Strip
from textual.widget import Widget

from speccat.tui.plotlayout import PlotData, compose_plot


class SpectrumPlot(Widget):
    """Draws a ``PlotData`` to fill the widget; re-lays out on resize or new data."""

    COMPONENT_CLASSES: ClassVar[set[str]] = {
        "spectrum-plot--axis",
        "spectrum-plot--tick",
        "spectrum-plot--data",
        "spectrum-plot--model",
        "spectrum-plot--residual",
        "spectrum-plot--marker",
        "spectrum-plot--label",
    }

    DEFAULT_CSS = """
    SpectrumPlot { height: 1fr; min-height: 8; }
    SpectrumPlot > .spectrum-plot--axis { color: $text-muted; }
    SpectrumPlot > .spectrum-plot--tick { color: $text-muted; }
    SpectrumPlot > .spectrum-plot--data { color: $foreground; }
    SpectrumPlot > .spectrum-plot--model { color: $warning; text-style: bold; }
    SpectrumPlot > .spectrum-plot--residual { color: $secondary; }
    SpectrumPlot > .spectrum-plot--marker { color: $accent; }
    SpectrumPlot > .spectrum-plot--label { color: $text-muted; }
    """

    data: reactive[PlotData | None] = reactive(None, layout=False)
    message: reactive[str] = reactive("no detection highlighted")

    def __init__(self, *, id: str | None = None) -> None:
        super().__init__(id=id)
        self._rows: list[Strip] = []
        self._laid_out_for: tuple[int, int, int] | None = None

    def watch_data(self) -> None:
        self._laid_out_for = None
        self.refresh()

    def watch_message(self) -> None:
        self.refresh()

    def _layout(self) -> None:
        width, height = self.size
        key = (width, height, id(self.data))
        if self._laid_out_for == key:
            return
        self._laid_out_for = key
        styles: dict[str, Style] = {
            role: self.get_component_rich_style(f"spectrum-plot--{role}")
            for role in ("axis", "tick", "data", "model", "residual", "marker", "label")
        }
        if self.data is None or width <= 0 or height <= 0:
            self._rows = [Strip([Segment(self.message, styles["label"])])]
            return
        data = self.data
        if self.app.no_color and data.model is not None:
            data = replace(data, model_dashed=True)
        rows = compose_plot(data, width, height)
        self._rows = [Strip([Segment(text, styles[role]) for text, role in row]) for row in rows]

    def render_line(self, y: int) -> Strip:
        self._layout()
        width = self.size.width
        if y < len(self._rows):
            return self._rows[y].crop(0, width).extend_cell_length(width, self.rich_style)
        return Strip.blank(width, self.rich_style)

    def plain_lines(self) -> list[str]:
        """The drawn rows as text (for tests and screenshots)."""
        self._layout()
        return [strip.text for strip in self._rows]
