"""Small helpers shared by the subcommands: output formats and the rich console."""

from __future__ import annotations

import json
import math
import sys
from collections.abc import Iterable, Sequence
from typing import Any

from rich.console import Console
from rich.table import Table


def console(stderr: bool = False) -> Console:
    """A rich console; rich itself honours NO_COLOR and plain output when piped."""
    return Console(stderr=stderr, highlight=False)


def add_format_argument(parser: Any, choices: Sequence[str] = ("table", "json", "csv")) -> None:
    parser.add_argument(
        "--format",
        choices=list(choices),
        default="table",
        help="output format (default: table)",
    )


def _json_value(value: Any) -> Any:
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


def write_records(
    records: Iterable[dict[str, Any]],
    columns: Sequence[str],
    fmt: str,
    title: str | None = None,
) -> None:
    """Write records as a rich table, JSON (a list of objects) or CSV on standard output."""
    if fmt == "json":
        data = [{c: _json_value(r.get(c)) for c in columns} for r in records]
        json.dump(data, sys.stdout, indent=1, allow_nan=False)
        sys.stdout.write("\n")
    elif fmt == "csv":
        # the cells and quoting of `speccat export` (numbers in bulk where a column holds only
        # numbers, text quoted where it needs it)
        from speccat.celltext import csv_lines

        sys.stdout.write(csv_lines([columns], ["str"] * len(columns)))
        rows = [[r.get(c) for c in columns] for r in records]
        sys.stdout.write(csv_lines(rows, ["float"] * len(columns)))
    else:
        table = Table(title=title)
        for c in columns:
            table.add_column(c, overflow="fold")
        for r in records:
            table.add_row(*[format_cell(r.get(c)) for c in columns])
        console().print(table)


def format_cell(value: Any) -> str:
    if value is None:
        return ""
    if isinstance(value, float):
        return "" if not math.isfinite(value) else f"{value:.6g}"
    return str(value)
