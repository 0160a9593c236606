"""``Archive``: open/create/migrate an archive and the write side used by the ingest pipeline.

Each file is stored in ONE transaction (file row, spectra, detections, candidates: all in or all
out). A file whose SHA-256 is already archived is refused by the UNIQUE constraint through
``INSERT ... ON CONFLICT DO NOTHING`` — never check-then-insert — so two concurrent ingests
store it once.
"""

from __future__ import annotations

import getpass
import json
import socket
from collections.abc import Iterable, Iterator, Mapping
from contextlib import contextmanager
from datetime import UTC, datetime
from typing import Any

from sqlalchemy import func, insert, inspect, select
from sqlalchemy.dialects import postgresql as pg_dialect
from sqlalchemy.dialects import sqlite as sqlite_dialect
from sqlalchemy.engine import Connection, Engine
from sqlalchemy.exc import DBAPIError, SQLAlchemyError

from speccat import __version__
from speccat.archive import engine as eng
from speccat.archive.blobs import encode_data, encode_freq
from speccat.archive.queries import QueryMixin
from speccat.archive.records import clean_float
from speccat.archive.schema import (
    MIGRATIONS,
    SCHEMA_VERSION,
    candidates,
    clip_strings,
    detections,
    failures,
    files,
    lines,
    runs,
    schema_version,
    sources,
    spectra,
    spectrum_data,
)
from speccat.errors import ArchiveError
from speccat.model import Detection, FileResult, SpectrumResult

#: Spectrum flag: a header string (source, telescope, unit...) was longer than its column and
#: was cut to fit.
CLIPPED_FLAG = "metadata-clipped"


def utcnow() -> datetime:
    return datetime.now(UTC).replace(tzinfo=None)


def naive_utc(stamp: datetime | None) -> datetime | None:
    if stamp is None or stamp.tzinfo is None:
        return stamp
    return stamp.astimezone(UTC).replace(tzinfo=None)


def _reason(exc: BaseException) -> str:
    text = str(getattr(exc, "orig", None) or exc).strip().splitlines()
    return text[0] if text else type(exc).__name__


