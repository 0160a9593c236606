"""``speccat query`` end to end: formats, exit codes, hostile filter text."""

from __future__ import annotations

import csv
import io
import json
from pathlib import Path

import archive_fixtures
import pytest
from archive_fixtures import fill_archive, table_checksums

from speccat.archive import EXPORT_COLUMNS, Archive, Filters
from speccat.cli import main

archive_url = archive_fixtures.archive_url  # the two-engine fixture


@pytest.fixture(scope="module")
def sqlite_archive(tmp_path_factory: pytest.TempPathFactory) -> str:
    """A module-wide archive; the tests only read it."""
    url = str(tmp_path_factory.mktemp("q") / "q.sqlite")
    fill_archive(url, range(8))[0].close()
    return url


def test_json_output_is_the_first_page(
    archive_url: str, capsys: pytest.CaptureFixture[str]
) -> None:
    fill_archive(archive_url, range(6))[0].close()
    code = main(
        ["--archive", archive_url, "query", "--species", "h*", "--limit", "7", "--format", "json"]
    )
    assert code == 0
    data = json.loads(capsys.readouterr().out)
    with Archive.open(archive_url, readonly=True) as archive:
        expected = archive.page(Filters.parse({"species": "h*"}), limit=7)
    assert data == [{k: r[k] for k in EXPORT_COLUMNS} for r in expected]
    assert 0 < len(data) <= 7


def test_csv_output_has_the_contract_header(
    sqlite_archive: str, capsys: pytest.CaptureFixture[str]
) -> None:
    code = main(
        [
            "--archive",
            sqlite_archive,
            "query",
            "--sort",
            "v_lsr_kms",
            "--ascending",
            "--format",
            "csv",
        ]
    )
    assert code == 0
    rows = list(csv.reader(io.StringIO(capsys.readouterr().out)))
    assert tuple(rows[0]) == EXPORT_COLUMNS
    with Archive.open(sqlite_archive, readonly=True) as archive:
        expected = archive.page(sort="v_lsr_kms", descending=False, limit=50)
    assert [int(r[0]) for r in rows[1:]] == [r["detection_id"] for r in expected]
    v_col = EXPORT_COLUMNS.index("v_lsr_kms")
    assert [float(r[v_col]) if r[v_col] else None for r in rows[1:]] == [
        r["v_lsr_kms"] for r in expected
    ]


def test_table_output_and_count(sqlite_archive: str, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["--archive", sqlite_archive, "query", "--kind", "absorption", "--limit", "3"]) == 0
    out, err = capsys.readouterr()
    with Archive.open(sqlite_archive, readonly=True) as archive:
        total = archive.count(Filters(kind="absorption"))
        top = archive.page(Filters(kind="absorption"), limit=3)
    assert f"3 of {total} matching detections shown" in err
    for rec in top:
        assert str(rec["detection_id"]) in out
    assert "\x1b[" not in out  # plain when piped


def test_archive_from_the_environment(
    sqlite_archive: str, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setenv("SPECCAT_ARCHIVE", sqlite_archive)
    assert main(["query", "--format", "json", "--limit", "1"]) == 0
    assert len(json.loads(capsys.readouterr().out)) == 1


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (["--vel", "10:-5"], "--vel: the minimum 10 is above the maximum -5"),
        (["--snr", "abc"], "--snr: expected a number"),
        (["--since", "someday"], "--since: expected a date"),
        (["--sort", "colour"], "--sort: unknown column"),
        (["--limit", "0"], "--limit must be between"),
    ],
)
def test_bad_filters_exit_1(
    sqlite_archive: str, capsys: pytest.CaptureFixture[str], args: list[str], message: str
) -> None:
    assert main(["--archive", sqlite_archive, "query", *args]) == 1
    err = capsys.readouterr().err
    assert message in err and err.count("\n") == 1


def test_missing_or_corrupt_archive_exits_2(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    assert main(["--archive", str(tmp_path / "none.sqlite"), "query"]) == 2
    assert "no archive at" in capsys.readouterr().err
    junk = tmp_path / "junk.sqlite"
    junk.write_bytes(b"\x00garbage" * 500)
    assert main(["--archive", str(junk), "query"]) == 2
    assert "not a speccat archive or corrupt" in capsys.readouterr().err
    assert main(["--archive", "postgresql+psycopg://nobody:pw@127.0.0.1:9/none", "query"]) == 2
    err = capsys.readouterr().err
    assert "cannot open the archive" in err and "pw@" not in err


HOSTILE = [
    "'; DROP TABLE detections; --",
    "%",
    "_",
    "\\",
    "[*",
    "ä*",
    "x" * 300,
    "a\tb",
    "1 OR 1=1",
]


@pytest.mark.parametrize(
    "flag",
    [
        "--source",
        "--species",
        "--line",
        "--night",
        "--kind",
        "--vel",
        "--freq",
        "--snr",
        "--since",
        "--until",
    ],
)
def test_hostile_text_changes_nothing(
    sqlite_archive: str, capsys: pytest.CaptureFixture[str], flag: str
) -> None:
    with Archive.open(sqlite_archive, readonly=True) as archive:
        before = table_checksums(archive)
    for value in HOSTILE:
        code = main(["--archive", sqlite_archive, "query", f"{flag}={value}", "--format", "json"])
        out, err = capsys.readouterr()
        if code == 0:
            assert json.loads(out) == [] or flag in ("--source", "--species")
        else:
            assert code == 1 and err.startswith("speccat: error: ") and err.count("\n") == 1
    with Archive.open(sqlite_archive, readonly=True) as archive:
        assert table_checksums(archive) == before


def test_negative_velocity_range_is_a_value(
    sqlite_archive: str, capsys: pytest.CaptureFixture[str]
) -> None:
    code = main(["--archive", sqlite_archive, "query", "--vel", "-50:10", "--format", "json"])
    assert code == 0
    data = json.loads(capsys.readouterr().out)
    with Archive.open(sqlite_archive, readonly=True) as archive:
        expected = archive.page(Filters.parse({"vel": "-50:10"}), limit=50)
    assert [r["detection_id"] for r in data] == [r["detection_id"] for r in expected] != []
