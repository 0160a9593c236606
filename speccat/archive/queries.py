"""The read side of ``Archive``: counts, pages, streams, distinct values, spectra, reports.

Every filter is a bound parameter on the detections table (see ``filters``). Pages are fetched
in two steps: the ids of the page, in order, from the detections table alone (an index scan for
the default ``snr`` order and for each filter), then the full records of those ids.
Ties are broken by detection id in the same direction as the sort. NULLs sort as the smallest
value on both engines.

On SQLite, a first page in the default order (snr, descending) under range or glob filters
(``vel``, ``freq``, ``since``/``until``, a wildcard ``source``/``species``) is read by walking
the covering index ``WALK_INDEX`` over the top ``WALK_ROWS`` rows of that order and stopping
at the page; only when those rows hold too few matches is every match sorted instead (SQLite
has no range statistics to choose between the two, and either alone is slow at 1M rows for
some ranges). Both give the same rows.
"""

from __future__ import annotations

import json
from collections.abc import Iterator, Sequence
from dataclasses import asdict
from datetime import datetime
from functools import cache
from typing import Any

from sqlalchemy import ColumnElement, Select, String, and_, func, or_, select
from sqlalchemy.engine import Engine

from speccat.archive.blobs import decode_data, decode_freq
from speccat.archive.filters import Filters, clauses
from speccat.archive.records import (
    EXPORT_COLUMNS,
    JOINED_COLUMNS,
    RECORD_NAMES,
    RECORDS_BY_ID,
    SQL_COLUMNS,
    STRING_COLUMNS,
    StoredSpectrum,
    record_select,
    to_record,
)
from speccat.archive.schema import (
    WALK_INDEX,
    candidates,
    detections,
    files,
    spectra,
    spectrum_data,
)
from speccat.errors import ArchiveError, FilterError
from speccat.model import BaselineModel, Kind, LineFit

_JOINED = detections.join(spectra, spectra.c.id == detections.c.spectrum_id).join(
    files, files.c.id == spectra.c.file_id
)
DISTINCT_COLUMNS = ("source", "species", "line", "night", "kind", "stokes")
MAX_LIMIT = 100_000
#: Rows of the default order a page may walk before sorting the matches instead: WALK_ROWS,
#: or WALK_FACTOR * (offset + limit) for later pages, up to offset + limit = WALK_PAGE_MAX.
WALK_ROWS = 20_000
WALK_FACTOR = 100
WALK_PAGE_MAX = 2_000
#: Filters whose columns ``WALK_INDEX`` holds; those with ranges/globs prefer the walk.
_WALK_FILTERS = frozenset(
    {"source", "species", "vel_min_kms", "vel_max_kms", "freq_min_hz", "freq_max_hz"}
    | {"snr_min", "since", "until"}
)
_RANGE_FILTERS = frozenset(
    {"vel_min_kms", "vel_max_kms", "freq_min_hz", "freq_max_hz", "since", "until"}
)


