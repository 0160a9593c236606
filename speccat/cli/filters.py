"""The DESIGN.md FILTER flags shared by ``query`` and ``export``, and the ``Filters`` they make."""

from __future__ import annotations

import argparse
import re
from typing import TYPE_CHECKING

if TYPE_CHECKING:  # the archive side (SQLAlchemy) loads only when a command filters
    from speccat.archive.filters import Filters

#: flag name -> key of ``Filters.parse``
FILTER_FLAGS: dict[str, str] = {
    "source": "source",
    "species": "species",
    "line": "line",
    "vel": "vel",
    "freq": "freq",
    "snr": "snr",
    "night": "night",
    "kind": "kind",
    "since": "since",
    "until": "until",
}


def add_filter_arguments(parser: argparse.ArgumentParser) -> None:
    """Add ``--source --species --line --vel --freq --snr --night --kind --unidentified
    --since --until`` (all values are strings, validated by ``Filters.parse``)."""
    # let "--vel -50:10" through: argparse otherwise takes "-50:10" for an option (it only
    # recognises plain negative numbers); none of speccat's options starts with "-<digit>"
    parser._negative_number_matcher = re.compile(r"^-\.?\d")
    group = parser.add_argument_group("filters")
    group.add_argument("--source", metavar="GLOB", help="source name glob (* and ?, any case)")
    group.add_argument("--species", metavar="GLOB", help="species glob, e.g. 'H*' or OH")
    group.add_argument("--line", metavar="NAME", help="line name, e.g. H109a, H109alpha, OH1667")
    group.add_argument(
        "--vel", metavar="MIN:MAX", help="LSR velocity range in km/s; a side may be empty"
    )
    group.add_argument(
        "--freq",
        metavar="MIN:MAX",
        help="observed frequency range; units allowed, bare numbers are MHz",
    )
    group.add_argument("--snr", metavar="MIN", help="minimum signal-to-noise ratio")
    group.add_argument("--night", metavar="LABEL", help="night label")
    group.add_argument("--kind", metavar="KIND", help="emission or absorption")
    group.add_argument(
        "--unidentified", action="store_true", help="only detections without an identification"
    )
    group.add_argument("--since", metavar="DATE", help="observed on or after DATE (UTC, ISO 8601)")
    group.add_argument(
        "--until", metavar="DATE", help="observed on or before DATE (a date alone: the whole day)"
    )


def filters_from_args(args: argparse.Namespace) -> Filters:
    from speccat.archive.filters import Filters

    values: dict[str, object] = {
        key: getattr(args, flag, None) for flag, key in FILTER_FLAGS.items()
    }
    values["unidentified"] = bool(getattr(args, "unidentified", False))
    return Filters.parse(values)
