"""Strings longer than their column are cut to the column's length and flagged (PostgreSQL
refuses over-long values and with them the whole transaction; SQLite would keep them)."""

from __future__ import annotations

import dataclasses

import archive_fixtures
from archive_fixtures import make_file
from sqlalchemy import text

from speccat.archive import Archive
from speccat.archive.core import CLIPPED_FLAG
from speccat.archive.schema import spectra, string_lengths
from speccat.model import FileResult

archive_url = archive_fixtures.archive_url  # the two-engine fixture


def test_column_lengths_come_from_the_table_metadata() -> None:
    lengths = string_lengths("spectra")
    assert lengths["source"] == spectra.c.source.type.length
    assert "flags" not in lengths  # Text columns are unbounded


def test_overlong_strings_are_clipped_and_flagged(archive_url: str) -> None:
    good = make_file(80, n_spectra=2)
    first = good.spectra[0]
    long_spec = dataclasses.replace(
        first.spectrum, source="S" * 300, telescope="T" * 300, intensity_unit="K" * 100
    )
    results = (dataclasses.replace(first, spectrum=long_spec), *good.spectra[1:])
    odd = FileResult(good.path, good.size_bytes, good.sha256, results)
    lengths = string_lengths("spectra")
    with Archive.open(archive_url, create=True) as archive:
        assert archive.store_file(archive.begin_run({}), odd, "n")
        with archive._reader.connect() as conn:
            rows = conn.execute(
                text("SELECT source, telescope, intensity_unit, flags FROM spectra ORDER BY id")
            ).all()
            det_sources = {
                r[0] for r in conn.execute(text("SELECT DISTINCT source FROM detections"))
            }
    assert len(rows) == 2
    source, telescope, unit, flags = rows[0]
    assert source == "S" * lengths["source"]
    assert telescope == "T" * lengths["telescope"]
    assert unit == "K" * lengths["intensity_unit"]
    assert CLIPPED_FLAG in flags.split(";")
    assert CLIPPED_FLAG not in rows[1][3].split(";")  # the ordinary spectrum is not flagged
    assert "S" * lengths["source"] in det_sources  # detections carry the clipped source
