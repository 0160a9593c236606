"""The main screen: filter form on top, the detection table, a status line and the key bar."""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from functools import partial
from pathlib import Path
from typing import Any, ClassVar

from textual import on, work
from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import Horizontal, Vertical
from textual.message import Message
from textual.screen import Screen
from textual.widgets import Footer, Input, Label
from textual.worker import get_current_worker

from speccat.tui import services
from speccat.tui.columns import COLUMNS
from speccat.tui.notices import ReportsWorkerFailures
from speccat.tui.widgets.filters import FilterForm
from speccat.tui.widgets.modals import ConfirmOverwrite, ExportPrompt
from speccat.tui.widgets.plot import SpectrumPlot
from speccat.tui.widgets.table import DetectionTable, Query

SUGGESTED = ("source", "species", "line", "night")
PREVIEW_MIN_WIDTH = 170  # columns from which the table gets a spectrum preview beside it


@dataclass(frozen=True)
class ExportJob:
    """What to write: the marked rows (``rows``) or everything matching ``filters``."""

    path: Path
    rows: list[dict[str, Any]] | None
    filters: Any
    sort: str
    descending: bool
    overwrite: bool = False


class BrowseScreen(ReportsWorkerFailures, Screen[None]):
    """Filters, the detection table and the status line; Enter opens the inspector."""

    AUTO_FOCUS = "#detections"

    BINDINGS: ClassVar[list[BindingType]] = [
        Binding(
            "slash",
            "edit_filters",
            "Filters",
            id="browse.filters",
            tooltip="go to the filter form; filters apply as you type",
        ),
        Binding("escape", "to_table", "Back to the table", show=False, id="browse.to_table"),
        Binding(
            "enter",
            "inspect",
            "Inspect",
            id="browse.inspect",
            tooltip="open the highlighted detection: spectrum, fit, candidates, physics",
        ),
        Binding(
            "x",
            "export(True)",
            "Export marked",
            id="browse.export_marked",
            tooltip="write the marked rows to a file (asks for its name)",
        ),
        Binding(
            "X",
            "export(False)",
            "Export all",
            id="browse.export_all",
            tooltip="write every detection matching the filters to a file",
        ),
        Binding("ctrl+r", "clear_filters", "Clear all filters", show=False, id="browse.clear"),
        Binding(
            "f4",
            "pick",
            "Pick a value",
            show=False,
            id="browse.pick",
            tooltip="choose a source (or, in a field, that field's value) from the archive",
        ),
    ]

    class Distinct(Message):
        def __init__(self, column: str, values: list[str]) -> None:
            self.column, self.values = column, values
            super().__init__()

    class Preview(Message):
        def __init__(self, detection_id: int, detail: services.Detail) -> None:
            self.detection_id, self.detail = detection_id, detail
            super().__init__()

    class Exported(Message):
        def __init__(self, path: Path, count: int) -> None:
            self.path, self.count = path, count
            super().__init__()

    def __init__(self, archive: Any) -> None:
        super().__init__()
        self.archive = archive
        self.total = 0
        self.position = ""
        self._previewing: int | None = None

    def compose(self) -> ComposeResult:
        yield Label(
            f" speccat · detections in {services.archive_label(self.archive)}", id="title-bar"
        )
        yield FilterForm(services.parse_filters, id="filters")
        with Horizontal(id="browse-body"):
            yield DetectionTable(self.archive, Query(services.parse_filters({})), id="detections")
            with Vertical(id="preview"):
                yield Label("", id="preview-title")
                yield SpectrumPlot(id="preview-plot")
        yield Label("", id="status")
        yield Footer(compact=True)

    def on_resize(self) -> None:
        """Wide terminals get a live spectrum preview beside the table."""
        wide = self.size.width >= PREVIEW_MIN_WIDTH
        if wide != self.has_class("-wide"):
            self.set_class(wide, "-wide")
            if wide:
                table = self.query_one(DetectionTable)
                self._preview_row(table.row(table.cursor_row))

    def _preview_row(self, row: dict[str, Any] | None) -> None:
        if row is None or not self.has_class("-wide"):
            return
        if row.get("detection_id") == self._previewing:
            return
        self._previewing = row.get("detection_id")
        self._load_preview(row)

    @work(thread=True, exclusive=True, group="preview", exit_on_error=False)
    def _load_preview(self, row: dict[str, Any]) -> None:
        detail = services.build_detail(self.archive, row)
        if not get_current_worker().is_cancelled:
            self.post_message(self.Preview(row["detection_id"], detail))

    def on_browse_screen_preview(self, event: Preview) -> None:
        if event.detection_id != self._previewing:
            return
        from speccat.tui.detail_screen import plot_for

        data, _ = plot_for(event.detail, velocity_axis=True, zoomed=True, plain=self.app.no_color)
        self.query_one("#preview-plot", SpectrumPlot).data = data
        row = event.detail.row
        axis = "v_LSRK km/s" if event.detail.rest_hz is not None else "MHz"
        self.query_one("#preview-title", Label).update(
            f" preview: {row.get('line') or 'unidentified'} in {row.get('source')} ({axis}) · enter inspects"
        )

    def on_mount(self) -> None:
        self.query_one(DetectionTable).focus()
        self._load_distinct()
        self._warm_up()

    @work(thread=True, exclusive=True, group="warm-up", exit_on_error=False)
    def _warm_up(self) -> None:
        """Import the inspector's heavy modules early so the first Enter is quick."""
        services.warm_up()

    # ---- workers --------------------------------------------------------------------------
    @work(thread=True, exclusive=True, group="distinct", exit_on_error=False)
    def _load_distinct(self) -> None:
        for column in SUGGESTED:
            if get_current_worker().is_cancelled:
                return
            values = [str(v) for v in self.archive.distinct(column) if v is not None]
            self.post_message(self.Distinct(column, values))

    def on_browse_screen_distinct(self, event: Distinct) -> None:
        self.query_one(FilterForm).set_suggestions(event.column, event.values)

    @work(thread=True, exclusive=True, group="export", exit_on_error=False)
    def _export(self, job: ExportJob) -> None:
        count = services.export(self.archive, job)
        self.post_message(self.Exported(job.path, count))

    def _confirmed(self, job: ExportJob, replace: bool | None) -> None:
        if replace:
            self._export(dataclasses.replace(job, overwrite=True))
        else:
            self.notify(f"kept {job.path}; nothing written")

    def on_browse_screen_exported(self, event: Exported) -> None:
        self.notify(f"wrote {event.count:,} detections to {event.path}", title="export done")

    # ---- events ---------------------------------------------------------------------------
    @on(FilterForm.Applied)
    def _filters_applied(self, event: FilterForm.Applied) -> None:
        table = self.query_one(DetectionTable)
        if event.filters != table.current_query.filters:
            self.query_one(FilterForm).show_count("counting…")
            table.set_query(
                Query(event.filters, table.current_query.sort, table.current_query.descending)
            )

    @on(DetectionTable.QueryChanged)
    def _query_changed(self, event: DetectionTable.QueryChanged) -> None:
        self.total = event.total
        noun = "detection matches" if event.total == 1 else "detections match"
        self.query_one(FilterForm).show_count(f"{event.total:,} {noun}")

    @on(DetectionTable.RowHighlighted)
    def _highlighted(self, event: DetectionTable.RowHighlighted) -> None:
        self._update_status()
        self._preview_row(event.row)
        from speccat.tui.detail_screen import DetailScreen

        for screen in self.app.screen_stack:
            if isinstance(screen, DetailScreen):
                screen.show(event.index, event.total, event.row)

    @on(DetectionTable.MarksChanged)
    def _marks_changed(self) -> None:
        self._update_status()

    @on(DetectionTable.Activated)
    def _activated(self) -> None:
        self.action_inspect()

    def _update_status(self) -> None:
        table = self.query_one(DetectionTable)
        title = next(
            (c.title for c in COLUMNS if c.key == table.current_query.sort),
            table.current_query.sort,
        )
        arrow = "high first" if table.current_query.descending else "low first"
        parts = [
            f"row {table.cursor_row + 1:,} of {table.total:,}" if table.total else "no rows",
            f"sorted by {title}, {arrow}",
            f"{len(table.marked):,} marked",
        ]
        self.query_one("#status", Label).update(" " + "  │  ".join(parts))

    # ---- actions --------------------------------------------------------------------------
    def action_edit_filters(self) -> None:
        self.query_one("#filter-source", Input).focus()

    def action_to_table(self) -> None:
        self.query_one(DetectionTable).focus()

    def action_pick(self) -> None:
        self.query_one(FilterForm).action_pick()

    def action_clear_filters(self) -> None:
        self.query_one(FilterForm).clear()

    def action_inspect(self) -> None:
        from speccat.tui.detail_screen import DetailScreen

        table = self.query_one(DetectionTable)
        if not table.total:
            self.notify("nothing to inspect: no detection matches the filters")
            return
        self.app.push_screen(DetailScreen(self.archive, table))

    def action_export(self, marked_only: bool) -> None:
        table = self.query_one(DetectionTable)
        if marked_only and not table.marked:
            self.notify("no rows marked: mark rows with space, or press X to export all matches")
            return
        count = len(table.marked) if marked_only else table.total
        what = f"{count:,} marked detection(s)" if marked_only else f"all {count:,} matches"
        rows = list(table.marked.values()) if marked_only else None
        query = table.current_query

        def chosen(path: Path | None) -> None:
            if path is None:
                return
            job = ExportJob(path, rows, query.filters, query.sort, query.descending)
            if path.exists():
                self.app.push_screen(ConfirmOverwrite(path), partial(self._confirmed, job))
            else:
                self._export(job)

        self.app.push_screen(ExportPrompt(what, "detections.csv"), chosen)