class Archive(QueryMixin):
    """A speccat archive on SQLite or PostgreSQL. Use ``Archive.open``; close when done."""

    def __init__(self, target: str, reader: Engine, writer: Engine | None, dialect: str) -> None:
        self.target = target
        self.url = eng.masked(target)
        self._reader = reader
        self._writer = writer
        self.dialect = dialect
        self.readonly = writer is None

    # ---- opening ---------------------------------------------------------------------------
    @classmethod
    def open(cls, url: str, create: bool = False, readonly: bool = False) -> Archive:
        """Open the archive at ``url`` (a path means SQLite). ``create`` makes a new one when
        missing; an older schema is migrated unless ``readonly``. Raises ArchiveError."""
        path = eng.sqlite_path(url)
        if path is not None:
            eng.check_sqlite_file(path, create, readonly)
        reader, writer, dialect = eng.make_engines(url, readonly)
        archive = cls(url, reader, writer, dialect)
        try:
            archive._prepare(create)
        except ArchiveError:
            archive.close()
            raise
        except (SQLAlchemyError, OSError) as exc:
            archive.close()
            raise ArchiveError(f"{archive.url}: {archive._diagnose(exc)}") from None
        return archive

    def _diagnose(self, exc: BaseException) -> str:
        reason = _reason(exc)
        if "not a database" in reason or "malformed" in reason:
            return f"not a speccat archive or corrupt ({reason})"
        if "readonly" in reason or "read-only" in reason:
            return f"the archive is read-only ({reason})"
        return f"cannot open the archive ({reason})"

    def _prepare(self, create: bool) -> None:
        with self._reader.connect() as conn:
            found = self._version(conn)
        if found == SCHEMA_VERSION:
            return
        if found > SCHEMA_VERSION:
            raise ArchiveError(
                f"{self.url}: archive schema version {found} is newer than this speccat "
                f"({SCHEMA_VERSION}); upgrade speccat"
            )
        if found == 0 and not create:
            raise ArchiveError(f"no speccat archive at {self.url}; run speccat ingest first")
        if self._writer is None:
            raise ArchiveError(
                f"{self.url}: schema version {found} needs a migration; open it writable"
            )
        self.migrate()

    def _version(self, conn: Connection) -> int:
        names = set(inspect(conn).get_table_names())
        if "schema_version" not in names:
            if names - {"sqlite_sequence"}:
                raise ArchiveError(f"{self.url}: not a speccat archive (it holds other tables)")
            return 0
        value = conn.execute(select(func.max(schema_version.c.version))).scalar()
        if value is None:
            raise ArchiveError(f"{self.url}: corrupt archive (no schema version recorded)")
        return int(value)

    def migrate(self) -> int:
        """Apply the pending migrations in one transaction; returns the new version."""
        with self._write() as conn:
            found = self._version(conn)
            for step in MIGRATIONS[found:]:
                step(conn)
            if found == 0:
                conn.execute(insert(schema_version).values(version=SCHEMA_VERSION))
                self._fill_lines(conn)
            elif found < SCHEMA_VERSION:
                conn.execute(schema_version.update().values(version=SCHEMA_VERSION))
        return SCHEMA_VERSION

    def _fill_lines(self, conn: Connection) -> None:
        from speccat.catalogue import builtin  # deferred: only a new archive needs it

        rows = _line_rows(builtin().lines)
        if rows:
            conn.execute(insert(lines), rows)  # a new archive: no conflicts to resolve

    def close(self) -> None:
        self._reader.dispose()
        if self._writer is not None and self._writer is not self._reader:
            self._writer.dispose()

    def __enter__(self) -> Archive:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    @contextmanager
    def _write(self) -> Iterator[Connection]:
        if self._writer is None:
            raise ArchiveError(f"{self.url}: opened read-only")
        try:
            with self._writer.begin() as conn:
                yield conn
        except DBAPIError as exc:
            raise ArchiveError(f"{self.url}: write failed ({_reason(exc)})") from None

    def _insert(self, table: Any) -> Any:
        mod = sqlite_dialect if self.dialect == "sqlite" else pg_dialect
        return mod.insert(table)

    # ---- write side ------------------------------------------------------------------------
    def begin_run(self, params: Mapping[str, Any]) -> int:
        """Record the start of an ingest run; returns its id."""
        try:
            user = getpass.getuser()
        except (KeyError, OSError):
            user = "unknown"
        row = {
            "user": user,
            "host": socket.gethostname(),
            "started_utc": utcnow(),
            "speccat_version": __version__,
            "parameters": json.dumps(dict(params), sort_keys=True, default=str),
        }
        clip_strings(runs, row)
        with self._write() as conn:
            return int(conn.execute(insert(runs).values(row).returning(runs.c.id)).scalar_one())

    def finish_run(self, run_id: int, counts: Mapping[str, Any]) -> None:
        values = {
            "finished_utc": utcnow(),
            "counts": json.dumps(dict(counts), sort_keys=True, default=str),
        }
        with self._write() as conn:
            conn.execute(runs.update().where(runs.c.id == run_id).values(values))

    def relabel_run(self, run_id: int, night: str) -> None:
        """Give every file, spectrum, detection and failure of one run the night ``night``
        (the pipeline learns the label only after the run's earliest observation is known)."""
        run_files = select(files.c.id).where(files.c.run_id == run_id)
        run_spectra = select(spectra.c.id).where(spectra.c.file_id.in_(run_files))
        with self._write() as conn:
            conn.execute(
                detections.update()
                .where(detections.c.spectrum_id.in_(run_spectra))
                .values(night=night)
            )
            conn.execute(
                spectra.update().where(spectra.c.file_id.in_(run_files)).values(night=night)
            )
            conn.execute(files.update().where(files.c.run_id == run_id).values(night=night))
            conn.execute(failures.update().where(failures.c.run_id == run_id).values(night=night))

    def store_failure(self, run_id: int, path: str, reason: str, night: str | None = None) -> None:
        """Record an unreadable file (for ``report``); nothing else of it is stored."""
        with self._write() as conn:
            conn.execute(
                insert(failures).values(
                    _clipped(failures, run_id=run_id, path=str(path), reason=reason, night=night)
                )
            )

    def has_sha256(self, sha256: str) -> bool:
        with self._reader.connect() as conn:
            found = conn.execute(select(files.c.id).where(files.c.sha256 == sha256)).first()
        return found is not None

    def store_file(self, run_id: int, result: FileResult, night: str) -> bool:
        """Store a file and everything measured in it in one transaction. Returns False when
        its SHA-256 is already archived (nothing written). A result with ``error`` is recorded
        as a failure instead (and returns False)."""
        if result.error is not None:
            self.store_failure(run_id, result.path, result.error, night)
            return False
        file_row = {
            "path": result.path,
            "size_bytes": int(result.size_bytes),
            "sha256": result.sha256,
            "run_id": run_id,
            "night": night,
        }
        clip_strings(files, file_row)
        stmt = (
            self._insert(files)
            .values(file_row)
            .on_conflict_do_nothing(index_elements=["sha256"])
            .returning(files.c.id)
        )
        with self._write() as conn:
            file_id = conn.execute(stmt).scalar_one_or_none()
            if file_id is None:
                return False
            self._store_spectra(conn, int(file_id), result.spectra, night)
        return True

    def _store_spectra(
        self, conn: Connection, file_id: int, results: Iterable[SpectrumResult], night: str
    ) -> None:
        results = list(results)
        if not results:
            return
        rows = [_spectrum_row(file_id, r, night) for r in results]
        ins = insert(spectra).returning(spectra.c.id, sort_by_parameter_order=True)
        spectrum_ids = conn.execute(ins, rows).scalars().all()
        blobs = [
            {
                "spectrum_id": int(sid),
                "freq_hz": encode_freq(r.spectrum.freq_hz),
                "data": encode_data(r.spectrum.intensity),
            }
            for sid, r in zip(spectrum_ids, results, strict=True)
        ]
        conn.execute(insert(spectrum_data), blobs)
        det_rows: list[dict[str, Any]] = []
        det_objs: list[Detection] = []
        for sid, res, srow in zip(spectrum_ids, results, rows, strict=True):
            for det in res.detections:
                det_rows.append(_clipped(detections, **_detection_row(int(sid), det, srow)))
                det_objs.append(det)
        if not det_rows:
            return
        ins = insert(detections).returning(detections.c.id, sort_by_parameter_order=True)
        det_ids = conn.execute(ins, det_rows).scalars().all()
        cand_rows = [
            {
                "detection_id": int(did),
                "rank": rank,
                "name": c.name,
                "species": c.species,
                "transition": c.transition,
                "rest_freq_hz": clean_float(c.rest_freq_hz),
                "v_lsr_kms": clean_float(c.v_lsr_kms),
                "score": clean_float(c.score),
            }
            for did, det in zip(det_ids, det_objs, strict=True)
            for rank, c in enumerate(det.candidates, start=1)
        ]
        for row in cand_rows:
            clip_strings(candidates, row)
        if cand_rows:
            conn.execute(insert(candidates), cand_rows)

    def store_catalogue(
        self, catalogue_lines: Iterable[Any], conn: Connection | None = None
    ) -> None:
        """Record the catalogue in use (``CatalogueLine``-like objects), upserting by name."""
        rows = _line_rows(catalogue_lines)
        if not rows:
            return
        stmt = self._insert(lines)
        stmt = stmt.on_conflict_do_update(
            index_elements=["name"],
            set_={
                k: stmt.excluded[k]
                for k in ("species", "transition", "rest_freq_hz", "line_class", "reference")
            },
        )
        if conn is not None:
            conn.execute(stmt, rows)
            return
        with self._write() as wconn:
            wconn.execute(stmt, rows)

    # ---- sources ---------------------------------------------------------------------------
    def update_sources(self, names: Iterable[str] | None = None) -> int:
        """Recompute each source's systemic velocity; returns the number of sources updated.

        v_sys = S/N-weighted median of the v_LSR of its identified lines, leaving out masers
        and the 21 cm line (maser spots and Galactic HI along the sight line do not trace the
        source's systemic motion; common practice); when a source has only those, they are used.
        """
        from speccat.archive.sources import compute_sources

        wanted = None if names is None else sorted(set(names))
        with self._write() as conn:
            rows = compute_sources(conn, wanted, utcnow())
            if not rows:
                return 0
            stmt = self._insert(sources)
            stmt = stmt.on_conflict_do_update(
                index_elements=["name"],
                set_={
                    k: stmt.excluded[k]
                    for k in ("ra_deg", "dec_deg", "v_sys_kms", "n_lines", "updated_utc")
                },
            )
            conn.execute(stmt, rows)
            if self.dialect == "sqlite":
                # fresh planner statistics (sampled, so cheap at 1M rows) after each ingest
                conn.exec_driver_sql("PRAGMA analysis_limit = 1000")
                conn.exec_driver_sql("ANALYZE")
        return len(rows)

    def source_velocities(self) -> dict[str, float]:
        """Learned systemic velocities (km/s, LSRK radio) by source name."""
        stmt = select(sources.c.name, sources.c.v_sys_kms).where(sources.c.v_sys_kms.is_not(None))
        with self._reader.connect() as conn:
            return {str(n): float(v) for n, v in conn.execute(stmt)}


