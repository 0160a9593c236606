"""The archive's tables (SQLAlchemy Core), its schema version and the ordered migrations.

One schema serves SQLite and PostgreSQL. JSON-like fields are stored as TEXT written by
``json.dumps`` (so NaN survives and both engines behave alike). Times are naive UTC datetimes.
Detections carry the spectrum's source/night/obs_time and the primary identification
(species, line, v_LSR) denormalised so that every filter reads one table through an index;
``source_lc``/``species_lc`` are lower-cased copies for case-insensitive globbing.
"""

from __future__ import annotations

from collections.abc import Callable, MutableMapping
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

from speccat.archive.widths import STRING_LENGTHS
from speccat.archive.widths import clip_strings as _clip_row
from speccat.archive.widths import string_lengths as string_lengths

metadata = MetaData()

#: Index of detections in the default (snr, id) order that also holds the range/glob filters'
#: columns (schema version 2).
WALK_INDEX = "ix_det_snr_walk"

# SQLite maps "INTEGER PRIMARY KEY" to the rowid; PostgreSQL needs a 64-bit identity for 1M+.
_ID = BigInteger().with_variant(Integer(), "sqlite")


def _pk() -> Column[int]:
    return Column("id", _ID, primary_key=True, autoincrement=True)


def _str(table: str, name: str, **options: Any) -> Column[str]:
    """A ``String(n)`` column, n from ``widths.STRING_LENGTHS`` (the workers clip rows with it)."""
    return Column(name, String(STRING_LENGTHS[table][name]), **options)


schema_version = Table("schema_version", metadata, Column("version", Integer, nullable=False))

runs = Table(
    "runs",
    metadata,
    _pk(),
    _str("runs", "user", nullable=False),
    _str("runs", "host", nullable=False),
    Column("started_utc", DateTime, nullable=False),
    Column("finished_utc", DateTime),
    _str("runs", "speccat_version", nullable=False),
    Column("parameters", Text, nullable=False),
    Column("counts", Text),
)

files = Table(
    "files",
    metadata,
    _pk(),
    Column("path", Text, nullable=False),
    Column("size_bytes", BigInteger, nullable=False),
    _str("files", "sha256", nullable=False, unique=True),
    Column("run_id", _ID, ForeignKey("runs.id"), nullable=False),
    _str("files", "night", nullable=False),
    Index("ix_files_night", "night"),
)

failures = Table(
    "failures",
    metadata,
    _pk(),
    Column("run_id", _ID, ForeignKey("runs.id"), nullable=False),
    Column("path", Text, nullable=False),
    Column("reason", Text, nullable=False),
    _str("failures", "night"),
    Index("ix_failures_run", "run_id"),
)

spectra = Table(
    "spectra",
    metadata,
    _pk(),
    Column("file_id", _ID, ForeignKey("files.id", ondelete="CASCADE"), nullable=False),
    Column("hdu", Integer),
    Column("row", Integer),
    _str("spectra", "source", nullable=False),
    Column("ra_deg", Float),
    Column("dec_deg", Float),
    Column("obs_time", DateTime),
    _str("spectra", "night", nullable=False),
    Column("site_lon_deg", Float),
    Column("site_lat_deg", Float),
    Column("site_height_m", Float),
    _str("spectra", "telescope", nullable=False),
    _str("spectra", "specsys", nullable=False),
    Column("rest_freq_hz", Float),
    _str("spectra", "velocity_convention"),
    Column("velosys_ms", Float),
    Column("lsrk_factor", Float, nullable=False),
    _str("spectra", "frame_flag"),
    Column("stokes", Text, nullable=False),  # JSON list, order of the products in ``data``
    _str("spectra", "primary_stokes", nullable=False),
    Column("n_channels", Integer, nullable=False),
    _str("spectra", "intensity_unit", nullable=False),
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
    _str("detections", "stokes", nullable=False),
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
    _str("detections", "kind", nullable=False),
    _str("detections", "profile", nullable=False),
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
    _str("detections", "species"),
    _str("detections", "species_lc"),
    _str("detections", "line"),
    _str("detections", "transition"),
    Column("rest_freq_hz", Float),
    Column("id_score", Float),
    # copied from the spectrum for one-table filters
    _str("detections", "source", nullable=False),
    _str("detections", "source_lc", nullable=False),
    _str("detections", "night", nullable=False),
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
    _str("candidates", "name", nullable=False),
    _str("candidates", "species", nullable=False),
    _str("candidates", "transition", nullable=False),
    Column("rest_freq_hz", Float),
    Column("v_lsr_kms", Float),
    Column("score", Float),
    Index("ix_cand_detection", "detection_id", "rank"),
)

sources = Table(
    "sources",
    metadata,
    _pk(),
    _str("sources", "name", nullable=False, unique=True),
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
    _str("lines", "name", nullable=False, unique=True),
    _str("lines", "species", nullable=False),
    _str("lines", "transition", nullable=False),
    Column("rest_freq_hz", Float, nullable=False),
    _str("lines", "line_class"),
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


def clip_strings(table: Table, row: MutableMapping[str, Any]) -> bool:
    """``widths.clip_strings`` for a table of this schema (True when anything was cut)."""
    return _clip_row(table.name, row)
