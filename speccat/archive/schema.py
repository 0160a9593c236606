"""The archive's tables (SQLAlchemy Core), its schema version and the ordered migrations.

One schema serves SQLite and PostgreSQL. JSON-like fields are stored as TEXT written by
``json.dumps`` (so NaN survives and both engines behave alike). Times are naive UTC datetimes.
Detections carry the spectrum's source/night/obs_time and the primary identification
(species, line, v_LSR) denormalised so that every filter reads one table through an index;
``source_lc``/``species_lc`` are lower-cased copies for case-insensitive globbing.
"""

from __future__ import annotations

from collections.abc import Callable, MutableMapping
from functools import cache
from typing import Any

from sqlalchemy import (
    BigInteger,
    Column,
    DateTime,
    Float,
    ForeignKey,
    Index,
    Integer,
    LargeBinary,
    MetaData,
    String,
    Table,
    Text,
)
from sqlalchemy.engine import Connection

metadata = MetaData()

#: Index of detections in the default (snr, id) order that also holds the range/glob filters'
#: columns (schema version 2).
WALK_INDEX = "ix_det_snr_walk"

# SQLite maps "INTEGER PRIMARY KEY" to the rowid; PostgreSQL needs a 64-bit identity for 1M+.
_ID = BigInteger().with_variant(Integer(), "sqlite")


def _pk() -> Column[int]:
    return Column("id", _ID, primary_key=True, autoincrement=True)


schema_version = Table("schema_version", metadata, Column("version", Integer, nullable=False))

runs = Table(
    "runs",
    metadata,
    _pk(),
    Column("user", String(200), nullable=False),
    Column("host", String(200), nullable=False),
    Column("started_utc", DateTime, nullable=False),
    Column("finished_utc", DateTime),
    Column("speccat_version", String(50), nullable=False),
    Column("parameters", Text, nullable=False),
    Column("counts", Text),
)

files = Table(
    "files",
    metadata,
    _pk(),
    Column("path", Text, nullable=False),
    Column("size_bytes", BigInteger, nullable=False),
    Column("sha256", String(64), nullable=False, unique=True),
    Column("run_id", _ID, ForeignKey("runs.id"), nullable=False),
    Column("night", String(100), nullable=False),
    Index("ix_files_night", "night"),
)

failures = Table(
    "failures",
    metadata,
    _pk(),
    Column("run_id", _ID, ForeignKey("runs.id"), nullable=False),
    Column("path", Text, nullable=False),
    Column("reason", Text, nullable=False),
    Column("night", String(100)),
    Index("ix_failures_run", "run_id"),
)

spectra = Table(
    "spectra",
    metadata,
    _pk(),
    Column("file_id", _ID, ForeignKey("files.id", ondelete="CASCADE"), nullable=False),
    Column("hdu", Integer),
    Column("row", Integer),
    Column("source", String(200), nullable=False),
    Column("ra_deg", Float),
    Column("dec_deg", Float),
    Column("obs_time", DateTime),
    Column("night", String(100), nullable=False),
    Column("site_lon_deg", Float),
    Column("site_lat_deg", Float),
    Column("site_height_m", Float),
    Column("telescope", String(200), nullable=False),
    Column("specsys", String(40), nullable=False),
    Column("rest_freq_hz", Float),
    Column("velocity_convention", String(20)),
    Column("velosys_ms", Float),
    Column("lsrk_factor", Float, nullable=False),
    Column("frame_flag", String(100)),
    Column("stokes", Text, nullable=False),  # JSON list, order of the products in ``data``
    Column("primary_stokes", String(10), nullable=False),
    Column("n_channels", Integer, nullable=False),
    Column("intensity_unit", String(40), nullable=False),
    Column("rms", Float),
    Column("continuum", Float),
    Column("baseline", Text, nullable=False),  # JSON of BaselineModel fields
    Column("flags", Text, nullable=False),  # ";"-joined measurement flags
    Column("meta", Text, nullable=False),  # JSON of Spectrum.meta
    Index("ix_spectra_file", "file_id"),
    Index("ix_spectra_source", "source"),
    Index("ix_spectra_night", "night"),
)

# The arrays live apart so that the spectra rows stay small (fast joins, scans and reports).
spectrum_data = Table(
    "spectrum_data",
    metadata,
    Column(
        "spectrum_id",
        _ID,
        ForeignKey("spectra.id", ondelete="CASCADE"),
        primary_key=True,
        autoincrement=False,
    ),
    Column("freq_hz", LargeBinary, nullable=False),  # blobs.encode_freq: float64, exact
    Column("data", LargeBinary, nullable=False),  # blobs.encode_data: float32, products in order
)

