"""``speccat report``: a night's summary as JSON and as plain text when piped."""

from __future__ import annotations

import json
import re
from collections import Counter
from pathlib import Path

import pytest
from archive_fixtures import NIGHTS, fill_archive, input_rows

from speccat.archive import Archive
from speccat.cli import main


@pytest.fixture(scope="module")
def night_archive(tmp_path_factory: pytest.TempPathFactory) -> tuple[str, list[dict]]:
    url = str(tmp_path_factory.mktemp("r") / "r.sqlite")
    archive, results = fill_archive(url, range(9))
    with archive:
        run_id = archive.begin_run({})
        archive.store_failure(run_id, "night/broken.fits", "no spectral axis", night=NIGHTS[1])
    return url, input_rows(results)


def test_json_report_counts(
    night_archive: tuple[str, list[dict]], capsys: pytest.CaptureFixture[str]
) -> None:
    url, rows = night_archive
    night = NIGHTS[1]
    assert main(["--archive", url, "report", "--night", night, "--format", "json"]) == 0
    report = json.loads(capsys.readouterr().out)
    mine = [r for r in rows if r["night"] == night]
    assert report["night"] == night
    assert report["files"] == len({r["file"] for r in mine})
    assert report["detections"] == len(mine)
    assert report["unidentified"] == sum(r["line"] is None for r in mine)
    per_line = Counter(r["line"] for r in mine if r["line"] is not None)
    assert {x["line"]: x["detections"] for x in report["lines"]} == dict(per_line)
    assert report["strongest"][0]["snr"] == max(r["snr"] for r in mine)
    assert all(d["species"] is None for d in report["unidentified_features"])
    assert report["failures"] == [{"path": "night/broken.fits", "reason": "no spectral axis"}]
    flags = Counter(f for r in mine for f in dict.fromkeys((*r["det"].fit.flags, *r["det"].flags)))
    assert report["detection_flags"] == dict(flags)


def test_default_night_is_the_latest_stored(
    night_archive: tuple[str, list[dict]], capsys: pytest.CaptureFixture[str]
) -> None:
    url, _ = night_archive
    assert main(["--archive", url, "report", "--format", "json"]) == 0
    with Archive.open(url, readonly=True) as archive:
        last_file_night = archive.night_report()["night"]
    assert json.loads(capsys.readouterr().out)["night"] == last_file_night == NIGHTS[(9 - 1) % 3]


def test_plain_text_when_piped(
    night_archive: tuple[str, list[dict]],
    capsys: pytest.CaptureFixture[str],
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    url, _ = night_archive
    monkeypatch.setenv("NO_COLOR", "1")
    assert main(["--archive", url, "report", "--night", NIGHTS[1]]) == 0
    out = capsys.readouterr().out
    assert "\x1b[" not in out
    for title in (
        "sources observed",
        "detections per species and line",
        "strongest detections",
        "unidentified features",
        "unreadable files",
    ):
        assert title in out
    assert "night/broken.fits" in out and "no spectral axis" in out
    assert not any(ch in out for ch in "┏━│└")  # no box drawing when piped


def test_forced_terminal_respects_no_color(
    night_archive: tuple[str, list[dict]],
    capsys: pytest.CaptureFixture[str],
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    url, _ = night_archive
    monkeypatch.setenv("FORCE_COLOR", "1")
    monkeypatch.setenv("TTY_COMPATIBLE", "1")
    monkeypatch.setenv("NO_COLOR", "1")
    assert main(["--archive", url, "report", "--night", NIGHTS[0]]) == 0
    out = capsys.readouterr().out
    assert "sources observed" in out
    assert "\x1b[" in out  # styled: rich thinks it is a terminal
    assert re.search(r"\x1b\[[0-9;]*(3[0-8]|9[0-7]|4[0-8])m", out) is None  # but no colour


def test_unknown_night_and_empty_archive(
    night_archive: tuple[str, list[dict]], tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    url, _ = night_archive
    assert main(["--archive", url, "report", "--night", "1999-01-01"]) == 1
    assert "no data for night '1999-01-01'" in capsys.readouterr().err
    empty = str(tmp_path / "empty.sqlite")
    Archive.open(empty, create=True).close()
    assert main(["--archive", empty, "report"]) == 1
    assert "holds no nights yet" in capsys.readouterr().err
