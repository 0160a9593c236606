"""Regenerate the README's screenshots with the browser's own ``save_screenshot``.

    python scripts/make_screenshots.py [--out docs/screenshots] [--size 120x36]

Ingests the bundled ``sample_archive/`` night into a temporary archive (through the same
``speccat.pipeline.ingest`` as ``speccat ingest``), runs ``speccat browse`` headless on it and
writes ``main.svg`` (the detection list) and ``detail.svg`` (the inspector on the strongest
identified detection). Nothing is drawn by hand: rerun after any change to the screens.
"""

from __future__ import annotations

import argparse
import asyncio
import os
import sys
import tempfile
import time
from collections.abc import Callable
from pathlib import Path
from typing import Any

ROOT = Path(__file__).resolve().parents[1]


async def _until(pilot: Any, cond: Callable[[], bool], timeout: float = 120.0) -> None:
    end = time.monotonic() + timeout
    while not cond():
        if time.monotonic() > end:
            raise TimeoutError("the browser did not settle")
        await pilot.pause(0.05)


async def _shoot(archive: Any, out: Path, size: tuple[int, int]) -> list[Path]:
    from speccat.tui.app import make_app
    from speccat.tui.detail_screen import DetailScreen
    from speccat.tui.widgets.plot import SpectrumPlot
    from speccat.tui.widgets.table import DetectionTable

    app = make_app(archive)
    written = []
    async with app.run_test(size=size) as pilot:
        await _until(pilot, lambda: len(app.screen_stack) > 1)
        table = app.screen_stack[1].query_one(DetectionTable)
        await _until(pilot, lambda: not table._loading and table.row(0) is not None)
        # highlight the strongest identified line, so the inspector shows a velocity axis
        index = next(
            (i for i in range(min(table.total, 200)) if (table.row(i) or {}).get("line")), 0
        )
        table.cursor_row = index
        await pilot.pause(0.3)
        written.append(Path(app.save_screenshot("main.svg", str(out))))
        await pilot.press("enter")
        await _until(pilot, lambda: isinstance(app.screen, DetailScreen))
        plot = app.screen.query_one(SpectrumPlot)
        await _until(pilot, lambda: plot.data is not None)
        await pilot.pause(0.3)
        written.append(Path(app.save_screenshot("detail.svg", str(out))))
    return written


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, default=ROOT / "docs" / "screenshots")
    parser.add_argument("--size", default="120x36", help="terminal size COLSxROWS")
    args = parser.parse_args(argv)
    cols, rows = (int(v) for v in args.size.lower().split("x"))
    os.environ.setdefault("TEXTUAL_ANIMATIONS", "none")

    from speccat.archive import Archive
    from speccat.config import load_settings
    from speccat.pipeline import ingest

    args.out.mkdir(parents=True, exist_ok=True)
    with tempfile.TemporaryDirectory(prefix="speccat-shots-") as tmp:
        db = Path(tmp) / "sample-night.sqlite"
        settings = load_settings({"archive": str(db)})
        archive = Archive.open(str(db), create=True)
        try:
            ingest([ROOT / "sample_archive"], archive, settings)
        finally:
            archive.close()
        archive = Archive.open(str(db), readonly=True)
        try:
            for path in asyncio.run(_shoot(archive, args.out, (cols, rows))):
                print(f"wrote {path}")
        finally:
            archive.close()
    return 0


if __name__ == "__main__":
    sys.exit(main())
