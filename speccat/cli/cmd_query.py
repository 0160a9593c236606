"""``speccat query [FILTERS]``: the matching detections, for scripts and quick looks."""

from __future__ import annotations

import argparse

from speccat.cli.filters import add_filter_arguments, filters_from_args
from speccat.config import load_settings

NAME = "query"
HELP = "list the archived detections that match the filters"
ORDER = 30

#: columns of the terminal table (csv/json carry every exported column)
TABLE_COLUMNS = (
    "detection_id",
    "source",
    "line",
    "v_lsr_kms",
    "fwhm_kms",
    "peak",
    "snr",
    "kind",
)


def add_arguments(parser: argparse.ArgumentParser) -> None:
    from speccat.cli.common import add_format_argument

    add_filter_arguments(parser)
    parser.add_argument(
        "--limit", type=int, default=50, metavar="N", help="at most N rows (default 50)"
    )
    parser.add_argument(
        "--sort", default="snr", metavar="COL", help="exported column to sort by (default snr)"
    )
    parser.add_argument(
        "--ascending", action="store_true", help="smallest first (default: largest first)"
    )
    add_format_argument(parser)


def run(args: argparse.Namespace) -> int:
    from speccat.archive import EXPORT_COLUMNS, Archive
    from speccat.cli.common import console, write_records
    from speccat.errors import FilterError

    if not 1 <= args.limit <= 100_000:
        raise FilterError("--limit must be between 1 and 100000")
    filters = filters_from_args(args)
    if args.sort not in EXPORT_COLUMNS:
        raise FilterError(
            f"--sort: unknown column {args.sort[:40]!r}; use one of the exported columns"
        )
    settings = load_settings({"archive": args.archive})
    with Archive.open(settings.archive, readonly=True) as archive:
        rows = archive.page(
            filters, sort=args.sort, descending=not args.ascending, limit=args.limit
        )
        total = archive.count(filters) if args.format == "table" else None
    if args.format == "table":
        write_records(rows, TABLE_COLUMNS, "table")
        console(stderr=True).print(f"{len(rows)} of {total} matching detections shown")
    else:
        write_records(rows, EXPORT_COLUMNS, args.format)
    return 0