detections = Table(
    "detections",
    metadata,
    _pk(),
    Column("spectrum_id", _ID, ForeignKey("spectra.id", ondelete="CASCADE"), nullable=False),
    Column("stokes", String(10), nullable=False),
    # LineFit, on the file's own frequency axis
    Column("center_hz", Float),
    Column("center_err_hz", Float),
    Column("peak", Float),
    Column("peak_err", Float),
    Column("fwhm_hz", Float),
    Column("fwhm_err_hz", Float),
    Column("integral_fit_hz", Float),
    Column("integral_fit_err_hz", Float),
    Column("integral_sum_hz", Float),
    Column("integral_sum_err_hz", Float),
    Column("center_chan", Float),
    Column("fwhm_chan", Float),
    Column("snr", Float),
    Column("chi2_red", Float),
    Column("kind", String(20), nullable=False),
    Column("profile", String(20), nullable=False),
    Column("lorentz_fwhm_hz", Float),
    Column("lorentz_fwhm_err_hz", Float),
    Column("w50_hz", Float),
    Column("w20_hz", Float),
    Column("moment1_hz", Float),
    Column("moment2_hz", Float),
    Column("blend", Integer, nullable=False),
    Column("fit_flags", Text, nullable=False),
    # Detection
    Column("v_lsr_kms", Float),
    Column("v_lsr_err_kms", Float),
    Column("fwhm_kms", Float),
    Column("fwhm_err_kms", Float),
    Column("integral_kms", Float),
    Column("integral_err_kms", Float),
    Column("flags", Text, nullable=False),  # ";"-joined: fit flags then identification flags
    Column("b_los_ug", Float),
    Column("b_los_err_ug", Float),
    # primary identification (NULL when unidentified)
    Column("species", String(100)),
    Column("species_lc", String(100)),
    Column("line", String(100)),
    Column("transition", String(200)),
    Column("rest_freq_hz", Float),
    Column("id_score", Float),
    # copied from the spectrum for one-table filters
    Column("source", String(200), nullable=False),
    Column("source_lc", String(200), nullable=False),
    Column("night", String(100), nullable=False),
    Column("obs_time", DateTime),
    Index("ix_det_spectrum", "spectrum_id"),
    # default order (snr desc, id desc); equality filters + default order read one index range
    Index("ix_det_snr", "snr", "id"),
    Index("ix_det_source", "source_lc", "snr", "id"),
    Index("ix_det_species", "species_lc", "snr", "id"),
    Index("ix_det_line", "line", "snr", "id"),
    Index("ix_det_night", "night", "snr", "id"),
    Index("ix_det_kind", "kind", "snr", "id"),
    # range filters: covering (col, snr) for the default order, (col, id) to sort by col
    Index("ix_det_vlsr", "v_lsr_kms", "id"),
    Index("ix_det_vlsr_snr", "v_lsr_kms", "snr"),
    Index("ix_det_center", "center_hz", "id"),
    Index("ix_det_center_snr", "center_hz", "snr"),
    Index("ix_det_obs_time", "obs_time", "id"),
    Index("ix_det_obs_time_snr", "obs_time", "snr"),
    # combinations the filters use together
    Index("ix_det_species_vlsr", "species_lc", "v_lsr_kms", "snr"),
    Index("ix_det_line_vlsr", "line", "v_lsr_kms", "snr"),
    Index("ix_det_source_night", "source_lc", "night", "snr"),
    Index("ix_det_night_species", "night", "species_lc", "snr"),
    # the default order carrying every range/glob filter column: a first page walks it (no
    # table lookups) and stops at the page, instead of sorting every match (queries.page)
    Index(
        WALK_INDEX,
        "snr",
        "id",
        "v_lsr_kms",
        "center_hz",
        "obs_time",
        "source_lc",
        "species_lc",
    ),
)

candidates = Table(
    "candidates",
    metadata,
    _pk(),
    Column("detection_id", _ID, ForeignKey("detections.id", ondelete="CASCADE"), nullable=False),
    Column("rank", Integer, nullable=False),
    Column("name", String(100), nullable=False),
    Column("species", String(100), nullable=False),
    Column("transition", String(200), nullable=False),
    Column("rest_freq_hz", Float),
    Column("v_lsr_kms", Float),
    Column("score", Float),
    Index("ix_cand_detection", "detection_id", "rank"),
)

sources = Table(
    "sources",
    metadata,
    _pk(),
    Column("name", String(200), nullable=False, unique=True),
    Column("ra_deg", Float),
    Column("dec_deg", Float),
    Column("v_sys_kms", Float),
    Column("n_lines", Integer, nullable=False),
    Column("updated_utc", DateTime, nullable=False),
)

lines = Table(
    "lines",
    metadata,
    _pk(),
    Column("name", String(100), nullable=False, unique=True),
    Column("species", String(100), nullable=False),
    Column("transition", String(200), nullable=False),
    Column("rest_freq_hz", Float, nullable=False),
    Column("line_class", String(40)),
    Column("reference", Text, nullable=False),
)


def _v1_create(conn: Connection) -> None:
    metadata.create_all(conn)


def _v2_walk_index(conn: Connection) -> None:
    """Version 2: the covering walk index of the default order (``WALK_INDEX``). A new
    archive already has it from ``_v1_create`` (which creates the current tables)."""
    index = next(ix for ix in detections.indexes if ix.name == WALK_INDEX)
    index.create(conn, checkfirst=True)


#: Ordered migrations: ``MIGRATIONS[i]`` takes an archive from version ``i`` to ``i + 1``.
#: Append new functions; never edit a released one.
MIGRATIONS: list[Callable[[Connection], None]] = [_v1_create, _v2_walk_index]
SCHEMA_VERSION = len(MIGRATIONS)


@cache
def string_lengths(table_name: str) -> dict[str, int]:
    """Column name -> maximum length of every ``String(n)`` column of a table."""
    table = metadata.tables[table_name]
    return {
        c.name: c.type.length
        for c in table.columns
        if isinstance(c.type, String) and c.type.length is not None
    }


def clip_strings(table: Table, row: MutableMapping[str, Any]) -> bool:
    """Cut, in place, every string longer than its ``String(n)`` column to n characters
    (PostgreSQL refuses an over-long value and with it the whole transaction; SQLite would
    keep it). Returns True when anything was cut."""
    clipped = False
    for name, length in string_lengths(table.name).items():
        value = row.get(name)
        if isinstance(value, str) and len(value) > length:
            row[name] = value[:length]
            clipped = True
    return clipped