class QueryMixin:
    """Read methods shared by every ``Archive``; needs ``_reader``, ``dialect``, ``url``."""

    _reader: Engine
    dialect: str
    url: str

    def _where(self, filters: Filters | None) -> list[ColumnElement[bool]]:
        return clauses(filters or Filters(), detections, self.dialect)

    def _order(self, sort: str, descending: bool, no_index: bool = False) -> list[Any]:
        """ORDER BY terms; ``no_index`` (numeric sorts on SQLite) makes SQLite sort the
        matches rather than walk an index of the sort column (``col + 0``, same order)."""
        if sort not in SQL_COLUMNS or sort in ("spectrum_id",):
            raise FilterError(
                f"--sort: unknown column {sort[:40]!r}; use one of the exported columns"
            )
        out = []
        first: Any = self._sort_column(sort)
        if no_index:
            first = first + 0
        for col in (first, detections.c.id):
            term = col.desc() if descending else col.asc()
            if self.dialect != "sqlite" and col is not detections.c.id:
                term = term.nulls_last() if descending else term.nulls_first()
            out.append(term)
        return out

    def _sort_column(self, sort: str) -> ColumnElement[Any]:
        col = SQL_COLUMNS[sort]
        if self.dialect != "sqlite" and sort in STRING_COLUMNS and sort != "obs_time":
            col = col.collate("C")  # byte order, as SQLite sorts: same pages on both engines
        return col

    def count(self, filters: Filters | None = None, at_most: int | None = None) -> int:
        """Number of detections matching ``filters``; with ``at_most``, counting stops past
        that many (the result is then ``at_most + 1``: "more than at_most")."""
        if at_most is not None:
            found = select(detections.c.id).where(*self._where(filters)).limit(at_most + 1)
            stmt = select(func.count()).select_from(found.subquery())
        else:
            stmt = select(func.count()).select_from(detections).where(*self._where(filters))
        with self._reader.connect() as conn:
            return int(conn.execute(stmt).scalar_one())

    def _id_select(
        self, filters: Filters | None, sort: str, descending: bool, no_index: bool = False
    ) -> Select[Any]:
        stmt = select(detections.c.id).where(*self._where(filters))
        if sort in JOINED_COLUMNS:
            stmt = stmt.select_from(_JOINED)
        return stmt.order_by(*self._order(sort, descending, no_index))

    def _walks(self, filters: Filters | None, sort: str, descending: bool, rows: int) -> bool:
        """Whether a page of ``rows`` (offset + limit) should try the walk of WALK_INDEX."""
        if self.dialect != "sqlite" or sort != "snr" or not descending or filters is None:
            return False
        if rows > WALK_PAGE_MAX:
            return False  # deep pages: the walk would have to cover too much of the order
        active = {k for k, v in asdict(filters).items() if v is not None and v is not False}
        if not active or not active <= _WALK_FILTERS:
            return False
        globs = {
            k
            for k in ("source", "species")
            if k in active and set(getattr(filters, k)) & {"*", "?"}
        }
        return bool(active & _RANGE_FILTERS or globs)

    def _walk_ids(self, conn: Any, filters: Filters, offset: int, limit: int) -> list[int] | None:
        """The page's ids from the top rows of the (snr desc, id desc) order, read from
        WALK_INDEX alone; None when those rows hold fewer than offset + limit matches."""
        snr, ident = detections.c.snr, detections.c.id
        hint = f"INDEXED BY {WALK_INDEX}"
        span = max(WALK_ROWS, WALK_FACTOR * (offset + limit))
        edge = conn.execute(
            select(snr)
            .with_hint(detections, hint, "sqlite")
            .order_by(snr.desc(), ident.desc())
            .limit(1)
            .offset(span)
        ).first()
        stmt = select(ident).where(*self._where(filters)).with_hint(detections, hint, "sqlite")
        if edge is not None:
            if edge[0] is None:
                return None  # the span reaches the NULL S/N rows: no simple bound
            # a prefix of the order (ties at the edge included): its first matches are the page
            stmt = stmt.where(snr >= edge[0])
        stmt = stmt.order_by(snr.desc(), ident.desc()).limit(limit).offset(offset)
        ids = [int(i) for i in conn.execute(stmt).scalars()]
        if edge is None or len(ids) == limit:
            return ids  # the whole table was walked, or the page is full
        return None

    def _after(self, conn: Any, sort: str, descending: bool, after_id: int) -> ColumnElement[bool]:
        """Keyset condition: rows strictly after detection ``after_id`` in (sort, id) order,
        NULLs counting as the smallest values."""
        col, ident = self._sort_column(sort), detections.c.id
        lookup = select(SQL_COLUMNS[sort]).where(ident == after_id)
        if sort in JOINED_COLUMNS:
            lookup = lookup.select_from(_JOINED)
        found = conn.execute(lookup).first()
        if found is None:
            raise FilterError(f"page: no detection {after_id} to continue after")
        value = found[0]
        if value is None:
            if descending:
                return and_(col.is_(None), ident < after_id)
            return or_(col.is_not(None), and_(col.is_(None), ident > after_id))
        if descending:
            return or_(col < value, and_(col == value, ident < after_id), col.is_(None))
        return or_(col > value, and_(col == value, ident > after_id))

    def page(
        self,
        filters: Filters | None = None,
        sort: str = "snr",
        descending: bool = True,
        offset: int = 0,
        limit: int = 200,
        after: int | None = None,
    ) -> list[dict[str, Any]]:
        """One page of records (EXPORT_COLUMNS + spectrum_id, ra_deg, dec_deg, continuum).

        ``offset`` skips rows (an index scan: for jumps); ``after`` = the ``detection_id`` of
        the last record of the previous page continues from there (keyset: for scrolling)."""
        if offset < 0 or not 0 < limit <= MAX_LIMIT:
            raise FilterError(f"page: offset must be >= 0 and limit in 1..{MAX_LIMIT}")
        walk = after is None and self._walks(filters, sort, descending, offset + limit)
        with self._reader.connect() as conn:
            ids = self._walk_ids(conn, filters or Filters(), offset, limit) if walk else None
            if ids is None:
                # after a failed walk the matches are few: sort them, never walk further
                ids_stmt = self._id_select(filters, sort, descending, no_index=walk)
                ids_stmt = ids_stmt.limit(limit).offset(offset)
                if after is not None:
                    ids_stmt = ids_stmt.where(self._after(conn, sort, descending, int(after)))
                ids = [int(i) for i in conn.execute(ids_stmt).scalars()]
            if not ids:
                return []
            rows = conn.execute(RECORDS_BY_ID, {"ids": ids})
            by_id = {int(r.detection_id): to_record(r) for r in rows}
        return [by_id[i] for i in ids]

    def iter_detections(
        self,
        filters: Filters | None = None,
        sort: str = "detection_id",
        descending: bool = False,
        batch: int = 5000,
    ) -> Iterator[dict[str, Any]]:
        """Stream every matching record in order, ``batch`` rows per fetch (constant memory)."""
        for values in self.iter_values(filters, sort, descending, batch):
            yield dict(zip(RECORD_NAMES, values, strict=True))

    def iter_values(
        self,
        filters: Filters | None = None,
        sort: str = "detection_id",
        descending: bool = False,
        batch: int = 5000,
    ) -> Iterator[list[Any]]:
        """Like ``iter_detections`` but each record as a list in ``RECORD_NAMES`` order
        (the export's fast path)."""
        for chunk in self.iter_value_chunks(filters, sort, descending, batch):
            yield from map(list, chunk)

    def id_bounds(self, filters: Filters | None = None) -> tuple[int, int] | None:
        """(smallest, largest) id of the matching detections; None when nothing matches."""
        ident = detections.c.id
        stmt = select(func.min(ident), func.max(ident)).where(*self._where(filters))
        with self._reader.connect() as conn:
            lo, hi = conn.execute(stmt).one()
        return None if lo is None else (int(lo), int(hi))

    def iter_value_chunks(
        self,
        filters: Filters | None = None,
        sort: str = "detection_id",
        descending: bool = False,
        batch: int = 5000,
        id_range: tuple[int, int] | None = None,
        exported_only: bool = False,
    ) -> Iterator[list[Sequence[Any]]]:
        """``iter_values`` in lists of up to ``batch`` records (tuples or lists: read only),
        optionally only detection ids ``lo <= id < hi`` (``id_range``) and only the
        EXPORT_COLUMNS (``exported_only``, a prefix of RECORD_NAMES). In id order the rows
        come straight from the DB-API cursor (no per-value result processing: MHz, and on
        SQLite the ISO times, are computed in SQL), in keyset chunks over the primary key, one
        short read transaction each, so a long export never pins the SQLite WAL while an
        ingest writes."""
        select_values = _values_select(
            "sqlite" if self.dialect == "sqlite" else "postgresql",
            len(EXPORT_COLUMNS) if exported_only else len(RECORD_NAMES),
        )
        stmt = select_values.where(*self._where(filters)).order_by(*self._order(sort, descending))
        plain = self.dialect == "sqlite"  # rows need no conversion
        if id_range is not None:
            stmt = stmt.where(detections.c.id >= id_range[0], detections.c.id < id_range[1])
        batch = max(1, batch)
        if sort != "detection_id":
            with self._reader.connect() as conn:
                result = conn.execution_options(yield_per=batch).execute(stmt)
                for part in result.partitions(batch):
                    yield [tuple(r) for r in part] if plain else _values(part)
            return
        ident = detections.c.id
        last: int | None = None
        while True:
            chunk = (
                stmt if last is None else stmt.where(ident < last if descending else ident > last)
            )
            with self._reader.connect() as conn:
                result = conn.execute(chunk.limit(batch))
                try:
                    rows = list(result.cursor.fetchall())
                finally:
                    result.close()
            if rows:
                yield rows if plain else _values(rows)
            if len(rows) < batch:
                return
            last = int(rows[-1][0])

    def distinct(self, column: str) -> list[str]:
        """Sorted distinct non-empty values of source, species, line, night, kind or stokes."""
        if column not in DISTINCT_COLUMNS:
            raise FilterError(f"distinct: unknown column {column[:40]!r}")
        col = detections.c[column]
        if column == "source":
            col = spectra.c.source
        elif column == "night":
            col = files.c.night
        stmt = select(col).where(col.is_not(None)).distinct()
        with self._reader.connect() as conn:
            return sorted(str(v) for v in conn.execute(stmt).scalars())

    def intensity_units(self, filters: Filters | None = None) -> list[str]:
        """The distinct intensity units of the matching detections' spectra, sorted."""
        unit = spectra.c.intensity_unit
        stmt = (
            select(unit)
            .select_from(detections.join(spectra, spectra.c.id == detections.c.spectrum_id))
            .where(*self._where(filters))
            .distinct()
        )
        with self._reader.connect() as conn:
            return sorted(str(v) for v in conn.execute(stmt).scalars())

    def detections_for_spectrum(self, spectrum_id: int) -> list[dict[str, Any]]:
        stmt = (
            record_select().where(detections.c.spectrum_id == spectrum_id).order_by(detections.c.id)
        )
        with self._reader.connect() as conn:
            return [to_record(r) for r in conn.execute(stmt)]

    def candidates(self, detection_id: int) -> list[dict[str, Any]]:
        """Ranked identification candidates of one detection (rank 1 = best)."""
        c = candidates.c
        stmt = (
            select(c.rank, c.name, c.species, c.transition, c.rest_freq_hz, c.v_lsr_kms, c.score)
            .where(c.detection_id == detection_id)
            .order_by(c.rank)
        )
        with self._reader.connect() as conn:
            return [dict(r._mapping) for r in conn.execute(stmt)]

    def spectrum(self, spectrum_id: int) -> StoredSpectrum:
        """A stored spectrum with its data, baseline and fitted lines (for plotting)."""
        s = spectra.c
        stmt = (
            select(spectra, files.c.path, spectrum_data.c.freq_hz, spectrum_data.c.data)
            .join(files, files.c.id == s.file_id)
            .join(spectrum_data, spectrum_data.c.spectrum_id == s.id)
            .where(s.id == spectrum_id)
        )
        fit_stmt = (
            select(detections)
            .where(detections.c.spectrum_id == spectrum_id)
            .order_by(detections.c.id)
        )
        with self._reader.connect() as conn:
            row = conn.execute(stmt).first()
            if row is None:
                raise ArchiveError(f"{self.url}: no spectrum {spectrum_id}")
            fits = tuple(_line_fit(r._mapping) for r in conn.execute(fit_stmt))
        records = tuple(self.detections_for_spectrum(spectrum_id))
        m = row._mapping
        stokes = json.loads(m["stokes"])
        base = json.loads(m["baseline"])
        return StoredSpectrum(
            spectrum_id=int(m["id"]),
            source=m["source"],
            file=m["path"],
            night=m["night"],
            obs_time=m["obs_time"],
            ra_deg=m["ra_deg"],
            dec_deg=m["dec_deg"],
            freq_hz=decode_freq(m["freq_hz"]),
            intensity=decode_data(m["data"], stokes, int(m["n_channels"])),
            intensity_unit=m["intensity_unit"],
            specsys=m["specsys"],
            lsrk_factor=float(m["lsrk_factor"]),
            frame_flag=m["frame_flag"],
            rms=m["rms"],
            continuum=m["continuum"],
            baseline=BaselineModel(
                n_channels=int(base["n_channels"]),
                coeffs=tuple(base["coeffs"]),
                ripple_amp=base["ripple_amp"],
                ripple_period_chan=base["ripple_period_chan"],
                ripple_phase=base["ripple_phase"],
            ),
            flags=tuple(f for f in m["flags"].split(";") if f),
            fits=fits,
            detections=records,
        )

    def night_report(self, night: str | None = None) -> dict[str, Any]:
        """What a night brought (the latest night when None); see ``speccat.archive.report``."""
        from speccat.archive.report import build_report

        with self._reader.connect() as conn:
            return build_report(conn, night)

    def explain(
        self, filters: Filters | None = None, sort: str = "snr", descending: bool = True
    ) -> str:
        """SQLite's query plan of the first-page id query (for tests and benchmarks)."""
        if self.dialect != "sqlite":
            raise ArchiveError("explain: SQLite only")
        stmt = self._id_select(filters, sort, descending).limit(200)
        return _explain(self._reader, stmt)

    def explain_count(self, filters: Filters | None = None) -> str:
        if self.dialect != "sqlite":
            raise ArchiveError("explain: SQLite only")
        stmt = select(func.count()).select_from(detections).where(*self._where(filters))
        return _explain(self._reader, stmt)


