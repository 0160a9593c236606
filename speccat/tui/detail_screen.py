"""The inspector: one detection's spectrum, fit, candidates, flags and derived quantities."""

from __future__ import annotations

import math
from typing import Any, ClassVar

import numpy as np
from textual import work
from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import Horizontal, VerticalScroll
from textual.message import Message
from textual.reactive import reactive
from textual.screen import Screen
from textual.widgets import Footer, Label, Static

from speccat.tui import services
from speccat.tui.factsheet import candidates_text, fit_text, physics_text
from speccat.tui.notices import ReportsWorkerFailures
from speccat.tui.plotlayout import PlotData
from speccat.tui.widgets.plot import SpectrumPlot
from speccat.tui.widgets.table import DetectionTable

ZOOM_FWHM = 4.0  # the line view spans centre +/- this many FWHM
MIN_ZOOM_CHANNELS = 24


class DetailScreen(ReportsWorkerFailures, Screen[None]):
    """Shows the table's highlighted detection; moving here moves the table's cursor too."""

    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("escape,backspace", "back", "Back", id="detail.back"),
        Binding("down,j,n", "step(1)", "Next", key_display="↓", id="detail.next"),
        Binding("up,k,p", "step(-1)", "Previous", key_display="↑", id="detail.previous"),
        Binding(
            "a",
            "toggle_axis",
            "Axis v/f",
            id="detail.axis",
            tooltip="x axis: LSRK radio velocity of the identified line, or frequency",
        ),
        Binding(
            "z",
            "toggle_zoom",
            "Zoom",
            id="detail.zoom",
            tooltip="show the line (centre ±4 FWHM) or the whole band",
        ),
        Binding("space", "mark", "Mark", id="detail.mark"),
        Binding(
            "pagedown",
            "scroll_facts(1)",
            "Scroll facts down",
            show=False,
            id="detail.facts_down",
            tooltip="candidates, flags and derived quantities",
        ),
        Binding("pageup", "scroll_facts(-1)", "Scroll facts up", show=False, id="detail.facts_up"),
    ]

    velocity_axis: reactive[bool] = reactive(True)
    zoomed: reactive[bool] = reactive(True)

    class Ready(Message):
        def __init__(self, detection_id: int, detail: services.Detail) -> None:
            self.detection_id, self.detail = detection_id, detail
            super().__init__()

    def __init__(self, archive: Any, table: DetectionTable) -> None:
        """Inspect ``table``'s highlighted row; later cursor moves arrive through ``show``."""
        super().__init__()
        self.archive = archive
        self.table = table
        self.detail: services.Detail | None = None
        self.position = ""
        self._showing: int | None = None
        self._ready = False

    def compose(self) -> ComposeResult:
        yield Label("", id="detail-title")
        yield SpectrumPlot(id="plot")
        yield Label("", id="plot-legend")
        with Horizontal(id="facts"):
            yield Static("", id="fit-facts")
            with VerticalScroll(id="more-facts", can_focus=False):
                yield Static("", id="candidate-facts", classes="facts")
                yield Static("", id="physics-facts", classes="facts")
        yield Footer(compact=True)

    def on_resize(self) -> None:
        self.query_one("#facts").set_class(self.size.width >= 140, "-wide")

    def on_mount(self) -> None:
        self._ready = True
        table = self.table
        self.show(table.cursor_row, table.total, table.row(table.cursor_row))

    # ---- loading --------------------------------------------------------------------------
    def show(self, index: int, total: int, row: dict[str, Any] | None) -> None:
        """Display the detection at table row ``index`` (``row`` None: its page is loading)."""
        if not self._ready:
            return
        self.position = f"row {index + 1:,} of {total:,}"
        if row is None:
            self._set_title("loading row…")
            return
        if row.get("detection_id") == self._showing:
            self._set_title()
            return
        self._showing = row.get("detection_id")
        self._set_title()
        self.query_one(SpectrumPlot).message = "loading spectrum…"
        self._load(row)

    @work(thread=True, exclusive=True, group="detail", exit_on_error=False)
    def _load(self, row: dict[str, Any]) -> None:
        detail = services.build_detail(self.archive, row)
        self.post_message(self.Ready(row["detection_id"], detail))

    def on_detail_screen_ready(self, event: Ready) -> None:
        if event.detection_id != self._showing:
            return
        self.detail = event.detail
        self._set_title()
        self._redraw()
        self.query_one("#fit-facts", Static).update(fit_text(event.detail))
        self.query_one("#candidate-facts", Static).update(candidates_text(event.detail))
        self.query_one("#physics-facts", Static).update(physics_text(event.detail))

    def _set_title(self, note: str = "") -> None:
        row = self.detail.row if self.detail is not None else None
        if row is None or row.get("detection_id") != self._showing:
            head = "detection"
        else:
            line = row.get("line") or "unidentified line"
            head = f"{line} in {row.get('source')} · night {row.get('night')} · #{row.get('detection_id')}"
        marked = self._showing in self.table.marked
        parts = [head, self.position, "● marked" if marked else "", note]
        self.query_one("#detail-title", Label).update(" " + "  │  ".join(p for p in parts if p))

    # ---- drawing --------------------------------------------------------------------------
    def watch_velocity_axis(self) -> None:
        self._redraw()

    def watch_zoomed(self) -> None:
        self._redraw()

    def _redraw(self) -> None:
        if not self._ready or self.detail is None:
            return
        data, legend = plot_for(self.detail, self.velocity_axis, self.zoomed, self.app.no_color)
        self.query_one(SpectrumPlot).data = data
        self.query_one("#plot-legend", Label).update(legend)

    # ---- actions --------------------------------------------------------------------------
    def action_back(self) -> None:
        self.app.pop_screen()

    def action_step(self, delta: int) -> None:
        self.table.action_cursor(delta)

    def action_toggle_axis(self) -> None:
        if self.detail is not None and self.detail.rest_hz is None:
            self.notify("unidentified line: no rest frequency, so the axis stays in frequency")
            return
        self.velocity_axis = not self.velocity_axis

    def action_scroll_facts(self, direction: int) -> None:
        facts = self.query_one("#more-facts", VerticalScroll)
        if direction > 0:
            facts.scroll_page_down(animate=False)
        else:
            facts.scroll_page_up(animate=False)

    def action_toggle_zoom(self) -> None:
        self.zoomed = not self.zoomed

    def action_mark(self) -> None:
        row = self.detail.row if self.detail is not None else None
        if row is None:
            return
        key = row["detection_id"]
        if key in self.table.marked:
            del self.table.marked[key]
        else:
            self.table.marked[key] = row
        self.table.post_message(DetectionTable.MarksChanged(len(self.table.marked)))
        self.table.refresh()
        self._set_title()


