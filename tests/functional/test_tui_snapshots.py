"""SVG snapshots of the browser's two main screens at a fixed size on a deterministic archive.

Regenerate after an intended change with ``pytest tests/functional/test_tui_snapshots.py
--snapshot-update`` and look at the SVGs before committing them.
"""

from __future__ import annotations

import time
from pathlib import Path
from typing import Any

import pytest
from textual.pilot import Pilot
from tui_archive import build_archive

from speccat.archive import Archive
from speccat.tui.app import make_app
from speccat.tui.detail_screen import DetailScreen
from speccat.tui.widgets.plot import SpectrumPlot
from speccat.tui.widgets.table import DetectionTable

SIZE = (110, 34)


@pytest.fixture(scope="module")
def archive_path(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return build_archive(tmp_path_factory.mktemp("snap") / "night.sqlite")


@pytest.fixture
def archive(archive_path: Path) -> Any:
    a = Archive.open(str(archive_path), readonly=True)
    yield a
    a.close()


async def _wait(pilot: Pilot[Any], cond: Any, timeout: float = 60.0) -> None:
    end = time.monotonic() + timeout
    while not cond():
        assert time.monotonic() < end, "the app did not settle"
        await pilot.pause(0.05)


async def _table_ready(pilot: Pilot[Any]) -> None:
    app = pilot.app
    await _wait(pilot, lambda: len(app.screen_stack) > 1)
    table = app.screen_stack[1].query_one(DetectionTable)
    await _wait(pilot, lambda: not table._loading and table.row(table.cursor_row) is not None)
    await _wait(pilot, lambda: "row 1 of" in str(app.screen.query_one("#status").render()))
    await pilot.pause(0.1)


async def _detail_ready(pilot: Pilot[Any]) -> None:
    await _table_ready(pilot)
    await pilot.press("down", "enter")
    app = pilot.app
    await _wait(pilot, lambda: isinstance(app.screen, DetailScreen))
    screen = app.screen
    await _wait(pilot, lambda: screen.query_one(SpectrumPlot).data is not None)
    await pilot.pause(0.1)


def test_main_screen_snapshot(archive: Any, snap_compare: Any) -> None:
    assert snap_compare(make_app(archive), terminal_size=SIZE, run_before=_table_ready)


def test_detail_view_snapshot(archive: Any, snap_compare: Any) -> None:
    assert snap_compare(make_app(archive), terminal_size=SIZE, run_before=_detail_ready)