def _explain(engine: Engine, stmt: Select[Any]) -> str:
    compiled = stmt.compile(engine)
    params = compiled.construct_params()
    positional = [params[name] for name in compiled.positiontup or []]
    with engine.connect() as conn:
        rows = conn.exec_driver_sql(f"EXPLAIN QUERY PLAN {compiled}", tuple(positional)).all()
    return "\n".join(str(r[-1]) for r in rows)


def _line_fit(m: Any) -> LineFit:
    def f(name: str) -> float:
        value = m[name]
        return float("nan") if value is None else float(value)

    return LineFit(
        center_hz=f("center_hz"),
        center_err_hz=f("center_err_hz"),
        peak=f("peak"),
        peak_err=f("peak_err"),
        fwhm_hz=f("fwhm_hz"),
        fwhm_err_hz=f("fwhm_err_hz"),
        integral_fit_hz=f("integral_fit_hz"),
        integral_fit_err_hz=f("integral_fit_err_hz"),
        integral_sum_hz=f("integral_sum_hz"),
        integral_sum_err_hz=f("integral_sum_err_hz"),
        center_chan=f("center_chan"),
        fwhm_chan=f("fwhm_chan"),
        snr=f("snr"),
        chi2_red=f("chi2_red"),
        kind=Kind(m["kind"]),
        profile=m["profile"],
        lorentz_fwhm_hz=m["lorentz_fwhm_hz"],
        lorentz_fwhm_err_hz=m["lorentz_fwhm_err_hz"],
        w50_hz=m["w50_hz"],
        w20_hz=m["w20_hz"],
        moment1_hz=m["moment1_hz"],
        moment2_hz=m["moment2_hz"],
        blend=int(m["blend"]),
        flags=tuple(x for x in m["fit_flags"].split(";") if x),
    )


