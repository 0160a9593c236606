"""The detection table: a Line-API ``ScrollView`` over a paged query, never all rows at once.

Rows arrive page by page (``PAGE`` rows) from a thread worker into a small LRU page cache;
``render_line`` draws what is cached and a placeholder for rows still on their way. Only the
pages around the viewport and the cursor are ever asked for, so a million-row filter costs what
one screenful costs.
"""

from __future__ import annotations

from collections import OrderedDict
from dataclasses import dataclass
from typing import Any, ClassVar

from rich.segment import Segment
from rich.style import Style
from textual import events, work
from textual.binding import Binding, BindingType
from textual.geometry import Size
from textual.message import Message
from textual.reactive import reactive
from textual.scroll_view import ScrollView
from textual.strip import Strip
from textual.worker import get_current_worker

from speccat.tui.columns import COLUMNS, MARK_WIDTH, Column, DetectionSource, column_at, total_width
from speccat.tui.notices import ReportsWorkerFailures

PAGE = 200
MAX_PAGES = 40


@dataclass(frozen=True)
class Query:
    """What the table shows: parsed filters and the ordering."""

    filters: Any
    sort: str = "snr"
    descending: bool = True


class DetectionTable(ReportsWorkerFailures, ScrollView, can_focus=True):
    """Scrollable, sortable, markable list of detections matching the current filters."""

    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("up,k", "cursor(-1)", "Previous row", show=False, id="table.up"),
        Binding("down,j", "cursor(1)", "Next row", show=False, id="table.down"),
        Binding("pageup", "page(-1)", "Page up", show=False, id="table.page_up"),
        Binding("pagedown", "page(1)", "Page down", show=False, id="table.page_down"),
        Binding("home,g", "jump(0)", "First row", show=False, id="table.first"),
        Binding("end,G", "jump(-1)", "Last row", show=False, id="table.last"),
        Binding("space", "toggle_mark", "Mark", id="table.mark", tooltip="mark or unmark the row"),
        Binding(
            "s",
            "next_sort(1)",
            "Sort",
            id="table.sort_next",
            tooltip="order by the next column (or click a heading)",
        ),
        Binding(
            "S", "next_sort(-1)", "Sort by the previous column", show=False, id="table.sort_prev"
        ),
        Binding("r", "reverse", "Reverse the order", show=False, id="table.reverse"),
        Binding("u", "clear_marks", "Unmark all", show=False, id="table.unmark_all"),
    ]

    COMPONENT_CLASSES: ClassVar[set[str]] = {
        "detection-table--header",
        "detection-table--sorted",
        "detection-table--cursor",
        "detection-table--marked",
        "detection-table--pending",
    }

    DEFAULT_CSS = """
    DetectionTable { height: 1fr; }
    DetectionTable > .detection-table--header { text-style: bold; background: $panel; }
    DetectionTable > .detection-table--sorted { text-style: bold underline; background: $panel; }
    DetectionTable > .detection-table--cursor { background: $block-cursor-background 40%; }
    DetectionTable:focus > .detection-table--cursor {
        background: $block-cursor-background; color: $block-cursor-foreground;
        text-style: bold;
    }
    DetectionTable > .detection-table--marked { color: $accent; text-style: bold; }
    DetectionTable > .detection-table--pending { color: $text-muted; }
    """

    cursor_row: reactive[int] = reactive(0)
    total: reactive[int] = reactive(0)

    class Loaded(Message):
        """A new query's count arrived (the first page comes with it)."""

        def __init__(self, generation: int, total: int, rows: list[dict[str, Any]]) -> None:
            self.generation, self.total, self.rows = generation, total, rows
            super().__init__()

    class PageLoaded(Message):
        def __init__(self, generation: int, page: int, rows: list[dict[str, Any]]) -> None:
            self.generation, self.page, self.rows = generation, page, rows
            super().__init__()

    class RowHighlighted(Message):
        """The cursor sits on ``index``; ``row`` is None while its page is still loading."""

        def __init__(self, index: int, total: int, row: dict[str, Any] | None) -> None:
            self.index, self.total, self.row = index, total, row
            super().__init__()

    class QueryChanged(Message):
        """The query (filters or order) changed; ``total`` is the new match count."""

        def __init__(self, query: Query, total: int) -> None:
            self.current_query, self.total = query, total
            super().__init__()

    def __init__(self, source: DetectionSource, query: Query, *, id: str | None = None) -> None:
        super().__init__(id=id)
        self.source = source
        self.current_query = query
        self.columns: tuple[Column, ...] = COLUMNS
        self.marked: dict[int, dict[str, Any]] = {}
        self._pages: OrderedDict[int, list[dict[str, Any]]] = OrderedDict()
        self._pending: set[int] = set()
        self._generation = 0
        self._loading = True
        self.virtual_size = Size(total_width(self.columns), 1)

    # ---- queries (thread workers; they only post messages) -------------------------------
    def on_mount(self) -> None:
        self.set_query(self.current_query)

    def set_query(self, query: Query) -> None:
        """Show ``query``: drop the cache and count and fetch the first page in a worker."""
        self.current_query = query
        self._generation += 1
        self._pages.clear()
        self._pending.clear()
        self._loading = True
        self.refresh()
        self._load(self._generation, query)

    @work(thread=True, exclusive=True, group="table-query", exit_on_error=False)
    def _load(self, generation: int, query: Query) -> None:
        total = self.source.count(query.filters)
        if get_current_worker().is_cancelled:
            return
        rows = self.source.page(
            query.filters, sort=query.sort, descending=query.descending, offset=0, limit=PAGE
        )
        if not get_current_worker().is_cancelled:
            self.post_message(self.Loaded(generation, total, rows))

    @work(thread=True, exclusive=True, group="table-pages", exit_on_error=False)
    def _fetch_pages(self, generation: int, query: Query, pages: list[int]) -> None:
        for page in pages:
            if get_current_worker().is_cancelled:
                return
            rows = self.source.page(
                query.filters,
                sort=query.sort,
                descending=query.descending,
                offset=page * PAGE,
                limit=PAGE,
            )
            self.post_message(self.PageLoaded(generation, page, rows))

    def on_detection_table_loaded(self, event: Loaded) -> None:
        event.stop()
        if event.generation != self._generation:
            return
        self._loading = False
        self._store(0, event.rows)
        self.total = event.total
        self.virtual_size = Size(total_width(self.columns), event.total + 1)
        self.cursor_row = 0
        self.scroll_to(y=0, animate=False, immediate=True)
        self.post_message(self.QueryChanged(self.current_query, event.total))
        self._announce()
        self.refresh()

    def on_detection_table_page_loaded(self, event: PageLoaded) -> None:
        event.stop()
        if event.generation != self._generation:
            return
        self._pending.discard(event.page)
        self._store(event.page, event.rows)
        if self.cursor_row // PAGE == event.page:
            self._announce()
        self.refresh()

    def _store(self, page: int, rows: list[dict[str, Any]]) -> None:
        self._pages[page] = rows
        self._pages.move_to_end(page)
        while len(self._pages) > MAX_PAGES:
            self._pages.popitem(last=False)

    def _ensure_pages(self) -> None:
        """Ask for the pages under the viewport and the cursor that are not cached yet."""
        if self._loading or self.total == 0:
            return
        first = int(self.scroll_y)
        last = min(first + self.size.height, self.total - 1)
        wanted = {p for p in range(first // PAGE, last // PAGE + 1)} | {self.cursor_row // PAGE}
        missing = sorted(p for p in wanted if p not in self._pages)
        if missing and set(missing) != self._pending:
            self._pending = set(missing)
            self._fetch_pages(self._generation, self.current_query, missing)

    # ---- rows -----------------------------------------------------------------------------
    def row(self, index: int) -> dict[str, Any] | None:
        """The cached row at ``index`` (None when its page is not loaded)."""
        rows = self._pages.get(index // PAGE)
        if rows is None or index % PAGE >= len(rows):
            return None
        return rows[index % PAGE]

    def _announce(self) -> None:
        self.post_message(
            self.RowHighlighted(self.cursor_row, self.total, self.row(self.cursor_row))
        )

    def watch_cursor_row(self, old: int, new: int) -> None:
        self.refresh()
        top = int(self.scroll_y)
        visible = max(self.size.height - 1, 1)
        if new < top:
            self.scroll_to(y=new, animate=False, immediate=True)
        elif new >= top + visible:
            self.scroll_to(y=new - visible + 1, animate=False, immediate=True)
        self._ensure_pages()
        if old != new:
            self._announce()

    def watch_scroll_y(self, old_value: float, new_value: float) -> None:
        super().watch_scroll_y(old_value, new_value)
        self._ensure_pages()

    def on_resize(self, event: events.Resize) -> None:
        self._ensure_pages()

    # ---- drawing --------------------------------------------------------------------------
    def _cells(self, texts: list[str], style: Style, sorted_col: int | None = None) -> Strip:
        segs = [Segment(" " * MARK_WIDTH, style)]
        sorted_style = self.get_component_rich_style("detection-table--sorted")
        for i, text in enumerate(texts):
            segs.append(Segment(text, sorted_style if i == sorted_col else style))
            segs.append(Segment(" ", style))
        return Strip(segs)

    def _header(self) -> Strip:
        style = self.get_component_rich_style("detection-table--header")
        texts, sorted_col = [], None
        for i, col in enumerate(self.columns):
            title = col.title
            if col.key == self.current_query.sort:
                sorted_col = i
                title = title[: col.width - 1] + ("↓" if self.current_query.descending else "↑")
            texts.append(
                title[: col.width].rjust(col.width)
                if col.right
                else title.ljust(col.width)[: col.width]
            )
        return self._cells(texts, style, sorted_col)

    def render_line(self, y: int) -> Strip:
        width = self.size.width
        scroll_x = int(self.scroll_x)
        strip = self._header() if y == 0 else self._data_line(int(self.scroll_y) + y - 1)
        return strip.crop(scroll_x, scroll_x + width).extend_cell_length(width, self.rich_style)

    def _data_line(self, index: int) -> Strip:
        base = self.rich_style
        if self._loading:
            return Strip([Segment("  counting matches…" if index == 0 else "", base)])
        if index >= self.total:
            return Strip(
                [
                    Segment(
                        "  no detection matches these filters"
                        if index == 0 and self.total == 0
                        else "",
                        base,
                    )
                ]
            )
        row = self.row(index)
        style = base
        if index == self.cursor_row:
            style = base + self.get_component_rich_style("detection-table--cursor")
        if row is None:
            pending = style + self.get_component_rich_style("detection-table--pending")
            return Strip([Segment("  loading…", pending)])
        marked = row.get("detection_id") in self.marked
        if marked:
            style = style + self.get_component_rich_style("detection-table--marked")
        strip = self._cells([c.cell(row) for c in self.columns], style)
        if marked:
            strip = Strip([Segment("● ", style), *list(strip)[1:]])
        return strip

    # ---- actions --------------------------------------------------------------------------
    def action_cursor(self, delta: int) -> None:
        if self.total:
            self.cursor_row = max(0, min(self.total - 1, self.cursor_row + delta))

    def action_page(self, direction: int) -> None:
        self.action_cursor(direction * max(self.size.height - 2, 1))

    def action_jump(self, index: int) -> None:
        if self.total:
            self.cursor_row = self.total - 1 if index < 0 else min(index, self.total - 1)

    def action_toggle_mark(self) -> None:
        row = self.row(self.cursor_row)
        if row is None:
            return
        key = row["detection_id"]
        if key in self.marked:
            del self.marked[key]
        else:
            self.marked[key] = row
        self.post_message(self.MarksChanged(len(self.marked)))
        self.action_cursor(1)
        self.refresh()

    def action_clear_marks(self) -> None:
        self.marked.clear()
        self.post_message(self.MarksChanged(0))
        self.refresh()

    class MarksChanged(Message):
        def __init__(self, count: int) -> None:
            self.count = count
            super().__init__()

    def sort_by(self, key: str, descending: bool | None = None) -> None:
        if descending is None:
            descending = (
                not self.current_query.descending if key == self.current_query.sort else True
            )
        self.set_query(Query(self.current_query.filters, key, descending))

    def action_next_sort(self, step: int) -> None:
        keys = [c.key for c in self.columns]
        now = keys.index(self.current_query.sort) if self.current_query.sort in keys else -1
        self.sort_by(keys[(now + step) % len(keys)], self.current_query.descending)

    def action_reverse(self) -> None:
        self.sort_by(self.current_query.sort, not self.current_query.descending)

    def on_click(self, event: events.Click) -> None:
        offset = event.get_content_offset(self)
        if offset is None:
            return
        if offset.y == 0:
            col = column_at(offset.x + int(self.scroll_x), self.columns)
            if col is not None:
                self.sort_by(col.key)
            return
        index = int(self.scroll_y) + offset.y - 1
        if 0 <= index < self.total:
            self.cursor_row = index
            if event.chain == 2:
                self.post_message(self.Activated(index))

    class Activated(Message):
        """The user double-clicked a row (Enter is handled by the screen's binding)."""

        def __init__(self, index: int) -> None:
            self.index = index
            super().__init__()
