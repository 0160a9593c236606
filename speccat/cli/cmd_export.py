"""``speccat export [FILTERS] -o FILE``: write the matching detections to a file."""

from __future__ import annotations

import argparse

from speccat.cli.filters import add_filter_arguments, filters_from_args
from speccat.config import load_settings

NAME = "export"
HELP = "write the matching detections to a .csv, .ecsv, .vot/.xml (VOTable) or .json file"
ORDER = 31


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_filter_arguments(parser)
    parser.add_argument(
        "-o",
        "--output",
        required=True,
        metavar="FILE",
        help="output file; its suffix picks the format",
    )
    parser.add_argument("--force", action="store_true", help="overwrite FILE if it exists")
    parser.add_argument(
        "--with-derived",
        action="store_true",
        help="add derived physical quantities as extra columns",
    )


def run(args: argparse.Namespace) -> int:
    from speccat.archive import Archive
    from speccat.cli.common import console
    from speccat.export import export, format_for

    filters = filters_from_args(args)
    format_for(args.output)  # an unknown suffix fails before the archive is opened
    settings = load_settings({"archive": args.archive})
    with Archive.open(settings.archive, readonly=True) as archive:
        n = export(archive, filters, args.output, force=args.force, derived=args.with_derived)
    console(stderr=True).print(f"wrote {n} detections to {args.output}", markup=False)
    return 0