@cache
def _values_select(dialect: str, width: int) -> Select[Any]:
    """``record_select`` of the first ``width`` RECORD_NAMES, with the MHz columns divided in
    SQL (an IEEE double division on both engines: the very doubles that ``to_values``
    computes in Python) and, on SQLite, the stored time text ("YYYY-MM-DD HH:MM:SS[.ffffff]",
    as SQLAlchemy writes it) turned into ``datetime.isoformat()`` text in SQL, so that the
    DB-API rows need no Python work."""
    cols = []
    for name in RECORD_NAMES[:width]:
        col = SQL_COLUMNS[name]
        if name in _MHZ_NAMES:
            col = col / 1e6
        elif name == "obs_time" and dialect == "sqlite":
            col = _sqlite_iso(col)
        cols.append(col.label(name))
    return select(*cols).select_from(_JOINED)


def _sqlite_iso(col: ColumnElement[Any]) -> ColumnElement[str]:
    # "YYYY-MM-DD HH:MM:SS.ffffff" -> isoformat(): "T" between, no fraction when it is zero
    # (".000000" can only be a zero fraction); two replace() calls cost less than substr cuts
    iso_t = func.replace(col, " ", "T", type_=String)
    return func.replace(iso_t, ".000000", "", type_=String)


_MHZ_NAMES = frozenset({"rest_freq_mhz", "obs_freq_mhz"})
_TIME_AT = RECORD_NAMES.index("obs_time")


def _values(rows: Any) -> list[Any]:
    """Rows of ``_values_select("postgresql", ...)`` as export value lists: ``obs_time`` (a
    datetime) as ISO 8601, like ``to_values``; a spectrum's detections share one time, so each
    distinct time is converted once."""
    out = []
    raw_seen: Any = None
    iso = None
    for row in rows:
        values = list(row)
        raw = values[_TIME_AT]
        if raw is not None:
            if raw != raw_seen:
                raw_seen, iso = raw, _iso(raw)
            values[_TIME_AT] = iso
        out.append(values)
    return out


def _iso(raw: str | datetime) -> str:
    stamp = raw if isinstance(raw, datetime) else datetime.fromisoformat(raw)
    return stamp.isoformat()
