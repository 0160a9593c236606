"""Archive checks shared by the robustness tests (issue 11): integrity, per-file content
signatures and table digests, read straight from the SQLite file with ``sqlite3``."""

from __future__ import annotations

import hashlib
import os
import sqlite3
import uuid
from collections.abc import Iterator
from pathlib import Path

import pytest

#: per file: spectra, detections, candidates, and a digest of every stored value that a file
#: determines (axis and data blobs, fit values, identifications); ids, runs, nights left out.
Signature = tuple[int, int, int, str]


def _tables(db: sqlite3.Connection) -> set[str]:
    return {r[0] for r in db.execute("SELECT name FROM sqlite_master WHERE type = 'table'")}


def _columns(db: sqlite3.Connection, table: str, drop: set[str]) -> list[str]:
    cols = [r[1] for r in db.execute(f'PRAGMA table_info("{table}")')]
    return [c for c in cols if c not in drop]


def signatures(archive: Path) -> dict[str, Signature]:
    """sha256 -> Signature for every file in the archive."""
    db = sqlite3.connect(archive)
    try:
        if "files" not in _tables(db):  # killed before the schema was made: nothing stored
            return {}
        skip = {"id", "file_id", "spectrum_id", "detection_id", "run_id", "night", "path"}
        s_cols = _columns(db, "spectra", skip)
        d_cols = _columns(db, "detections", skip)
        c_cols = _columns(db, "candidates", skip)
        has_data = "spectrum_data" in _tables(db)
        out: dict[str, Signature] = {}
        for file_id, sha in db.execute("SELECT id, sha256 FROM files").fetchall():
            h = hashlib.sha256()
            spec = db.execute(
                f"SELECT id, {', '.join(s_cols)} FROM spectra WHERE file_id = ? "
                'ORDER BY hdu, "row", id',
                (file_id,),
            ).fetchall()
            n_det = n_cand = 0
            for sid, *values in spec:
                h.update(repr(values).encode())
                if has_data:
                    h.update(
                        repr(
                            db.execute(
                                "SELECT * FROM spectrum_data WHERE spectrum_id = ?", (sid,)
                            ).fetchall()[0][1:]
                        ).encode()
                    )
                dets = db.execute(
                    f"SELECT id, {', '.join(d_cols)} FROM detections WHERE spectrum_id = ? "
                    "ORDER BY center_hz, id",
                    (sid,),
                ).fetchall()
                for did, *dvalues in dets:
                    n_det += 1
                    h.update(repr(dvalues).encode())
                    cands = db.execute(
                        f"SELECT {', '.join(c_cols)} FROM candidates WHERE detection_id = ? "
                        'ORDER BY "rank"',
                        (did,),
                    ).fetchall()
                    n_cand += len(cands)
                    h.update(repr(cands).encode())
            out[sha] = (len(spec), n_det, n_cand, h.hexdigest())
        return out
    finally:
        db.close()


def integrity(archive: Path) -> str:
    db = sqlite3.connect(archive)
    try:
        return str(db.execute("PRAGMA integrity_check").fetchone()[0])
    finally:
        db.close()


def table_digests(path: Path) -> dict[str, str]:
    """SHA-256 of every table's rows in id order (the archive's content, not its pages)."""
    db = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
    try:
        names = [
            r[0]
            for r in db.execute("SELECT name FROM sqlite_master WHERE type = 'table' ORDER BY name")
        ]
        out = {}
        for name in names:
            h = hashlib.sha256()
            for row in db.execute(f'SELECT * FROM "{name}" ORDER BY 1'):
                h.update(repr(row).encode())
            out[name] = h.hexdigest()
        return out
    finally:
        db.close()


def fresh_pg_database() -> Iterator[str]:
    """For a fixture: a new, empty database on the test server (dropped afterwards), made and
    dropped over an AUTOCOMMIT connection; skips when ``SPECCAT_TEST_PG_URL`` is not set."""
    base = os.environ.get("SPECCAT_TEST_PG_URL")
    if not base:
        pytest.skip("SPECCAT_TEST_PG_URL is not set (CI sets it through pg_virtualenv)")
    from sqlalchemy import create_engine, text
    from sqlalchemy.engine import make_url

    name = f"speccat_robust_{uuid.uuid4().hex[:12]}"
    admin = create_engine(base, isolation_level="AUTOCOMMIT")
    with admin.connect() as conn:
        conn.execute(text(f'CREATE DATABASE "{name}"'))
    try:
        yield make_url(base).set(database=name).render_as_string(hide_password=False)
    finally:
        with admin.connect() as conn:
            conn.execute(
                text(
                    "SELECT pg_terminate_backend(pid) FROM pg_stat_activity "
                    "WHERE datname = :n AND pid <> pg_backend_pid()"
                ),
                {"n": name},
            )
            conn.execute(text(f'DROP DATABASE IF EXISTS "{name}"'))
        admin.dispose()
