"""First pages under range/glob filters: the bounded walk of the covering default-order index
and its fall-back sort give exactly the brute-force rows; the schema migration that adds the
index keeps every row."""

from __future__ import annotations

import os
from pathlib import Path
from typing import Any

import archive_fixtures
import pytest
from archive_fixtures import fill_archive, table_checksums
from sqlalchemy import text
from test_filters import brute

from speccat.archive import SCHEMA_VERSION, Archive, ArchiveError, Filters
from speccat.archive import queries as queries_module
from speccat.archive.schema import WALK_INDEX

filled_archive = archive_fixtures.filled_archive  # module-wide archive on both engines

RANGES = [
    {"vel": "-50:50"},
    {"vel": ":-20"},
    {"freq": "1.5GHz:"},
    {"freq": ":2000"},
    {"since": "2026-03-15T06:00"},
    {"until": "2026-03-14"},
    {"source": "neb*"},
    {"species": "h*"},
    {"source": "*", "snr": "20"},
    {"vel": "-100:100", "since": "2026-03-15"},
    {"vel": "1e6:"},  # matches nothing
]


def _expected(rows: list[dict[str, Any]], f: Filters, offset: int, limit: int) -> list[int]:
    hits = [r for r in rows if brute(f, r)]
    hits.sort(key=lambda r: (r["snr"], r["id"]), reverse=True)
    return [r["id"] for r in hits[offset : offset + limit]]


@pytest.mark.parametrize(("walk_rows", "factor"), [(3, 1), (25, 2), (20_000, 100)])
def test_walked_and_sorted_pages_equal_brute_force(
    filled_archive: Any, monkeypatch: pytest.MonkeyPatch, walk_rows: int, factor: int
) -> None:
    """A tiny walk span makes many walks fail (the sort is used), a large one walks the whole
    table; the pages are the brute-force pages either way."""
    archive, rows = filled_archive
    monkeypatch.setattr(queries_module, "WALK_ROWS", walk_rows)
    monkeypatch.setattr(queries_module, "WALK_FACTOR", factor)
    outcomes: list[bool] = []
    real = archive._walk_ids

    def spy(*args: Any, **kwargs: Any) -> Any:
        ids = real(*args, **kwargs)
        outcomes.append(ids is not None)
        return ids

    monkeypatch.setattr(archive, "_walk_ids", spy)
    for values in RANGES:
        f = Filters.parse(values)
        for offset, limit in ((0, 7), (0, 200), (5, 3), (30, 10)):
            got = [r["detection_id"] for r in archive.page(f, offset=offset, limit=limit)]
            assert got == _expected(rows, f, offset, limit), (values, offset, limit)
    if archive.dialect == "sqlite":
        assert any(outcomes)  # some pages came from the walk ...
        if walk_rows < 100:
            assert not all(outcomes)  # ... and, with a tiny span, some from the sort
    else:
        assert outcomes == []  # PostgreSQL plans with its own statistics


def test_walk_is_not_tried_where_an_index_gives_the_order(filled_archive: Any) -> None:
    archive, _ = filled_archive
    for values in ({}, {"species": "H"}, {"line": "H109a"}, {"night": "2026-03-14"}):
        assert not archive._walks(Filters.parse(values), "snr", True, 200), values
    vel = Filters.parse({"vel": "0:10"})
    assert not archive._walks(vel, "snr", False, 200)  # ascending
    assert not archive._walks(vel, "v_lsr_kms", True, 200)  # another sort
    assert not archive._walks(vel, "snr", True, 100_000)  # a deep page
    assert archive._walks(vel, "snr", True, 200) == (archive.dialect == "sqlite")


def test_explain_of_the_walk_reads_the_covering_index(tmp_path: Path) -> None:
    archive, _ = fill_archive(str(tmp_path / "w.sqlite"), range(2))
    with archive, archive._reader.connect() as conn:
        plan = conn.exec_driver_sql(
            f"EXPLAIN QUERY PLAN SELECT id FROM detections INDEXED BY {WALK_INDEX} "
            "WHERE snr >= 1 AND center_hz >= 1 ORDER BY snr DESC, id DESC LIMIT 200"
        ).all()
    shown = " ".join(str(r[-1]) for r in plan)
    assert f"COVERING INDEX {WALK_INDEX}" in shown and "TEMP B-TREE" not in shown


def _make_version_1(url: str) -> dict[str, Any]:
    """A filled archive turned into a version-1 one; returns its table checksums."""
    archive, _ = fill_archive(url, range(3))
    with archive:
        before = table_checksums(archive)
        with archive._write() as conn:
            conn.execute(text(f"DROP INDEX {WALK_INDEX}"))
            conn.execute(text("UPDATE schema_version SET version = 1"))
    return before


def _version_and_names(archive: Archive) -> tuple[int, set[str]]:
    with archive._reader.connect() as conn:
        version = conn.execute(text("SELECT version FROM schema_version")).scalar_one()
        names = set(conn.execute(text("SELECT name FROM sqlite_master")).scalars())
    return int(version), names


@pytest.mark.parametrize("readonly", [False, True])
def test_version_1_archive_is_migrated_with_its_rows_kept(tmp_path: Path, readonly: bool) -> None:
    # a reading command (query, export, report, browse opens read-only) upgrades it too
    url = str(tmp_path / "old.sqlite")
    before = _make_version_1(url)
    with Archive.open(url, readonly=readonly) as migrated:
        assert migrated.readonly == readonly
        assert table_checksums(migrated) == before
        version, names = _version_and_names(migrated)
        assert migrated.count(Filters.parse({"vel": "-100:100"})) >= 0  # the walk works
    assert version == SCHEMA_VERSION == 2 and WALK_INDEX in names


def test_version_1_archive_that_cannot_be_written_gets_a_clear_error(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    url = str(tmp_path / "old.sqlite")
    before = _make_version_1(url)
    real_access = os.access
    # as for a file the user may not write (the tests may run as root, who may write anything)
    monkeypatch.setattr(
        "speccat.archive.core.os.access",
        lambda p, mode: False if mode & os.W_OK else real_access(p, mode),
    )
    with pytest.raises(ArchiveError, match=r"schema version 1 is older .* read-only\); open it"):
        Archive.open(url, readonly=True)
    monkeypatch.undo()
    with Archive.open(url) as unchanged:
        assert _version_and_names(unchanged)[0] == SCHEMA_VERSION  # upgraded only now
        assert table_checksums(unchanged) == before


def test_count_can_stop_early(filled_archive: Any) -> None:
    archive, rows = filled_archive
    f = Filters.parse({"vel": "-100:100"})
    matching = sum(brute(f, r) for r in rows)
    assert 10 < matching < len(rows)
    assert archive.count(f) == matching
    assert archive.count(f, at_most=10) == 11  # "more than 10"
    assert archive.count(f, at_most=matching) == matching
    assert archive.count(Filters.parse({"vel": "1e6:"}), at_most=10) == 0