def _clipped(table: Any, **row: Any) -> dict[str, Any]:
    clip_strings(table, row)
    return row


def _line_rows(catalogue_lines: Iterable[Any]) -> list[dict[str, Any]]:
    return [
        _clipped(
            lines,
            name=ln.name,
            species=ln.species,
            transition=ln.transition,
            rest_freq_hz=float(ln.rest_freq_hz),
            line_class=getattr(ln, "line_class", None),
            reference=getattr(ln, "reference", ""),
        )
        for ln in catalogue_lines
    ]


def _joined(values: Iterable[str]) -> str:
    out: list[str] = []
    for v in values:
        if v and v not in out:
            out.append(v)
    return ";".join(out)


def _spectrum_row(file_id: int, res: SpectrumResult, night: str) -> dict[str, Any]:
    s, m = res.spectrum, res.measurement
    base = m.baseline
    row = {
        "file_id": file_id,
        "hdu": s.origin.hdu,
        "row": s.origin.row,
        "source": s.source,
        "ra_deg": clean_float(s.ra_deg),
        "dec_deg": clean_float(s.dec_deg),
        "obs_time": naive_utc(s.obs_time),
        "night": night,
        "site_lon_deg": None if s.site is None else clean_float(s.site.lon_deg),
        "site_lat_deg": None if s.site is None else clean_float(s.site.lat_deg),
        "site_height_m": None if s.site is None else clean_float(s.site.height_m),
        "telescope": s.telescope,
        "specsys": s.specsys,
        "rest_freq_hz": clean_float(s.rest_freq_hz),
        "velocity_convention": None
        if s.velocity_convention is None
        else str(s.velocity_convention),
        "velosys_ms": clean_float(s.velosys_ms),
        "lsrk_factor": float(res.lsrk_factor),
        "frame_flag": res.frame_flag,
        "stokes": json.dumps(list(s.intensity)),
        "primary_stokes": m.stokes,
        "n_channels": s.n_channels,
        "intensity_unit": s.intensity_unit,
        "rms": clean_float(m.rms),
        "continuum": clean_float(m.continuum),
        "baseline": json.dumps(
            {
                "n_channels": base.n_channels,
                "coeffs": [float(c) for c in base.coeffs],
                "ripple_amp": float(base.ripple_amp),
                "ripple_period_chan": float(base.ripple_period_chan),
                "ripple_phase": float(base.ripple_phase),
            }
        ),
        "flags": _joined(m.flags),
        "meta": json.dumps(dict(s.meta), sort_keys=True, default=str),
    }
    if clip_strings(spectra, row):
        row["flags"] = _joined((*m.flags, CLIPPED_FLAG))
    return row


