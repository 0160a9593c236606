"""``speccat report [--night LABEL]``: what a night brought."""

from __future__ import annotations

import argparse
import json
import sys
from collections.abc import Sequence
from typing import Any

from speccat.config import load_settings

NAME = "report"
HELP = "summarise a night: files, sources, lines per species, strongest and unidentified features, flags, failures"
ORDER = 32

_DET_COLUMNS = (
    "detection_id",
    "source",
    "line",
    "v_lsr_kms",
    "obs_freq_mhz",
    "peak",
    "snr",
    "flags",
)


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--night", metavar="LABEL", help="night to report (default: the latest)")
    parser.add_argument(
        "--format",
        choices=["table", "json"],
        default="table",
        help="output format (default: table)",
    )


def run(args: argparse.Namespace) -> int:
    from speccat.archive import Archive
    from speccat.archive.filters import check_text

    night = None if args.night is None else check_text(args.night, "--night")
    settings = load_settings({"archive": args.archive})
    with Archive.open(settings.archive, readonly=True) as archive:
        report = archive.night_report(night)
    if args.format == "json":
        json.dump(report, sys.stdout, indent=1, ensure_ascii=False, allow_nan=False)
        sys.stdout.write("\n")
    else:
        print_report(report)
    return 0


def _table(title: str, columns: Sequence[str], rows: Sequence[Sequence[Any]], plain: bool) -> Any:
    from rich import box
    from rich.table import Table

    from speccat.cli.common import format_cell

    table = Table(title=title, box=None if plain else box.SIMPLE_HEAD, title_justify="left")
    for col in columns:
        table.add_column(col, overflow="fold")
    for row in rows:
        table.add_row(*[format_cell(v) for v in row])
    return table


def print_report(report: dict[str, Any]) -> None:
    """Rich tables on a terminal; borderless plain text when piped (rich drops colour then,
    and honours NO_COLOR)."""
    from speccat.cli.common import console

    out = console()
    plain = not out.is_terminal
    out.print(
        f"night {report['night']}: {report['files']} files, {report['spectra']} spectra, "
        f"{report['detections']} detections ({report['identified']} identified, "
        f"{report['unidentified']} unidentified), {len(report['failures'])} unreadable files",
        markup=False,
    )
    sections = [
        (
            "sources observed",
            ("source", "spectra", "detections"),
            [tuple(s.values()) for s in report["sources"]],
        ),
        (
            "detections per species and line",
            ("species", "line", "detections", "max_snr"),
            [tuple(r.values()) for r in report["lines"]],
        ),
        (
            "strongest detections",
            _DET_COLUMNS,
            [tuple(r.get(c) for c in _DET_COLUMNS) for r in report["strongest"]],
        ),
        (
            "unidentified features",
            _DET_COLUMNS,
            [tuple(r.get(c) for c in _DET_COLUMNS) for r in report["unidentified_features"]],
        ),
        ("detection flags", ("flag", "detections"), list(report["detection_flags"].items())),
        ("spectrum flags", ("flag", "spectra"), list(report["spectrum_flags"].items())),
        (
            "unreadable files",
            ("path", "reason"),
            [(f["path"], f["reason"]) for f in report["failures"]],
        ),
    ]
    for title, columns, rows in sections:
        out.print()
        if rows:
            out.print(_table(title, columns, rows, plain))
        else:
            out.print(f"{title}: none", markup=False)
