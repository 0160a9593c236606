"""The speccat archive: SQLAlchemy schema, ``Archive`` (open, store, query), ``Filters``.

SQLite files by default, PostgreSQL through ``postgresql+psycopg://`` URLs; one code path.
The names below load their modules on first use, so that an ingest worker, which only needs
``speccat.archive.rows``, does not import the query side (about 0.5 s of start-up).
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING, Any

from speccat.errors import ArchiveError, FilterError

if TYPE_CHECKING:
    from speccat.archive.core import Archive
    from speccat.archive.filters import Filters
    from speccat.archive.records import EXPORT_COLUMNS, EXTRA_COLUMNS, UNITS, StoredSpectrum
    from speccat.archive.schema import SCHEMA_VERSION

_HOME = {
    "Archive": "speccat.archive.core",
    "Filters": "speccat.archive.filters",
    "EXPORT_COLUMNS": "speccat.archive.records",
    "EXTRA_COLUMNS": "speccat.archive.records",
    "UNITS": "speccat.archive.records",
    "StoredSpectrum": "speccat.archive.records",
    "SCHEMA_VERSION": "speccat.archive.schema",
}


def __getattr__(name: str) -> Any:
    if name not in _HOME:
        raise AttributeError(f"module 'speccat.archive' has no attribute {name!r}")
    value = getattr(importlib.import_module(_HOME[name]), name)
    globals()[name] = value
    return value


__all__ = [
    "EXPORT_COLUMNS",
    "EXTRA_COLUMNS",
    "SCHEMA_VERSION",
    "UNITS",
    "Archive",
    "ArchiveError",
    "FilterError",
    "Filters",
    "StoredSpectrum",
]
