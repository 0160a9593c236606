"""The read side of ``Archive``: counts, pages, streams, distinct values, spectra, reports.

Every filter is a bound parameter on the detections table (see ``filters``). Pages are fetched
in two steps: the ids of the page, in order, from the detections table alone (an index scan for
the default ``snr`` order and for each filter), then the full records of those ids.
Ties are broken by detection id in the same direction as the sort. NULLs sort as the smallest
value on both engines.
"""

from __future__ import annotations

import json
from collections.abc import Iterator
from typing import Any

from sqlalchemy import ColumnElement, Select, and_, func, or_, select
from sqlalchemy.engine import Engine

from speccat.archive.blobs import decode_data, decode_freq
from speccat.archive.filters import Filters, clauses
from speccat.archive.records import (
    JOINED_COLUMNS,
    RECORD_NAMES,
    RECORDS_BY_ID,
    SQL_COLUMNS,
    STRING_COLUMNS,
    StoredSpectrum,
    record_select,
    to_record,
    to_values,
)
from speccat.archive.schema import candidates, detections, files, spectra, spectrum_data
from speccat.errors import ArchiveError, FilterError
from speccat.model import BaselineModel, Kind, LineFit

_JOINED = detections.join(spectra, spectra.c.id == detections.c.spectrum_id).join(
    files, files.c.id == spectra.c.file_id
)
DISTINCT_COLUMNS = ("source", "species", "line", "night", "kind", "stokes")
MAX_LIMIT = 100_000


class QueryMixin:
    """Read methods shared by every ``Archive``; needs ``_reader``, ``dialect``, ``url``."""

    _reader: Engine
    dialect: str
    url: str

    def _where(self, filters: Filters | None) -> list[ColumnElement[bool]]:
        return clauses(filters or Filters(), detections, self.dialect)

    def _order(self, sort: str, descending: bool) -> list[Any]:
        if sort not in SQL_COLUMNS or sort in ("spectrum_id",):
            raise FilterError(
                f"--sort: unknown column {sort[:40]!r}; use one of the exported columns"
            )
        out = []
        for col in (self._sort_column(sort), detections.c.id):
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

    def count(self, filters: Filters | None = None) -> int:
        """Number of detections matching ``filters``."""
        stmt = select(func.count()).select_from(detections).where(*self._where(filters))
        with self._reader.connect() as conn:
            return int(conn.execute(stmt).scalar_one())

    def _id_select(self, filters: Filters | None, sort: str, descending: bool) -> Select[Any]:
        stmt = select(detections.c.id).where(*self._where(filters))
        if sort in JOINED_COLUMNS:
            stmt = stmt.select_from(_JOINED)
        return stmt.order_by(*self._order(sort, descending))

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
        ids_stmt = self._id_select(filters, sort, descending).limit(limit).offset(offset)
        with self._reader.connect() as conn:
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
        stmt = record_select().where(*self._where(filters)).order_by(*self._order(sort, descending))
        batch = max(1, batch)
        if sort == "detection_id":
            # keyset chunks over the primary key, one short read transaction each, so a long
            # export never pins the SQLite WAL while an ingest is writing
            ident = detections.c.id
            last: int | None = None
            while True:
                chunk = (
                    stmt
                    if last is None
                    else stmt.where(ident < last if descending else ident > last)
                )
                with self._reader.connect() as conn:
                    rows = conn.execute(chunk.limit(batch)).all()
                for row in rows:
                    yield to_values(row)
                if len(rows) < batch:
                    return
                last = int(rows[-1][0])
        with self._reader.connect() as conn:
            result = conn.execution_options(yield_per=batch).execute(stmt)
            for row in result:
                yield to_values(row)

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