def _velocity(freq_hz: np.ndarray | float, detail: services.Detail) -> Any:
    """LSRK radio velocity (km/s) of file-frame frequencies, relative to the identified line."""
    from speccat.physics.doppler import velocity_from_freq

    assert detail.rest_hz is not None
    return velocity_from_freq(np.asarray(freq_hz) * detail.lsrk_factor, detail.rest_hz, "radio")


def plot_for(
    detail: services.Detail, velocity_axis: bool, zoomed: bool, plain: bool = False
) -> tuple[PlotData, str]:
    """The plot data and its one-line legend for the chosen axis and zoom."""
    use_v = velocity_axis and detail.rest_hz is not None
    chan = services.stored_chan_width_hz(detail.freq_hz)
    half = max(ZOOM_FWHM * detail.fwhm_hz, MIN_ZOOM_CHANNELS * chan / 2)
    window_hz = (detail.center_hz - half, detail.center_hz + half)
    if use_v:
        x = np.asarray(_velocity(detail.freq_hz, detail), float)
        w = sorted(float(v) for v in _velocity(np.array(window_hz), detail))
        markers = tuple((float(_velocity(f, detail)), n) for n, f in detail.markers)
        line = detail.row.get("line") or "?"
        axis = f"v_LSRK radio, 0 = {line}"
        unit = "km/s"
    else:
        x = detail.freq_hz / 1e6
        w = [window_hz[0] / 1e6, window_hz[1] / 1e6]
        markers = tuple((f / 1e6, n) for n, f in detail.markers)
        axis = "frequency, file's frame"
        unit = "MHz"
    x_range = (w[0], w[1]) if zoomed else None
    view = f"line ±{ZOOM_FWHM:g} FWHM" if zoomed else "whole band"
    data = PlotData(
        x=x,
        y=detail.y,
        model=detail.model,
        markers=markers,
        x_range=x_range,
        x_unit=unit,
        y_unit=str(detail.row.get("intensity_unit") or ""),
    )
    legend = (
        f" [b]a[/b] {axis}  [b]z[/b] {view}  [$foreground]⣿data[/] "
        + ("⡇⡇fit (dashed)" if plain else "[b $warning]⣿fit[/]")
        + " [$secondary]⣿resid[/] [$accent]⠅catalogue[/]"
    )
    return data, legend


def finite(value: Any) -> bool:
    return isinstance(value, int | float) and math.isfinite(value)
