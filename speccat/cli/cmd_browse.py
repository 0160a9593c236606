"""``speccat browse``: the terminal browser over the archive (read-only)."""

from __future__ import annotations

import argparse
import sys

from speccat.config import load_settings
from speccat.errors import SpeccatError

NAME = "browse"
HELP = "browse, filter, inspect and export the archive's detections in a terminal UI"
ORDER = 20


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.epilog = (
        "Keys: / edits the filters, enter inspects a detection, space marks it, "
        "x/X exports, ? lists every key, q quits."
    )


def interactive() -> bool:
    """True when both standard input and output are a terminal."""
    return sys.stdout.isatty() and sys.stdin.isatty()


def run(args: argparse.Namespace) -> int:
    if not interactive():
        raise SpeccatError(
            "browse needs an interactive terminal (stdin and stdout are not both a terminal); "
            "use `speccat query` or `speccat export` in scripts"
        )
    from speccat.archive import Archive  # deferred: keeps `speccat --help` fast

    settings = load_settings({"archive": args.archive})
    archive = Archive.open(settings.archive, readonly=True)  # raises ArchiveError, printed by main
    try:
        from speccat.tui.app import make_app

        make_app(archive).run()
    finally:
        archive.close()
    return 0
