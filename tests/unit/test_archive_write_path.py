"""The writer's fast path (rows built by workers, inserts on the driver cursor) stores exactly
what plain SQLAlchemy Core inserts store, keeps a file all in or all out, and reads old blobs.

All data here is invented test data (archive_fixtures); the checks compare what goes in with
what comes out, on both engines.
"""

from __future__ import annotations

import sqlite3
import struct
import zlib
from typing import Any

import numpy as np
import pytest
from archive_fixtures import archive_url, make_file, table_checksums  # noqa: F401
from sqlalchemy import func, insert, select

from speccat.archive import Archive, ArchiveError
from speccat.archive.blobs import decode_data, decode_freq, encode_data, encode_freq
from speccat.archive.core import CLIPPED_FLAG
from speccat.archive.rows import (
    CANDIDATE_COLUMNS,
    DETECTION_COLUMNS,
    SPECTRUM_COLUMNS,
    PreparedDetection,
    PreparedFile,
    prepare_file,
)
from speccat.archive.schema import candidates, detections, files, spectra, spectrum_data


def _core_store(archive: Archive, run_id: int, prepared: PreparedFile, night: str) -> None:
    """The reference: the same prepared rows through ordinary SQLAlchemy Core inserts."""
    assert archive._writer is not None
    with archive._writer.begin() as conn:
        file_id = conn.execute(
            insert(files)
            .values(
                path=prepared.path,
                size_bytes=prepared.size_bytes,
                sha256=prepared.sha256,
                run_id=run_id,
                night=night,
            )
            .returning(files.c.id)
        ).scalar_one()
        for ps in prepared.spectra:
            row = dict(zip(SPECTRUM_COLUMNS, ps.row, strict=True))
            sid = conn.execute(
                insert(spectra).values(file_id=file_id, night=night, **row).returning(spectra.c.id)
            ).scalar_one()
            conn.execute(
                insert(spectrum_data).values(
                    spectrum_id=sid, freq_hz=ps.freq_blob, data=ps.data_blob
                )
            )
            for det in ps.detections:
                drow = dict(zip(DETECTION_COLUMNS, det.row, strict=True))
                did = conn.execute(
                    insert(detections)
                    .values(spectrum_id=sid, night=night, **drow)
                    .returning(detections.c.id)
                ).scalar_one()
                for cand in det.candidates:
                    crow = dict(zip(CANDIDATE_COLUMNS, cand, strict=True))
                    conn.execute(insert(candidates).values(detection_id=did, **crow))


def _without_runs(sums: dict[str, Any]) -> dict[str, Any]:
    return {k: v for k, v in sums.items() if k != "runs"}  # start times differ, by design


def test_fast_path_stores_what_core_inserts_store(tmp_path: Any) -> None:
    """Byte for byte on SQLite (where SQLAlchemy turns datetimes into text itself); the
    column-by-column test below runs on both engines."""
    results = [make_file(seed, n_spectra=3, n_det=2) for seed in range(40, 44)]
    with Archive.open(str(tmp_path / "fast.sqlite"), create=True) as fast:
        run = fast.begin_run({})
        for r in results:
            assert fast.store_file(run, r, "2026-03-14")
        with Archive.open(str(tmp_path / "ref.sqlite"), create=True) as ref:
            ref_run = ref.begin_run({})
            for r in results:
                _core_store(ref, ref_run, prepare_file(r), "2026-03-14")
            assert _without_runs(table_checksums(fast)) == _without_runs(table_checksums(ref))
    raw = {}
    for name in ("fast", "ref"):
        db = sqlite3.connect(tmp_path / f"{name}.sqlite")
        raw[name] = db.execute(
            "SELECT obs_time, typeof(obs_time) FROM detections ORDER BY id"
        ).fetchall()
        db.close()
    assert raw["fast"] == raw["ref"] and len(raw["fast"]) == 24


def test_stored_columns_match_the_prepared_rows(archive_url: str) -> None:  # noqa: F811
    """Each value lands in its own column (a parameter-order slip would swap two of them)."""
    result = make_file(7, n_spectra=2, n_det=3)
    prepared = prepare_file(result)
    with Archive.open(archive_url, create=True) as archive:
        assert archive.store_prepared(archive.begin_run({}), prepared, "n1")
        with archive._reader.connect() as conn:
            got_spectra = conn.execute(select(spectra).order_by(spectra.c.id)).mappings().all()
            got_dets = conn.execute(select(detections).order_by(detections.c.id)).mappings().all()
            got_cands = conn.execute(select(candidates).order_by(candidates.c.id)).mappings().all()
    want_dets = [det for ps in prepared.spectra for det in ps.detections]
    assert len(got_spectra) == 2 and len(got_dets) == 6
    for ps, got in zip(prepared.spectra, got_spectra, strict=True):
        assert {k: got[k] for k in SPECTRUM_COLUMNS} == dict(
            zip(SPECTRUM_COLUMNS, ps.row, strict=True)
        )
        assert got["night"] == "n1"
    for det, got in zip(want_dets, got_dets, strict=True):
        assert {k: got[k] for k in DETECTION_COLUMNS} == dict(
            zip(DETECTION_COLUMNS, det.row, strict=True)
        )
    want_cands = [
        dict(zip(CANDIDATE_COLUMNS, c, strict=True)) for det in want_dets for c in det.candidates
    ]
    assert [{k: g[k] for k in CANDIDATE_COLUMNS} for g in got_cands] == want_cands


