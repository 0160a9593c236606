"""Robustness, concurrent ingests (issue 11): four writers and a reader on one archive.

Four real ``speccat ingest`` processes feed overlapping folders into one SQLite archive while a
reader keeps running ``speccat query --format json``; every spectrum must end up stored exactly
once and no process may see "database is locked". The same race on PostgreSQL (when
``SPECCAT_TEST_PG_URL`` is set) checks that a file two ingests race for is stored once — the
files table's UNIQUE sha256 decides, not a check-then-insert.
"""

from __future__ import annotations

import json
import sqlite3
import subprocess
import sys
import threading
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest
from hostile_inputs import bases
from robust_archive import fresh_pg_database

SPECCAT = [sys.executable, "-m", "speccat"]
N_WRITERS = 4


def make_night(root: Path, n_sets: int = 5) -> tuple[list[Path], dict[str, int]]:
    """Valid files (4 per set, distinct noise) in six folders; returns the folders and the
    number of spectra of every file (by SHA-256) as ``speccat.io.read`` finds them."""
    import hashlib

    from speccat.io import read

    folders = [root / f"part{k}" for k in range(6)]
    for f in folders:
        f.mkdir(parents=True)
    expected: dict[str, int] = {}
    k = 0
    for seed in range(100, 100 + n_sets):
        for name, content in bases(seed).items():
            path = folders[k % len(folders)] / f"s{seed}_{name}"
            path.write_bytes(content)
            expected[hashlib.sha256(content).hexdigest()] = len(read(path))
            k += 1
    return folders, expected


def writer_folders(folders: list[Path], i: int) -> list[str]:
    """Writer i takes the first folder (all four race for it) and two more in turn (each fed
    by two or three writers)."""
    return [str(folders[0])] + [str(folders[1 + (i + j) % (len(folders) - 1)]) for j in range(2)]


def run_writers(archive: str, folders: list[Path]) -> list[subprocess.CompletedProcess[str]]:
    procs = [
        subprocess.Popen(
            [
                *SPECCAT,
                "--archive",
                archive,
                "ingest",
                *writer_folders(folders, i),
                "--json",
                "--jobs=1",
            ],
            stdout=subprocess.PIPE,
            stderr=subprocess.PIPE,
            text=True,
        )
        for i in range(N_WRITERS)
    ]
    out = []
    for p in procs:
        stdout, stderr = p.communicate(timeout=300)
        out.append(subprocess.CompletedProcess(p.args, p.returncode, stdout, stderr))
    return out


class ReaderLoop(threading.Thread):
    """Reads the archive over and over until stopped: the query API every 0.2 s (count and
    first page, a fresh read-only open each time) and the real ``speccat query --format json``
    a few times (each run costs a process start)."""

    def __init__(self, archive: str, cli_runs: int = 2) -> None:
        super().__init__(daemon=True)
        self.archive = archive
        self.cli_runs = cli_runs
        self.stop = threading.Event()
        self.results: list[subprocess.CompletedProcess[str]] = []
        self.api_reads = 0
        self.api_errors: list[str] = []

    def run(self) -> None:
        from speccat.archive import Archive, Filters

        cmd = [*SPECCAT, "--archive", self.archive, "query", "--format", "json", "--limit", "20"]
        while not self.stop.is_set():
            if len(self.results) < self.cli_runs:
                self.results.append(
                    subprocess.run(cmd, capture_output=True, text=True, timeout=120)
                )
            try:
                with Archive.open(self.archive, readonly=True) as archive:
                    total = archive.count(Filters())
                    rows = archive.page(Filters(), limit=20)
                    # two reads, two snapshots: the archive only grows in between
                    assert min(total, 20) <= len(rows) <= 20
                self.api_reads += 1
            except Exception as exc:  # recorded, asserted on in the test thread
                self.api_errors.append(f"{type(exc).__name__}: {exc}")
            self.stop.wait(0.2)


