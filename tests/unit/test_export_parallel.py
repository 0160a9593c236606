"""The parallel CSV export (worker processes over detection-id ranges) writes the very bytes of
the sequential one, for any filter, and leaves nothing behind when a worker fails."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import archive_fixtures
import pytest
from archive_fixtures import fill_archive

import speccat.export as ex
from speccat.archive import Archive, Filters

archive_url = archive_fixtures.archive_url  # a fresh archive URL on each engine
FILTERS = [{}, {"snr": "20"}, {"source": "neb*"}, {"vel": "1e6:"}]


@pytest.fixture(scope="module")
def archive_path(tmp_path_factory: pytest.TempPathFactory) -> str:
    path = str(tmp_path_factory.mktemp("par") / "p.sqlite")
    fill_archive(path, range(12), n_spectra=3, n_det=3)[0].close()
    return path


@pytest.mark.parametrize("values", FILTERS)
def test_parallel_csv_equals_sequential(
    archive_path: str, tmp_path: Path, monkeypatch: pytest.MonkeyPatch, values: dict[str, str]
) -> None:
    monkeypatch.setattr(ex, "PARALLEL_MIN_ROWS", 1)
    monkeypatch.setattr(ex, "PIECE_IDS", 7)  # many pieces, some of them empty under filters
    f = Filters.parse(values)
    used: list[int] = []
    real = ex._write_csv_parallel

    def spy(*args: Any) -> int:
        n = real(*args)
        used.append(n)
        return n

    monkeypatch.setattr(ex, "_write_csv_parallel", spy)
    with Archive.open(archive_path, readonly=True) as archive:
        n_seq = ex.export(archive, f, tmp_path / "seq.csv", jobs=1)
        n_par = ex.export(archive, f, tmp_path / "par.csv", jobs=2)
        matching = archive.count(f)
    assert n_par == n_seq == matching
    assert (tmp_path / "par.csv").read_bytes() == (tmp_path / "seq.csv").read_bytes()
    assert used == ([n_par] if matching else [])  # nothing to split when nothing matches


def test_small_exports_and_other_orders_stay_sequential(archive_path: str) -> None:
    with Archive.open(archive_path, readonly=True) as archive:
        assert ex._pieces(archive, Filters(), 2) is None  # below PARALLEL_MIN_ROWS
        assert ex._pieces(archive, Filters(), 1) is None
    assert ex.export_workers(3) == 3 and ex.export_workers(0) == 1


_REAL_PIECE = ex._csv_piece


def _broken_piece(
    target: str, filters: Filters, id_range: tuple[int, int], width: int
) -> tuple[int, str]:
    """A worker task that fails past the first pieces (module level: tasks are pickled)."""
    if id_range[0] > 20:
        raise RuntimeError("disk vanished")
    return _REAL_PIECE(target, filters, id_range, width)


def test_failing_worker_leaves_no_file(
    archive_path: str, tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setattr(ex, "PARALLEL_MIN_ROWS", 1)
    monkeypatch.setattr(ex, "PIECE_IDS", 5)
    monkeypatch.setattr(ex, "_csv_piece", _broken_piece)
    with (
        Archive.open(archive_path, readonly=True) as archive,
        pytest.raises(RuntimeError, match="disk vanished"),
    ):
        ex.export(archive, Filters(), tmp_path / "half.csv", jobs=2)
    assert list(tmp_path.iterdir()) == []


def test_streamed_records_equal_the_paged_ones(archive_url: str) -> None:
    """``iter_detections`` (DB-API rows, MHz and ISO times made in SQL) gives the very records
    of ``page`` (SQLAlchemy rows through ``to_record``), times with and without microseconds,
    and no time at all, included."""
    import dataclasses
    from datetime import UTC, datetime

    from archive_fixtures import make_file

    from speccat.model import FileResult

    stamps = [
        datetime(2026, 3, 14, 21, 5, 7, 123456, tzinfo=UTC),
        datetime(2026, 3, 14, 21, 5, 7, tzinfo=UTC),
        datetime(2026, 3, 15, 0, 0, 0, 1, tzinfo=UTC),
        None,
    ]
    with Archive.open(archive_url, create=True) as archive:
        run_id = archive.begin_run({})
        for seed, stamp in enumerate(stamps):
            f = make_file(seed)
            spectra = tuple(
                dataclasses.replace(s, spectrum=dataclasses.replace(s.spectrum, obs_time=stamp))
                for s in f.spectra
            )
            archive.store_file(run_id, FileResult(f.path, f.size_bytes, f.sha256, spectra), "n")
        streamed = list(archive.iter_detections())
        paged = archive.page(sort="detection_id", descending=False, limit=1000)
    assert streamed == paged and len(paged) == 2 * 2 * len(stamps)
    times = {r["obs_time"] for r in paged}
    assert times == {None} | {s.replace(tzinfo=None).isoformat() for s in stamps if s}
