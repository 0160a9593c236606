"""``speccat demo``: archive the bundled sample night in a temporary folder and browse it."""

from __future__ import annotations

import argparse
import shutil
import sys
import tempfile
from pathlib import Path

from speccat.config import load_settings
from speccat.errors import SpeccatError

NAME = "demo"
HELP = "build an archive from the bundled sample night in a temporary folder and browse it"
ORDER = 90


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument(
        "--keep",
        action="store_true",
        help="keep the temporary archive afterwards (its path is printed)",
    )
    parser.add_argument(
        "--jobs", type=int, metavar="N", help="worker processes (default: one per core)"
    )


def sample_archive_dir() -> Path:
    """The bundled sample night: next to the package in a source checkout, else ./sample_archive."""
    for candidate in (
        Path(__file__).resolve().parents[2] / "sample_archive",
        Path.cwd() / "sample_archive",
    ):
        if candidate.is_dir():
            return candidate
    raise SpeccatError("sample_archive/ not found: run speccat demo from a source checkout")


def run(args: argparse.Namespace) -> int:
    from speccat.archive import Archive
    from speccat.cli.summary import print_ingest_summary
    from speccat.pipeline import ingest

    folder = Path(tempfile.mkdtemp(prefix="speccat-demo-"))
    db = folder / "demo.sqlite"
    try:
        settings = load_settings({"archive": str(db), "jobs": args.jobs})
        archive = Archive.open(str(db), create=True)
        try:
            summary = ingest([sample_archive_dir()], archive, settings, jobs=args.jobs)
        finally:
            archive.close()
        interactive = sys.stdin.isatty() and sys.stdout.isatty()
        if not interactive:
            print_ingest_summary(summary, str(db))
            print(
                "(no terminal: showing the summary instead of the browser; "
                f"try  speccat --archive {db} browse)"
                if args.keep
                else "(no terminal: showing the summary instead of the browser)"
            )
            return 0
        from speccat.tui.app import make_app

        archive = Archive.open(str(db), readonly=True)
        try:
            make_app(archive).run()
        finally:
            archive.close()
        return 0
    finally:
        if args.keep:
            print(f"demo archive kept at {db}")
        else:
            shutil.rmtree(folder, ignore_errors=True)
