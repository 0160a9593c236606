"""Maximum lengths of the archive's text columns, and the clipping of a row to them.

The one home of these numbers: ``schema`` makes its ``String(n)`` columns from ``STRING_LENGTHS``
and the ingest workers clip their rows with it (``rows``). Kept free of SQLAlchemy so that a
worker, which builds rows but never touches a database, does not import it (~0.35 s of CPU per
worker process).
"""

from __future__ import annotations

from collections.abc import Mapping, MutableMapping
from typing import Any

# Shared widths, in characters.
_NAME = 100  # a line's name or species; a night label
_TEXT = 200  # a source or telescope name, a transition, a user or host name
_CODE = 40  # short codes: spectral frame, intensity unit, line class
_WORD = 20  # one word: line kind, profile, velocity convention
_STOKES = 10

#: Table name -> column name -> maximum length of each ``String(n)`` column (characters).
STRING_LENGTHS: Mapping[str, Mapping[str, int]] = {
    "runs": {"user": _TEXT, "host": _TEXT, "speccat_version": 50},
    "files": {"sha256": 64, "night": _NAME},
    "failures": {"night": _NAME},
    "spectra": {
        "source": _TEXT,
        "night": _NAME,
        "telescope": _TEXT,
        "specsys": _CODE,
        "velocity_convention": _WORD,
        "frame_flag": _NAME,
        "primary_stokes": _STOKES,
        "intensity_unit": _CODE,
    },
    "detections": {
        "stokes": _STOKES,
        "kind": _WORD,
        "profile": _WORD,
        "species": _NAME,
        "species_lc": _NAME,
        "line": _NAME,
        "transition": _TEXT,
        "source": _TEXT,
        "source_lc": _TEXT,
        "night": _NAME,
    },
    "candidates": {"name": _NAME, "species": _NAME, "transition": _TEXT},
    "sources": {"name": _TEXT},
    "lines": {"name": _NAME, "species": _NAME, "transition": _TEXT, "line_class": _CODE},
}


def string_lengths(table_name: str) -> Mapping[str, int]:
    """Column name -> maximum length of every ``String(n)`` column of a table."""
    return STRING_LENGTHS[table_name]


def clip_strings(table_name: str, row: MutableMapping[str, Any]) -> bool:
    """Cut, in place, every string longer than its ``String(n)`` column to n characters
    (PostgreSQL refuses an over-long value and with it the whole transaction; SQLite would
    keep it). Returns True when anything was cut."""
    clipped = False
    for name, length in STRING_LENGTHS[table_name].items():
        value = row.get(name)
        if isinstance(value, str) and len(value) > length:
            row[name] = value[:length]
            clipped = True
    return clipped