def check_writers(results: list[subprocess.CompletedProcess[str]], n_files: int) -> None:
    for r in results:
        assert r.returncode == 0, r.stderr[-1500:]
        assert "locked" not in r.stderr.lower()
        assert "Traceback" not in r.stderr
    summaries = [json.loads(r.stdout) for r in results]
    assert all(s["failures"] == [] for s in summaries)
    # every file went in through exactly one writer; the others skipped it
    assert sum(s["files_stored"] for s in summaries) == n_files
    found = sum(s["files_found"] for s in summaries)
    assert sum(s["files_stored"] + s["files_skipped"] for s in summaries) == found
    assert sum(s["files_skipped"] for s in summaries) > 0, "the writers never raced"


def check_readers(reader: ReaderLoop) -> None:
    assert reader.results, "the reader never ran"
    assert reader.api_errors == []
    assert reader.api_reads > 0
    for r in reader.results:
        assert r.returncode == 0, r.stderr[-1500:]
        assert "locked" not in r.stderr.lower()
        json.loads(r.stdout)


def stored_counts(rows: list[tuple[str, int]]) -> dict[str, int]:
    return {sha: n for sha, n in rows}


COUNT_SQL = (
    "SELECT f.sha256, count(s.id) FROM files f LEFT JOIN spectra s ON s.file_id = f.id "
    "GROUP BY f.sha256"
)
DUP_SQL = (
    'SELECT count(*) FROM (SELECT file_id, hdu, "row", primary_stokes, count(*) AS n '
    'FROM spectra GROUP BY file_id, hdu, "row", primary_stokes HAVING count(*) > 1) AS d'
)


@pytest.mark.slow
def test_four_sqlite_writers_and_a_reader(tmp_path: Path) -> None:
    from speccat.archive import Archive

    folders, expected = make_night(tmp_path / "night")
    archive = str(tmp_path / "shared.sqlite")
    Archive.open(archive, create=True).close()  # the reader needs an archive to open
    reader = ReaderLoop(archive)
    reader.start()
    try:
        results = run_writers(archive, folders)
    finally:
        reader.stop.set()
        reader.join(timeout=120)
    check_writers(results, len(expected))
    check_readers(reader)
    with sqlite3.connect(archive) as db:
        assert db.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
        counts = stored_counts(db.execute(COUNT_SQL).fetchall())
        assert db.execute(DUP_SQL).fetchone()[0] == 0
        n_paths = db.execute("SELECT count(DISTINCT path) FROM files").fetchone()[0]
    assert counts == expected  # every file once, with all of its spectra
    assert n_paths == len(expected)


# --------------------------------------------------------------------------- PostgreSQL


@pytest.fixture
def fresh_pg_url() -> Iterator[str]:
    yield from fresh_pg_database()


def _pg_rows(url: str, sql: str) -> list[Any]:
    from sqlalchemy import create_engine, text

    engine = create_engine(url)
    try:
        with engine.connect() as conn:
            return [tuple(r) for r in conn.execute(text(sql)).all()]
    finally:
        engine.dispose()


@pytest.mark.slow
@pytest.mark.postgres
def test_four_postgresql_writers_race_for_the_same_files(tmp_path: Path, fresh_pg_url: str) -> None:
    folders, expected = make_night(tmp_path / "night", n_sets=3)
    from speccat.archive import Archive

    Archive.open(fresh_pg_url, create=True).close()
    reader = ReaderLoop(fresh_pg_url)
    reader.start()
    try:
        results = run_writers(fresh_pg_url, folders)
    finally:
        reader.stop.set()
        reader.join(timeout=120)
    check_writers(results, len(expected))
    check_readers(reader)
    assert stored_counts(_pg_rows(fresh_pg_url, COUNT_SQL)) == expected
    assert _pg_rows(fresh_pg_url, DUP_SQL) == [(0,)]