def _detection_row(spectrum_id: int, det: Detection, srow: Mapping[str, Any]) -> dict[str, Any]:
    fit, ident = det.fit, det.line
    row: dict[str, Any] = {
        name: clean_float(getattr(fit, name))
        for name in [
            "center_hz",
            "center_err_hz",
            "peak",
            "peak_err",
            "fwhm_hz",
            "fwhm_err_hz",
            "integral_fit_hz",
            "integral_fit_err_hz",
            "integral_sum_hz",
            "integral_sum_err_hz",
            "center_chan",
            "fwhm_chan",
            "snr",
            "chi2_red",
            "lorentz_fwhm_hz",
            "lorentz_fwhm_err_hz",
            "w50_hz",
            "w20_hz",
            "moment1_hz",
            "moment2_hz",
        ]
    }
    row.update(
        spectrum_id=spectrum_id,
        stokes=det.stokes,
        kind=str(fit.kind),
        profile=fit.profile,
        blend=int(fit.blend),
        fit_flags=_joined(fit.flags),
        v_lsr_kms=clean_float(det.v_lsr_kms),
        v_lsr_err_kms=clean_float(det.v_lsr_err_kms),
        fwhm_kms=clean_float(det.fwhm_kms),
        fwhm_err_kms=clean_float(det.fwhm_err_kms),
        integral_kms=clean_float(det.integral_kms),
        integral_err_kms=clean_float(det.integral_err_kms),
        flags=_joined((*fit.flags, *det.flags)),
        b_los_ug=clean_float(det.b_los_ug),
        b_los_err_ug=clean_float(det.b_los_err_ug),
        species=None if ident is None else ident.species,
        species_lc=None if ident is None else ident.species.lower(),
        line=None if ident is None else ident.name,
        transition=None if ident is None else ident.transition,
        rest_freq_hz=None if ident is None else clean_float(ident.rest_freq_hz),
        id_score=None if ident is None else clean_float(ident.score),
        source=srow["source"],
        source_lc=str(srow["source"]).lower(),
        night=srow["night"],
        obs_time=srow["obs_time"],
    )
    return row
