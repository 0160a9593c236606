"""``speccat ingest PATH...``: read, measure, identify and archive a night of spectra."""

from __future__ import annotations

import argparse
import json
import os
import sys

from speccat.config import load_settings

NAME = "ingest"
HELP = "read every spectrum under the paths, measure and identify its lines, and archive them"
ORDER = 10
MAX_NIGHT_CHARS = 100


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument(
        "paths", nargs="+", metavar="PATH", help="files or folders (searched recursively)"
    )
    parser.add_argument(
        "--night",
        metavar="LABEL",
        help="label for this night (default: from the "
        "earliest observation, UTC date shifted back 12 hours)",
    )
    parser.add_argument(
        "--jobs", type=int, metavar="N", help="worker processes (default: one per core)"
    )
    parser.add_argument(
        "--catalogue", metavar="FILE", help="extra catalogue file merged with the built-in lines"
    )
    parser.add_argument(
        "--detect-sigma", type=float, metavar="S", help="line-finding threshold in sigma"
    )
    parser.add_argument("--json", action="store_true", help="print the summary as JSON")


def run(args: argparse.Namespace) -> int:
    from speccat.archive import Archive
    from speccat.cli.common import console
    from speccat.cli.summary import print_ingest_summary
    from speccat.errors import SpeccatError
    from speccat.pipeline import ingest
    from speccat.workers import start_workers

    if args.jobs is not None and args.jobs < 1:
        raise SpeccatError("--jobs must be at least 1")
    if args.night is not None and not 0 < len(args.night.strip()) <= MAX_NIGHT_CHARS:
        # the archive's night columns hold 100 characters (PostgreSQL enforces it mid-run)
        raise SpeccatError(f"--night must be 1 to {MAX_NIGHT_CHARS} characters")
    settings = load_settings(
        {
            "archive": args.archive,
            "jobs": args.jobs,
            "catalogue": args.catalogue,
            "detect_sigma": args.detect_sigma,
        }
    )
    start_workers(args.jobs or settings.jobs or os.cpu_count() or 1)
    archive = Archive.open(settings.archive, create=True)
    try:
        show_bar = sys.stderr.isatty() and not args.json
        if show_bar:
            from rich.progress import (
                BarColumn,
                MofNCompleteColumn,
                Progress,
                TextColumn,
                TimeRemainingColumn,
            )

            with Progress(
                TextColumn("ingesting"),
                BarColumn(),
                MofNCompleteColumn(),
                TextColumn("{task.fields[rate]}"),
                TimeRemainingColumn(),
                console=console(stderr=True),
                transient=True,
            ) as bar:
                task = bar.add_task("ingest", total=None, rate="")

                def progress(done: int, total: int, path: str) -> None:
                    elapsed = bar.tasks[0].elapsed or 0.0
                    rate = f"{done / elapsed:.1f} files/s" if elapsed > 0 and done else ""
                    bar.update(task, completed=done, total=total, rate=rate)

                summary = ingest(
                    args.paths,
                    archive,
                    settings,
                    night=args.night,
                    jobs=args.jobs,
                    progress=progress,
                )
        else:
            summary = ingest(args.paths, archive, settings, night=args.night, jobs=args.jobs)
    finally:
        archive.close()
    if args.json:
        json.dump(summary.as_dict(), sys.stdout, indent=1)
        sys.stdout.write("\n")
    else:
        print_ingest_summary(summary, settings.archive)
    return 0
