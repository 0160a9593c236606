"""``Archive``: open/create/migrate an archive and the write side used by the ingest pipeline.

Each file is stored in ONE transaction (file row, spectra, detections, candidates: all in or all
out). A file whose SHA-256 is already archived is refused by the UNIQUE constraint through
``INSERT ... ON CONFLICT DO NOTHING`` — never check-then-insert — so two concurrent ingests
store it once.
"""

from __future__ import annotations

import getpass
import json
import os
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
from speccat.archive.inserts import InsertStatements
from speccat.archive.queries import QueryMixin
from speccat.archive.rows import CLIPPED_FLAG, PreparedFile, naive_utc, prepare_file
from speccat.archive.schema import (
    MIGRATIONS,
    SCHEMA_VERSION,
    clip_strings,
    detections,
    failures,
    files,
    lines,
    runs,
    schema_version,
    sources,
    spectra,
)
from speccat.errors import ArchiveError
from speccat.model import FileResult

__all__ = ["CLIPPED_FLAG", "Archive", "naive_utc", "utcnow"]

#: The writer lets SQLite's WAL grow to this many pages (4 KiB each) before it copies them back
#: into the database (default 1000). Every file is its own transaction and rewrites the same
#: index pages, so a longer WAL is checkpointed, and synced, several times less often while
#: each page is copied back once. Set on the writer's connection only, by the first
#: ``store_prepared``; a closed archive leaves no WAL behind.
WAL_CHECKPOINT_PAGES = 8000


def utcnow() -> datetime:
    return datetime.now(UTC).replace(tzinfo=None)


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
        self._inserts: InsertStatements | None = None

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
            self._upgrade_for_reading(found)
            return
        self.migrate()

    def _upgrade_for_reading(self, found: int) -> None:
        """Migrate an archive written by an older speccat that was opened read-only, through a
        writer of its own (the migrations only add indexes and tables; one transaction), so
        that reading commands work after an upgrade of speccat. A clear error when the archive
        cannot be written here."""
        why = ""
        path = eng.sqlite_path(self.target)
        if path is not None and not (os.access(path, os.W_OK) and os.access(path.parent, os.W_OK)):
            why = "the file or its folder is read-only"
        if not why:
            _, writer, dialect = eng.make_engines(self.target, readonly=False)
            upgrader = Archive(self.target, writer or self._reader, writer, dialect)
            try:
                upgrader.migrate()
                return
            except ArchiveError as exc:
                why = str(exc).removeprefix(f"{self.url}: ")
            finally:
                upgrader.close()
        raise ArchiveError(
            f"{self.url}: archive schema version {found} is older than this speccat's "
            f"({SCHEMA_VERSION}) and cannot be upgraded here ({why}); open it once with write "
            "access (e.g. speccat ingest)"
        )

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

    def _writer_dialect(self) -> Any:
        if self._writer is None:
            raise ArchiveError(f"{self.url}: opened read-only")
        return self._writer.dialect

    def _driver_error(self) -> type[Exception]:
        dbapi = getattr(self._writer_dialect(), "loaded_dbapi", None)
        error = getattr(dbapi, "Error", None)
        return error if isinstance(error, type) and issubclass(error, Exception) else DBAPIError

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

    def known_sha256(self, sha256s: Iterable[str], batch: int = 500) -> set[str]:
        """The SHA-256 digests among ``sha256s`` that are already archived (few queries)."""
        wanted = list(dict.fromkeys(sha256s))
        found: set[str] = set()
        with self._reader.connect() as conn:
            for i in range(0, len(wanted), batch):
                chunk = wanted[i : i + batch]
                stmt = select(files.c.sha256).where(files.c.sha256.in_(chunk))
                found.update(str(v) for v in conn.execute(stmt).scalars())
        return found

    def store_file(self, run_id: int, result: FileResult, night: str) -> bool:
        """Store a file and everything measured in it in one transaction. Returns False when
        its SHA-256 is already archived (nothing written). A result with ``error`` is recorded
        as a failure instead (and returns False)."""
        return self.store_prepared(run_id, prepare_file(result), night)

    def store_prepared(self, run_id: int, prepared: PreparedFile, night: str) -> bool:
        """``store_file`` for a file whose rows a worker already built (``rows.prepare_file``):
        one transaction, all in or all out; False when its SHA-256 is already archived."""
        if prepared.error is not None:
            self.store_failure(run_id, prepared.path, prepared.error, night)
            return False
        if self._inserts is None:
            self._inserts = InsertStatements(self._writer_dialect())
        driver_error = self._driver_error()
        try:
            with self._write() as conn:
                info = conn.connection.info
                if self.dialect == "sqlite" and "speccat_autocheckpoint" not in info:
                    conn.exec_driver_sql(f"PRAGMA wal_autocheckpoint = {WAL_CHECKPOINT_PAGES}")
                    info["speccat_autocheckpoint"] = WAL_CHECKPOINT_PAGES
                cursor = conn.connection.cursor()
                try:
                    return self._inserts.store(cursor, run_id, prepared, night)
                finally:
                    cursor.close()
        except driver_error as exc:  # raised by the driver's cursor, not wrapped by SQLAlchemy
            raise ArchiveError(f"{self.url}: write failed ({_reason(exc)})") from None

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
