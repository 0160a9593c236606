"""``speccat catalogue``: look up rest frequencies in the built-in (and the user's) catalogue."""

from __future__ import annotations

import argparse
import sys
from typing import Any

from speccat.catalogue import Catalogue, CatalogueLine, load
from speccat.cli.common import add_format_argument, console, write_records
from speccat.config import load_settings
from speccat.errors import CatalogueError
from speccat.model import C_KMS
from speccat.quantities import parse_frequency_hz

NAME = "catalogue"
HELP = (
    "list rest frequencies of spectral lines (built-in catalogue plus your own file); "
    "--format json/csv add each line's reference"
)
ORDER = 60

#: Exported fields (DESIGN.md contract: ``catalogue --format json``).
COLUMNS = ("name", "species", "transition", "rest_freq_mhz", "reference")
#: A terminal table shows at most this many rows unless --limit says otherwise.
TABLE_DEFAULT_LIMIT = 200


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument(
        "--near",
        metavar="FREQ",
        help="centre of the frequency window, with units (5008.9MHz, 1.42GHz; bare numbers MHz)",
    )
    parser.add_argument(
        "--window",
        metavar="FREQ",
        help="half-width of the window around --near (default: the velocity window of the "
        "settings, 400 km/s, expressed in frequency at --near)",
    )
    parser.add_argument("--species", metavar="PATTERN", help="species glob, e.g. 'CH3OH', '*CO'")
    parser.add_argument("--name", metavar="PATTERN", help="line-name glob, e.g. 'H1??a', 'OH*'")
    parser.add_argument(
        "--catalogue",
        metavar="FILE",
        help="extra catalogue CSV merged with the built-in one (default: from the settings)",
    )
    parser.add_argument("--limit", metavar="N", type=int, help="show at most N lines")
    add_format_argument(parser)


def select(
    catalogue: Catalogue,
    near_hz: float | None = None,
    half_window_hz: float | None = None,
    species: str | None = None,
    name: str | None = None,
) -> list[CatalogueLine]:
    """Lines of ``catalogue`` within ``near_hz ± half_window_hz`` matching the globs."""
    if near_hz is not None and half_window_hz is not None:
        pool = catalogue.between(near_hz - half_window_hz, near_hz + half_window_hz)
    else:
        pool = list(catalogue.lines)
    if species is None and name is None:
        return pool
    keep = {id(line) for line in catalogue.search(species=species, name=name)}
    return [line for line in pool if id(line) in keep]


def run(args: argparse.Namespace) -> int:
    settings = load_settings({"catalogue": args.catalogue})
    near_hz = half_hz = None
    if args.window is not None and args.near is None:
        raise CatalogueError("--window needs --near (the centre of the window)")
    if args.near is not None:
        near_hz = parse_frequency_hz(args.near, "--near")
        if near_hz <= 0:
            raise CatalogueError(f"--near: the frequency must be positive, got {args.near!r}")
        if args.window is not None:
            half_hz = parse_frequency_hz(args.window, "--window")
            if half_hz < 0:
                raise CatalogueError(
                    f"--window: the half-width must not be negative, got {args.window!r}"
                )
        else:
            half_hz = near_hz * settings.vel_window_kms / C_KMS
    if args.limit is not None and args.limit < 1:
        raise CatalogueError(f"--limit: expected a positive number of lines, got {args.limit}")

    catalogue = load(settings.catalogue or None)
    lines = select(catalogue, near_hz, half_hz, args.species, args.name)
    if near_hz is not None:
        lines.sort(key=lambda line: abs(line.rest_freq_hz - near_hz))
    limit = args.limit
    if limit is None and args.format == "table":
        limit = TABLE_DEFAULT_LIMIT
    shown = lines if limit is None else lines[:limit]

    if args.format != "table":
        write_records((_record(line) for line in shown), COLUMNS, args.format)
        return 0
    _print_table(shown, near_hz)
    err = console(stderr=True)
    if not lines:
        err.print("no catalogue line matches")
    elif len(shown) < len(lines):
        err.print(f"showing {len(shown)} of {len(lines)} lines (use --limit N for more)")
    return 0


def _record(line: CatalogueLine) -> dict[str, Any]:
    return {
        "name": line.name,
        "species": line.species,
        "transition": line.transition,
        "rest_freq_mhz": line.rest_freq_mhz,
        "reference": line.reference,
    }


def _print_table(lines: list[CatalogueLine], near_hz: float | None) -> None:
    from rich.table import Table  # front end only; the catalogue itself never imports rich

    table = Table(title="speccat catalogue" if sys.stdout.isatty() else None)
    table.add_column("name", no_wrap=True)
    table.add_column("transition", overflow="fold", min_width=10)
    table.add_column("rest MHz", justify="right", no_wrap=True)
    if near_hz is not None:
        table.add_column("v km/s", justify="right", no_wrap=True)  # of a line seen at --near
    table.add_column("class", no_wrap=True)
    table.add_column("FWHM km/s", overflow="fold")
    table.add_column("prior", justify="right")
    for line in lines:
        cells = [line.name, line.transition, f"{line.rest_freq_mhz:.6f}"]
        if near_hz is not None:
            # radio convention: the LSR velocity a line observed at --near would have
            cells.append(f"{C_KMS * (1 - near_hz / line.rest_freq_hz):+.1f}")
        cells += [
            "RRL" if line.line_class == "recombination" else line.line_class,
            f"{line.width_min_kms:g}-{line.width_max_kms:g}",
            f"{line.prior:.2f}",
        ]
        table.add_row(*cells)
    console().print(table)
