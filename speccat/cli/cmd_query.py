"""``speccat query [FILTERS]``: the matching detections, for scripts and quick looks."""

from __future__ import annotations

import argparse
import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Any

from speccat.cli.filters import add_filter_arguments, filters_from_args
from speccat.config import load_settings

NAME = "query"
HELP = "list the archived detections that match the filters"
ORDER = 30
#: The table's "N of M" counts matches up to here (a full count of a broad filter over a
#: million detections costs more than the page itself).
COUNT_UP_TO = 100_000


def _fixed(digits: int) -> Callable[[Any], str]:
    return lambda v: f"{v:.{digits}f}"


def _significant(v: Any) -> str:
    return f"{v:.4g}"


@dataclass(frozen=True)
class _Col:
    """One column of the terminal table: record key, header, number format (None: text)."""

    key: str
    header: str
    number: Callable[[Any], str] | None = None
    min_width: int = 0  # the table is this narrow or wider before the column is shown


#: Columns of the terminal table, in order; csv/json carry every exported column at full
#: precision. Narrow terminals drop the columns whose ``min_width`` exceeds their width.
TABLE_COLUMNS: tuple[_Col, ...] = (
    _Col("detection_id", "id", str),
    _Col("source", "source"),
    _Col("night", "night", min_width=110),
    _Col("line", "line"),
    _Col("stokes", "Stokes", min_width=130),
    _Col("v_lsr_kms", "v_LSR", _fixed(2)),
    _Col("fwhm_kms", "FWHM", _fixed(2), min_width=64),
    _Col("peak", "peak", _significant, min_width=64),
    _Col("intensity_unit", "unit", min_width=100),
    _Col("snr", "S/N", _fixed(1)),
    _Col("kind", "kind", min_width=72),
    _Col("flags", "flags", min_width=130),
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
        total = archive.count(filters, at_most=COUNT_UP_TO) if args.format == "table" else 0
    if args.format == "table":
        _print_table(rows, console())
        of = f"more than {COUNT_UP_TO}" if total > COUNT_UP_TO else str(total)
        console(stderr=True).print(
            f"{len(rows)} of {of} matching detections shown (v_LSR, FWHM in km/s)"
        )
    else:
        write_records(rows, EXPORT_COLUMNS, args.format)
    return 0


def _cell(col: _Col, value: Any) -> str:
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return ""
    if col.number is not None and isinstance(value, int | float):
        return col.number(value)
    return str(value)


def _print_table(rows: Sequence[dict[str, Any]], out: Any) -> None:
    """The rows as one line each, fitted to the terminal width (text cut with an ellipsis)."""
    from rich import box
    from rich.table import Table

    shown = [c for c in TABLE_COLUMNS if out.width >= c.min_width]
    table = Table(box=box.SIMPLE_HEAD, show_edge=False, pad_edge=False, collapse_padding=True)
    for c in shown:
        if c.number is None:
            table.add_column(c.header, no_wrap=True, overflow="ellipsis")
        else:
            table.add_column(c.header, no_wrap=True, justify="right")
    for r in rows:
        table.add_row(*[_cell(c, r.get(c.key)) for c in shown])
    out.print(table)
