"""The speccat archive: SQLAlchemy schema, ``Archive`` (open, store, query), ``Filters``.

SQLite files by default, PostgreSQL through ``postgresql+psycopg://`` URLs; one code path.
"""

from __future__ import annotations

from speccat.archive.core import Archive
from speccat.archive.filters import Filters
from speccat.archive.records import EXPORT_COLUMNS, EXTRA_COLUMNS, UNITS, StoredSpectrum
from speccat.archive.schema import SCHEMA_VERSION
from speccat.errors import ArchiveError, FilterError

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
