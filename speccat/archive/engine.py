"""Engines for the archive: SQLite files (WAL, pragmas per connection) and PostgreSQL URLs.

SQLite follows SQLAlchemy's documented recipe for explicit transactions: the driver's own
transaction handling is switched off (``isolation_level = None``) and a ``begin`` listener emits
``BEGIN`` for readers and ``BEGIN IMMEDIATE`` for the writer, so a writer takes the write lock
up front and waits ``busy_timeout`` instead of failing with SQLITE_BUSY.
"""

from __future__ import annotations

import os
import sqlite3
from pathlib import Path
from typing import Any
from urllib.parse import quote

from sqlalchemy import create_engine, event
from sqlalchemy.engine import URL, Engine, make_url
from sqlalchemy.exc import ArgumentError
from sqlalchemy.pool import QueuePool

from speccat.errors import ArchiveError

BUSY_TIMEOUT_MS = 30_000


def is_url(target: str) -> bool:
    return "://" in target


def sqlite_path(target: str) -> Path | None:
    """The file of a SQLite archive (a plain path or a ``sqlite:///`` URL), else None."""
    if not is_url(target):
        return Path(target).expanduser()
    try:
        url = make_url(target)
    except ArgumentError:
        return None
    if url.get_backend_name() == "sqlite" and url.database:
        return Path(url.database).expanduser()
    return None


def masked(target: str) -> str:
    """The archive URL with any password hidden (for messages and provenance)."""
    if not is_url(target):
        return target
    try:
        return make_url(target).render_as_string(hide_password=True)
    except ArgumentError:
        return "<unparsable URL>"


def _read_only_uri(path: Path) -> str:
    """SQLite URI filename for reading. In a folder nobody can write to, no writer can exist
    (it would need a -wal or -journal file there) and a reader cannot create the -shm file WAL
    needs, so the file is opened ``immutable=1`` (no locks, no -shm) unless a -wal file left
    beside it holds committed pages. See sqlite.org/uri.html, "immutable"."""
    resolved = path.resolve()
    uri = f"file:{quote(str(resolved))}?mode=ro"
    wal = resolved.with_name(resolved.name + "-wal")
    if not os.access(resolved.parent, os.W_OK) and not wal.exists():
        uri += "&immutable=1"
    return uri


def _is_ours_or_empty(cur: sqlite3.Cursor) -> bool:
    """True for a new/empty database or a speccat archive (it has ``schema_version``): only
    those may be switched to WAL; someone else's database is left untouched for the schema
    check to refuse."""
    names = {r[0] for r in cur.execute("SELECT name FROM sqlite_master WHERE type = 'table'")}
    return "schema_version" in names or not names - {"sqlite_sequence"}


def _sqlite_engine(path: Path, readonly: bool, immediate: bool) -> Engine:
    def connect() -> sqlite3.Connection:
        if readonly:
            uri = _read_only_uri(path)
            conn = sqlite3.connect(uri, uri=True, check_same_thread=False, timeout=30)
        else:
            conn = sqlite3.connect(str(path), check_same_thread=False, timeout=30)
        conn.isolation_level = None  # SQLAlchemy's "begin" listener below owns transactions
        return conn

    engine = create_engine("sqlite://", creator=connect, poolclass=QueuePool, pool_size=2)

    @event.listens_for(engine, "connect")
    def _pragmas(dbapi_conn: Any, _record: Any) -> None:
        cur = dbapi_conn.cursor()
        cur.execute(f"PRAGMA busy_timeout = {BUSY_TIMEOUT_MS}")
        if not readonly and _is_ours_or_empty(cur):
            cur.execute("PRAGMA journal_mode = WAL")
        cur.execute("PRAGMA synchronous = NORMAL")
        cur.execute("PRAGMA foreign_keys = ON")
        # 32 MB of page cache instead of SQLite's 2 MB: an ingest's commits touch ~20 index
        # trees, and a large archive's queries reread their upper pages (10 % less writer CPU)
        cur.execute("PRAGMA cache_size = -32768")
        cur.close()

    begin = "BEGIN IMMEDIATE" if immediate else "BEGIN"

    @event.listens_for(engine, "begin")
    def _begin(conn: Any) -> None:
        conn.exec_driver_sql(begin)

    return engine


def make_engines(target: str, readonly: bool) -> tuple[Engine, Engine | None, str]:
    """(reader engine, writer engine or None when read-only, dialect name)."""
    path = sqlite_path(target)
    if path is not None:
        reader = _sqlite_engine(path, readonly, immediate=False)
        writer = None if readonly else _sqlite_engine(path, False, immediate=True)
        return reader, writer, "sqlite"
    try:
        url: URL = make_url(target)
    except ArgumentError:
        raise ArchiveError(f"{masked(target)}: not an archive path or database URL") from None
    if url.get_backend_name() != "postgresql":
        raise ArchiveError(f"{masked(target)}: only SQLite files and postgresql+psycopg:// URLs")
    try:
        engine = create_engine(url, pool_pre_ping=True)
    except (ArgumentError, ImportError) as exc:
        raise ArchiveError(f"{masked(target)}: {exc}") from None
    return engine, (None if readonly else engine), "postgresql"


def check_sqlite_file(path: Path, create: bool, readonly: bool) -> None:
    """Clear errors before SQLite would silently create or fail obscurely."""
    if not path.exists():
        if not create or readonly:
            raise ArchiveError(f"no archive at {path}; run speccat ingest first")
        folder = path.parent if str(path.parent) else Path(".")
        if not folder.is_dir():
            raise ArchiveError(f"cannot create archive {path}: folder {folder} does not exist")
        if not os.access(folder, os.W_OK):
            raise ArchiveError(f"cannot create archive {path}: folder {folder} is read-only")
        return
    if path.is_dir():
        raise ArchiveError(f"{path} is a folder, not an archive file")
    if not os.access(path, os.R_OK):
        raise ArchiveError(f"archive {path} is not readable")
    if not readonly and not (os.access(path, os.W_OK) and os.access(path.parent, os.W_OK)):
        raise ArchiveError(f"archive {path} or its folder is read-only; open it read-only")
