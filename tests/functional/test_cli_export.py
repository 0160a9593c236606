"""``speccat export`` end to end: formats by suffix, --force, --with-derived, exit codes."""

from __future__ import annotations

import csv
from pathlib import Path

import pytest
from archive_fixtures import fill_archive
from astropy.table import Table

from speccat.archive import EXPORT_COLUMNS, Archive, Filters
from speccat.cli import main


@pytest.fixture(scope="module")
def sqlite_archive(tmp_path_factory: pytest.TempPathFactory) -> str:
    url = str(tmp_path_factory.mktemp("e") / "e.sqlite")
    fill_archive(url, range(8))[0].close()
    return url


@pytest.mark.parametrize("suffix", [".csv", ".ecsv", ".vot", ".xml", ".json"])
def test_export_each_format(
    sqlite_archive: str, tmp_path: Path, capsys: pytest.CaptureFixture[str], suffix: str
) -> None:
    target = tmp_path / f"sel{suffix}"
    code = main(
        [
            "--archive",
            sqlite_archive,
            "export",
            "--night",
            "2026-03-15",
            "--snr",
            "12",
            "-o",
            str(target),
        ]
    )
    assert code == 0
    with Archive.open(sqlite_archive, readonly=True) as archive:
        n = archive.count(Filters.parse({"night": "2026-03-15", "snr": "12"}))
    assert f"wrote {n} detections" in capsys.readouterr().err
    if suffix == ".json":
        import json

        assert len(json.loads(target.read_text(encoding="utf-8"))) == n
    else:
        fmt = {".csv": "ascii.csv", ".ecsv": "ascii.ecsv"}.get(suffix, "votable")
        table = Table.read(target, format=fmt)
        assert len(table) == n and tuple(table.colnames) == EXPORT_COLUMNS


def test_existing_file_needs_force(
    sqlite_archive: str, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    target = tmp_path / "out.csv"
    target.write_text("keep me\n")
    assert main(["--archive", sqlite_archive, "export", "-o", str(target)]) == 1
    assert "already exists; use --force" in capsys.readouterr().err
    assert target.read_text() == "keep me\n"
    assert main(["--archive", sqlite_archive, "export", "-o", str(target), "--force"]) == 0
    with target.open(encoding="utf-8") as fh:
        assert tuple(next(csv.reader(fh))) == EXPORT_COLUMNS


def test_unknown_suffix_is_a_usage_error_before_the_archive(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    code = main(
        ["--archive", str(tmp_path / "none.sqlite"), "export", "-o", str(tmp_path / "x.parquet")]
    )
    assert code == 1
    assert "unknown export suffix '.parquet'" in capsys.readouterr().err
    assert list(tmp_path.iterdir()) == []


def test_missing_folder_and_bad_filter(
    sqlite_archive: str, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    assert main(["--archive", sqlite_archive, "export", "-o", str(tmp_path / "no" / "x.csv")]) == 1
    assert "does not exist" in capsys.readouterr().err
    assert (
        main(["--archive", sqlite_archive, "export", "--vel", "5:1", "-o", str(tmp_path / "x.csv")])
        == 1
    )
    assert not (tmp_path / "x.csv").exists()


def test_with_derived_columns(sqlite_archive: str, tmp_path: Path) -> None:
    derived = pytest.importorskip("speccat.physics.derived")
    target = tmp_path / "d.csv"
    assert main(["--archive", sqlite_archive, "export", "--with-derived", "-o", str(target)]) == 0
    with target.open(encoding="utf-8") as fh:
        header = tuple(next(csv.reader(fh)))
    assert header == EXPORT_COLUMNS + tuple(derived.DERIVED_COLUMNS)
