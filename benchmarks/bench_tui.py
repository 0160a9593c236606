"""Terminal browser: first paint, filter-to-repaint, jump to the last row, cursor-to-spectrum.

Runs the real app headless (Textual's ``run_test``) over an archive filled by
``bench_archive.fill`` (100k detections quick, 1M full). Issue 8's targets at 1M: first paint
< 1.5 s; filter change to repainted table < 150 ms; cursor to a new row and its spectrum drawn
< 100 ms. Times are wall-clock from the action until the screen state is reached, polled every
millisecond, so they include one event-loop turn.
"""

from __future__ import annotations

import asyncio
import statistics
import tempfile
import time
from collections.abc import Callable
from pathlib import Path
from typing import Any

from benchmarks.bench_archive import FILTERS, fill

FILTER_CHANGES = ("source", "line", "vel", "snr", "night", "kind", "unidentified")


async def _until(pilot: Any, cond: Callable[[], bool], timeout: float = 60.0) -> float:
    t0 = time.perf_counter()
    while not cond():
        if time.perf_counter() - t0 > timeout:
            raise TimeoutError("the browser did not reach the state")
        await asyncio.sleep(0.001)
    return time.perf_counter() - t0


def _table_ready(app: Any) -> Callable[[], bool]:
    from speccat.tui.widgets.table import DetectionTable

    def ready() -> bool:
        if len(app.screen_stack) < 2:
            return False
        table = app.screen_stack[1].query_one(DetectionTable)
        return not table._loading and (table.total == 0 or table.row(table.cursor_row) is not None)

    return ready


async def _session(db: Path) -> dict[str, Any]:
    from speccat.archive import Archive
    from speccat.tui import services
    from speccat.tui.app import make_app
    from speccat.tui.detail_screen import DetailScreen
    from speccat.tui.widgets.filters import FilterForm
    from speccat.tui.widgets.plot import SpectrumPlot
    from speccat.tui.widgets.table import DetectionTable

    services.warm_up()  # imports are start-up cost, not paint cost
    out: dict[str, Any] = {}
    archive = Archive.open(str(db), readonly=True)
    try:
        t0 = time.perf_counter()
        app = make_app(archive)
        async with app.run_test(size=(120, 36)) as pilot:
            await _until(pilot, _table_ready(app))
            out["first_paint_s"] = time.perf_counter() - t0
            screen = app.screen_stack[1]
            table = screen.query_one(DetectionTable)
            form = screen.query_one(FilterForm)

            times = []
            for name in FILTER_CHANGES:
                gen = table._generation
                form.clear()
                for key, value in FILTERS[name].items():
                    form.query_one(f"#filter-{key}").value = value
                t = time.perf_counter()
                form.apply_now()  # what the debounce calls 0.3 s after the last key
                await _until(pilot, lambda g=gen: table._generation > g and _table_ready(app)())
                times.append(time.perf_counter() - t)
            out["filter_s"] = times

            form.clear()
            form.apply_now()
            await _until(pilot, _table_ready(app))
            t = time.perf_counter()
            table.action_jump(-1)
            await _until(pilot, lambda: table.row(table.cursor_row) is not None)
            out["jump_end_s"] = time.perf_counter() - t
            table.action_jump(0)
            await _until(pilot, _table_ready(app))

            await pilot.press("enter")
            await _until(pilot, lambda: isinstance(app.screen, DetailScreen))
            detail = app.screen
            plot = detail.query_one(SpectrumPlot)
            await _until(pilot, lambda: plot.data is not None)
            moves = []
            for _ in range(10):
                before = plot.data
                t = time.perf_counter()
                detail.action_step(1)
                await _until(pilot, lambda b=before: plot.data is not b)
                plot.plain_lines()  # lay the braille rows out, as a repaint does
                moves.append(time.perf_counter() - t)
            out["cursor_spectrum_s"] = moves
    finally:
        archive.close()
    return out


def run(quick: bool) -> list[dict[str, Any]]:
    n = 100_000 if quick else 1_000_000
    with tempfile.TemporaryDirectory(prefix="bench-tui-") as tmp:
        db = Path(tmp) / "tui.sqlite"
        fill(db, n)
        res = asyncio.run(_session(db))
    label = f"{n // 1000}k detections"
    return [
        {
            "figure": f"browse: first paint ({label})",
            "value": round(res["first_paint_s"] * 1e3, 1),
            "unit": "ms",
            "target": 1500 if n >= 1_000_000 else None,
        },
        {
            "figure": f"browse: filter change to repainted table, median of "
            f"{len(res['filter_s'])} filters ({label})",
            "value": round(statistics.median(res["filter_s"]) * 1e3, 1),
            "unit": "ms",
            "target": 150 if n >= 1_000_000 else None,
        },
        {
            "figure": f"browse: slowest filter change ({label})",
            "value": round(max(res["filter_s"]) * 1e3, 1),
            "unit": "ms",
        },
        {
            "figure": f"browse: jump to the last row, drawn ({label})",
            "value": round(res["jump_end_s"] * 1e3, 1),
            "unit": "ms",
        },
        {
            "figure": f"browse: cursor to next row with its spectrum drawn, median ({label})",
            "value": round(statistics.median(res["cursor_spectrum_s"]) * 1e3, 1),
            "unit": "ms",
            "target": 100 if n >= 1_000_000 else None,
        },
    ]


if __name__ == "__main__":
    for row in run(quick=True):
        print(row)