def test_over_long_night_is_clipped_and_flags_the_spectra(archive_url: str) -> None:  # noqa: F811
    night = "N" * 150  # longer than the String(100) night columns
    with Archive.open(archive_url, create=True) as archive:
        assert archive.store_file(archive.begin_run({}), make_file(3, n_spectra=2), night)
        with archive._reader.connect() as conn:
            assert set(conn.execute(select(files.c.night)).scalars()) == {night[:100]}
            assert set(conn.execute(select(detections.c.night)).scalars()) == {night[:100]}
            flags = conn.execute(select(spectra.c.flags)).scalars().all()
    assert len(flags) == 2
    assert all(CLIPPED_FLAG in f.split(";") for f in flags)


def test_known_sha256_finds_exactly_the_archived_ones(archive_url: str) -> None:  # noqa: F811
    results = [make_file(seed) for seed in range(10, 15)]
    with Archive.open(archive_url, create=True) as archive:
        run = archive.begin_run({})
        for r in results[:3]:
            assert archive.store_file(run, r, "n")
        asked = [r.sha256 for r in results] + ["0" * 64]
        assert archive.known_sha256(asked, batch=2) == {r.sha256 for r in results[:3]}
        assert archive.known_sha256([]) == set()


def test_a_failing_insert_stores_nothing_of_the_file(archive_url: str) -> None:  # noqa: F811
    prepared = prepare_file(make_file(21, n_spectra=2, n_det=2))
    last = prepared.spectra[-1]
    bad_det = PreparedDetection(
        tuple(
            None if c == "stokes" else v
            for c, v in zip(DETECTION_COLUMNS, last.detections[-1].row, strict=True)
        ),
        (),
    )  # stokes is NOT NULL: the very last insert of the file fails
    broken = PreparedFile(
        prepared.path,
        prepared.size_bytes,
        prepared.sha256,
        (*prepared.spectra[:-1], type(last)(last.row, last.freq_blob, last.data_blob, (bad_det,))),
    )
    with Archive.open(archive_url, create=True) as archive:
        run = archive.begin_run({})
        with pytest.raises(ArchiveError, match="write failed"):
            archive.store_prepared(run, broken, "n")
        with archive._reader.connect() as conn:
            for table in (files, spectra, spectrum_data, detections, candidates):
                assert conn.execute(select(func.count()).select_from(table)).scalar_one() == 0
        assert archive.store_prepared(run, prepared, "n")  # the repaired file goes in whole
        assert archive.known_sha256([prepared.sha256]) == {prepared.sha256}


def test_a_prepared_failure_is_recorded_as_a_failure_only(archive_url: str) -> None:  # noqa: F811
    failed = PreparedFile("x.fits", 10, "ab" * 32, error="truncated header")
    with Archive.open(archive_url, create=True) as archive:
        assert archive.store_prepared(archive.begin_run({}), failed, "n") is False
        assert archive.known_sha256([failed.sha256]) == set()


def _old_layout(values: np.ndarray, dtype: str, raw: int) -> bytes:
    """A blob as the earlier writer made it (``raw`` low planes stored uncompressed)."""
    arr = np.ascontiguousarray(values, dtype=dtype).reshape(-1)
    size = arr.dtype.itemsize
    planes = np.ascontiguousarray(arr.view(np.uint8).reshape(-1, size).T)
    packed = zlib.compress(planes[raw:].tobytes(), 1)
    return struct.pack("<I", len(packed)) + packed + planes[:raw].tobytes()


def test_blobs_written_with_other_raw_plane_counts_still_decode() -> None:
    rng = np.random.default_rng(5)
    i = rng.normal(0, 1, 300).astype(np.float32)
    v = rng.normal(0, 1e-3, 300).astype(np.float32)
    both = np.concatenate([i, v])
    for raw in (0, 2, 4):
        back = decode_data(_old_layout(both, "<f4", raw), ["I", "V"], 300)
        assert back["I"].tobytes() == i.tobytes() and back["V"].tobytes() == v.tobytes()
    assert decode_data(encode_data({"I": i, "V": v}), ["I", "V"], 300)["V"].tobytes() == (
        v.tobytes()
    )


def test_a_repeated_axis_reuses_its_blob_but_stays_bit_exact() -> None:
    axis = np.linspace(4.9e9, 5.1e9, 2048)
    first = encode_freq(axis)
    assert encode_freq(axis.copy()) == first
    other = axis.copy()
    other[0] = -0.0  # equal to 0.0 as a number, but a different bit pattern
    other[1] = 0.0
    for probe in (other, axis[::-1], axis[:100]):
        assert decode_freq(encode_freq(probe)).tobytes() == np.ascontiguousarray(probe).tobytes()
    assert decode_freq(first).tobytes() == axis.tobytes()


def test_over_long_candidate_strings_are_cut_to_their_columns(archive_url: str) -> None:  # noqa: F811
    from dataclasses import replace

    from speccat.model import Candidate

    result = make_file(31, n_spectra=1, n_det=1)
    sres = result.spectra[0]
    long = Candidate("L" * 150, "S" * 150, "T" * 250, 1.4e9, 12.5, 0.5)
    det = replace(sres.detections[0], candidates=(long, *sres.detections[0].candidates))
    odd = replace(result, spectra=(replace(sres, detections=(det,)),))
    with Archive.open(archive_url, create=True) as archive:
        assert archive.store_file(archive.begin_run({}), odd, "n")
        with archive._reader.connect() as conn:
            first = conn.execute(select(candidates).where(candidates.c.rank == 1)).mappings().one()
    assert (first["name"], first["species"], first["transition"]) == (
        "L" * 100,
        "S" * 100,
        "T" * 200,
    )
    assert (first["rest_freq_hz"], first["v_lsr_kms"], first["score"]) == (1.4e9, 12.5, 0.5)
