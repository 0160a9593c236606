"""The terminal browser driven by Textual's Pilot: filter, move, sort, mark, export, inspect.

Every expected value comes from the archive's own query API on the same archive (the table
must show what ``Archive.page``/``count`` return), never from numbers typed into the test.
"""

from __future__ import annotations

import asyncio
import csv
import functools
import time
from collections.abc import Callable, Coroutine
from pathlib import Path
from typing import Any

import pytest
from textual.pilot import Pilot
from textual.widgets import Input, Label, Static
from tui_archive import build_archive

from speccat.archive import Archive, Filters
from speccat.tui.app import SpeccatBrowser, make_app
from speccat.tui.detail_screen import DetailScreen
from speccat.tui.widgets.modals import ConfirmOverwrite, ExportPrompt, KeyHelp
from speccat.tui.widgets.plot import SpectrumPlot
from speccat.tui.widgets.table import DetectionTable

SIZE = (110, 32)


@pytest.fixture(scope="module")
def archive_path(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return build_archive(tmp_path_factory.mktemp("tui") / "night.sqlite")


@pytest.fixture
def archive(archive_path: Path) -> Any:
    a = Archive.open(str(archive_path), readonly=True)
    yield a
    a.close()


def sync(fn: Callable[..., Coroutine[Any, Any, None]]) -> Callable[..., None]:
    """Run an async test body in its own event loop (no async pytest plugin needed)."""

    @functools.wraps(fn)
    def wrapper(*args: Any, **kwargs: Any) -> None:
        asyncio.run(fn(*args, **kwargs))

    return wrapper


async def until(pilot: Pilot[Any], cond: Callable[[], bool], timeout: float = 60.0) -> None:
    """Let the app run until ``cond()`` holds (workers are threads, so poll)."""
    end = time.monotonic() + timeout
    while not cond():
        if time.monotonic() > end:
            raise AssertionError("the app did not reach the expected state in time")
        await pilot.pause(0.05)


def table_of(app: SpeccatBrowser) -> DetectionTable:
    return app.screen_stack[1].query_one(DetectionTable)


def loaded(app: SpeccatBrowser) -> Callable[[], bool]:
    def check() -> bool:
        if len(app.screen_stack) < 2:
            return False
        table = table_of(app)
        return not table._loading and (table.total == 0 or table.row(table.cursor_row) is not None)

    return check


def status_text(app: SpeccatBrowser) -> str:
    return str(app.screen_stack[1].query_one("#status", Label).render())


async def type_filter(pilot: Pilot[Any], app: SpeccatBrowser, key: str, text: str) -> None:
    field = app.screen.query_one(f"#filter-{key}", Input)
    field.focus()
    await pilot.pause()
    await pilot.press(*list(text))


@sync
async def test_first_screen_lists_matches_in_archive_order(archive: Any) -> None:
    app = make_app(archive)
    async with app.run_test(size=SIZE) as pilot:
        await until(pilot, loaded(app))
        table = table_of(app)
        expected = archive.page(Filters(), sort="snr", descending=True, offset=0, limit=5)
        assert table.total == archive.count(Filters())
        assert [table.row(i)["detection_id"] for i in range(5)] == [
            r["detection_id"] for r in expected
        ]
        await until(pilot, lambda: f"row 1 of {table.total}" in status_text(app))
        count = app.screen.query_one("#match-count", Label)
        await until(pilot, lambda: f"{table.total} detections match" in str(count.render()))


@sync
async def test_typing_a_filter_applies_it_and_updates_the_count(archive: Any) -> None:
    app = make_app(archive)
    async with app.run_test(size=SIZE) as pilot:
        await until(pilot, loaded(app))
        before = table_of(app).total
        await type_filter(pilot, app, "source", "wisp*")
        want = archive.count(Filters.parse({"source": "wisp*"}))
        await until(pilot, lambda: loaded(app)() and table_of(app).total == want)
        table = table_of(app)
        assert 0 < want < before
        assert {table.row(i)["source"] for i in range(table.total)} == {"Wisp-3"}
        count = app.screen.query_one("#match-count", Label)
        await until(pilot, lambda: f"{want} detections match" in str(count.render()))


@sync
async def test_combined_filters_match_the_archive_query(archive: Any) -> None:
    values = {"vel": "-20:40", "snr": "10"}
    app = make_app(archive)
    async with app.run_test(size=SIZE) as pilot:
        await until(pilot, loaded(app))
        await type_filter(pilot, app, "vel", values["vel"])
        await type_filter(pilot, app, "snr", values["snr"])
        want = archive.page(Filters.parse(values), limit=200)
        await until(pilot, lambda: loaded(app)() and table_of(app).total == len(want))
        table = table_of(app)
        got = [table.row(i)["detection_id"] for i in range(table.total)]
        assert got == [r["detection_id"] for r in want]
        assert all(-20 <= table.row(i)["v_lsr_kms"] <= 40 for i in range(table.total))


@sync
async def test_a_bad_value_shows_its_message_and_keeps_the_rows(archive: Any) -> None:
    app = make_app(archive)
    async with app.run_test(size=SIZE) as pilot:
        await until(pilot, loaded(app))
        total = table_of(app).total
        await type_filter(pilot, app, "vel", "fast")
        message = app.screen.query_one("#filter-message", Label)
        await until(pilot, lambda: "v_LSR: expected MIN:MAX" in str(message.render()))
        assert message.has_class("-error")
        assert table_of(app).total == total
        await pilot.press("backspace", "backspace", "backspace", "backspace")
        await until(pilot, lambda: not message.has_class("-error"))


@sync
async def test_unidentified_picker_filters(archive: Any) -> None:
    app = make_app(archive)
    async with app.run_test(size=SIZE) as pilot:
        await until(pilot, loaded(app))
        from textual.widgets import Select

        app.screen.query_one("#filter-unidentified", Select).value = "yes"
        want = archive.count(Filters.parse({"unidentified": "yes"}))
        await until(pilot, lambda: loaded(app)() and table_of(app).total == want)
        table = table_of(app)
        assert want > 0
        assert all(table.row(i)["line"] is None for i in range(table.total))


@sync
async def test_picker_offers_the_archives_values(archive: Any) -> None:
    from speccat.tui.widgets.modals import ValuePicker

    app = make_app(archive)
    async with app.run_test(size=SIZE) as pilot:
        await until(pilot, loaded(app))
        form = app.screen.query_one("#filters")
        await until(pilot, lambda: "source" in form.choices)
        assert form.choices["source"] == archive.distinct("source")
        await pilot.press("f4")
        await until(pilot, lambda: isinstance(app.screen, ValuePicker))
        await pilot.press("e", "m", "b", "enter")
        want = archive.count(Filters.parse({"source": "Ember-41"}))
        await until(pilot, lambda: loaded(app)() and table_of(app).total == want)
        assert app.screen.query_one("#filter-source", Input).value == "Ember-41"


@sync
async def test_navigation_moves_the_cursor_and_the_position(archive: Any) -> None:
    app = make_app(archive)
    async with app.run_test(size=SIZE) as pilot:
        await until(pilot, loaded(app))
        table = table_of(app)
        await pilot.press("down", "down", "down")
        assert table.cursor_row == 3
        assert f"row 4 of {table.total}" in status_text(app)
        await pilot.press("end")
        await until(pilot, lambda: table.row(table.cursor_row) is not None)
        last = archive.page(Filters(), offset=table.total - 1, limit=1)[0]
        assert table.row(table.cursor_row)["detection_id"] == last["detection_id"]
        assert f"row {table.total} of {table.total}" in status_text(app)
        await pilot.press("home")
        assert table.cursor_row == 0


@sync
async def test_sorting_by_key_and_reversing(archive: Any) -> None:
    app = make_app(archive)
    async with app.run_test(size=SIZE) as pilot:
        await until(pilot, loaded(app))
        table = table_of(app)
        await pilot.press("s")
        key = table.current_query.sort
        assert key != "snr"
        want = archive.page(Filters(), sort=key, descending=True, limit=10)
        await until(pilot, loaded(app))
        assert [table.row(i)["detection_id"] for i in range(10)] == [
            r["detection_id"] for r in want
        ]
        assert "↓" in table.render_line(0).text  # the sorted column's heading shows the order
        await pilot.press("r")
        await until(pilot, lambda: loaded(app)() and not table.current_query.descending)
        assert "↑" in table.render_line(0).text
        want = archive.page(Filters(), sort=key, descending=False, limit=10)
        assert [table.row(i)["detection_id"] for i in range(10)] == [
            r["detection_id"] for r in want
        ]
        assert "low first" in status_text(app)


@sync
async def test_clicking_a_heading_sorts_by_that_column(archive: Any) -> None:
    app = make_app(archive)
    async with app.run_test(size=SIZE) as pilot:
        await until(pilot, loaded(app))
        table = table_of(app)
        # the "line" heading starts after the mark gutter and the 14-cell source column
        await pilot.click(DetectionTable, offset=(2 + 15 + 2, 0))
        await until(pilot, lambda: loaded(app)() and table.current_query.sort == "line")
        want = archive.page(Filters(), sort="line", descending=True, limit=5)
        assert [table.row(i)["detection_id"] for i in range(5)] == [r["detection_id"] for r in want]


def read_ids(path: Path) -> list[int]:
    with path.open(newline="") as fh:
        return [int(r["detection_id"]) for r in csv.DictReader(fh)]


@pytest.mark.slow
@sync
async def test_mark_and_export_marked_rows_then_refuse_and_confirm_overwrite(
    archive: Any, tmp_path: Path
) -> None:
    out = tmp_path / "picked.csv"
    app = make_app(archive)
    async with app.run_test(size=SIZE) as pilot:
        await until(pilot, loaded(app))
        table = table_of(app)
        first, second = table.row(0)["detection_id"], table.row(1)["detection_id"]
        await pilot.press("space", "space")
        assert set(table.marked) == {first, second}
        assert "2 marked" in status_text(app)

        await pilot.press("x")
        await until(pilot, lambda: isinstance(app.screen, ExportPrompt))
        field = app.screen.query_one("#export-path", Input)
        field.value = str(out)
        await pilot.press("enter")
        await until(pilot, out.exists)
        assert sorted(read_ids(out)) == sorted([first, second])
        # the marked rows are written exactly as `speccat export` writes the same detections
        from speccat.export import export

        everything = tmp_path / "everything.csv"
        export(archive, Filters(), everything)
        full = everything.read_text().splitlines()
        picked = out.read_text().splitlines()
        assert picked[0] == full[0]
        by_id = {line.split(",", 1)[0]: line for line in full[1:]}
        assert all(line == by_id[line.split(",", 1)[0]] for line in picked[1:])

        # exporting everything to the same name asks first; "n" keeps the file
        await pilot.press("X")
        await until(pilot, lambda: isinstance(app.screen, ExportPrompt))
        app.screen.query_one("#export-path", Input).value = str(out)
        await pilot.press("enter")
        await until(pilot, lambda: isinstance(app.screen, ConfirmOverwrite))
        await pilot.press("n")
        await pilot.pause(0.3)
        assert sorted(read_ids(out)) == sorted([first, second])

        await pilot.press("X")
        await until(pilot, lambda: isinstance(app.screen, ExportPrompt))
        app.screen.query_one("#export-path", Input).value = str(out)
        await pilot.press("enter")
        await until(pilot, lambda: isinstance(app.screen, ConfirmOverwrite))
        await pilot.press("y")
        await until(pilot, lambda: len(read_ids(out)) == archive.count(Filters()))


@sync
async def test_marked_rows_export_to_ecsv_with_units(archive: Any, tmp_path: Path) -> None:
    from astropy.table import Table

    out = tmp_path / "picked.ecsv"
    app = make_app(archive)
    async with app.run_test(size=SIZE) as pilot:
        await until(pilot, loaded(app))
        table = table_of(app)
        ids = [table.row(i)["detection_id"] for i in range(3)]
        await pilot.press("space", "space", "space", "x")
        await until(pilot, lambda: isinstance(app.screen, ExportPrompt))
        app.screen.query_one("#export-path", Input).value = str(out)
        await pilot.press("enter")
        await until(pilot, out.exists)
    back = Table.read(out, format="ascii.ecsv")  # astropy reads what we wrote
    assert sorted(back["detection_id"]) == sorted(ids)
    assert str(back["v_lsr_kms"].unit) == "km / s"


@sync
async def test_export_prompt_rejects_an_unknown_suffix(archive: Any, tmp_path: Path) -> None:
    app = make_app(archive)
    async with app.run_test(size=SIZE) as pilot:
        await until(pilot, loaded(app))
        await pilot.press("X")
        await until(pilot, lambda: isinstance(app.screen, ExportPrompt))
        app.screen.query_one("#export-path", Input).value = str(tmp_path / "out.txt")
        await pilot.press("enter")
        await pilot.pause(0.2)
        assert isinstance(app.screen, ExportPrompt)
        assert "suffix" in str(app.screen.query_one("#export-problem", Label).render())
        await pilot.press("escape")
        assert not isinstance(app.screen, ExportPrompt)
        assert not list(tmp_path.iterdir())


@sync
async def test_inspector_draws_the_spectrum_and_follows_the_cursor(archive: Any) -> None:
    app = make_app(archive)
    async with app.run_test(size=SIZE) as pilot:
        await until(pilot, loaded(app))
        first = table_of(app).row(0)
        await pilot.press("enter")
        await until(pilot, lambda: isinstance(app.screen, DetailScreen))
        screen = app.screen
        assert isinstance(screen, DetailScreen)
        await until(
            pilot,
            lambda: screen.detail is not None and screen.query_one(SpectrumPlot).data is not None,
        )
        assert screen.detail.row["detection_id"] == first["detection_id"]
        plot = screen.query_one(SpectrumPlot)
        text = "\n".join(plot.plain_lines())
        assert any(0x2800 < ord(ch) <= 0x28FF for ch in text)  # braille dots drawn
        assert "km/s" in text
        assert first["line"] in text  # the identified line's marker is labelled
        fit = str(screen.query_one("#fit-facts").render())
        assert "±" in fit
        # every drawn segment carries a style: Textual's NO_COLOR filter fails on style None
        for widget in (plot, table_of(app)):
            for y in range(widget.size.height):
                assert all(seg.style is not None for seg in widget.render_line(y))

        await pilot.press("a")
        await until(pilot, lambda: "MHz" in "\n".join(plot.plain_lines()))
        zoomed_range = plot.data.x_range
        await pilot.press("z")
        assert zoomed_range is not None and plot.data.x_range is None

        await pilot.press("down")
        second = table_of(app).row(1)
        await until(pilot, lambda: screen.detail.row["detection_id"] == second["detection_id"])
        await pilot.press("escape")
        assert not isinstance(app.screen, DetailScreen)
        assert table_of(app).cursor_row == 1


@sync
async def test_help_lists_every_binding(archive: Any) -> None:
    from speccat.tui.app import help_sections

    app = make_app(archive)
    async with app.run_test(size=(100, 50)) as pilot:
        await until(pilot, loaded(app))
        await pilot.press("question_mark")
        await until(pilot, lambda: isinstance(app.screen, KeyHelp))
        shown = str(app.screen.query_one("#help-keys", Static).content)
        for _, bindings in help_sections():
            for b in bindings:
                assert b.description in shown
                assert b.id, f"binding {b.key} has no id"
        await pilot.press("escape")
        assert not isinstance(app.screen, KeyHelp)


class FailingSource:
    """An archive whose queries fail: the app must show a notice, not crash."""

    url = "broken.sqlite"

    def count(self, filters: Any) -> int:
        from speccat.errors import ArchiveError

        raise ArchiveError("broken.sqlite: disk I/O error")

    def page(self, *args: Any, **kwargs: Any) -> list[dict[str, Any]]:
        return []

    def distinct(self, column: str) -> list[str]:
        return []


@sync
async def test_a_failing_query_becomes_a_notice() -> None:
    app = make_app(FailingSource())
    async with app.run_test(size=SIZE) as pilot:
        await until(pilot, lambda: any("disk I/O" in n.message for n in app._notifications))
        assert app.is_running


@pytest.mark.parametrize("size", [(80, 24), (200, 50)])
@sync
async def test_usable_at_small_and_large_sizes(archive: Any, size: tuple[int, int]) -> None:
    app = make_app(archive)
    async with app.run_test(size=size) as pilot:
        await until(pilot, loaded(app))
        table = table_of(app)
        assert table.size.height >= 8  # room for rows under the filter form
        assert table.region.right <= size[0]
        preview = app.screen.query_one("#preview-plot", SpectrumPlot)
        if size[0] >= 170:  # wide: a live spectrum preview of the highlighted row
            await until(pilot, lambda: preview.data is not None)
            assert preview.region.x >= table.region.right
        else:
            assert not preview.display or preview.region.width == 0
        await pilot.press("enter")
        await until(pilot, lambda: isinstance(app.screen, DetailScreen))
        screen = app.screen
        await until(pilot, lambda: screen.query_one(SpectrumPlot).data is not None)
        assert screen.query_one(SpectrumPlot).size.height >= 8
