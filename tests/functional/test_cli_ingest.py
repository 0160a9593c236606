"""``speccat ingest`` and ``speccat measure`` end to end, on small files written for each test.

The spectra are synthetic (invented sources, lines injected at known velocities); they check
that the pipeline carries what it measured into the archive, not any physical value.
"""

from __future__ import annotations

import hashlib
import json
import sqlite3
import subprocess
import sys
from datetime import UTC, datetime
from pathlib import Path

import numpy as np
import pytest

from speccat.catalogue import builtin
from speccat.cli import main
from speccat.io.writers import write_csv, write_fits_image
from speccat.model import C_KMS, Origin, Spectrum

TABLES = ("runs", "files", "failures", "spectra", "detections", "candidates", "sources")


def _spectrum(source: str, line: str, v_kms: float, when: datetime, seed: int) -> Spectrum:
    rest = builtin().by_name(line).rest_freq_hz
    freq = rest * (1 - v_kms / C_KMS) + (np.arange(1024) - 512) * 6.1e3
    rng = np.random.default_rng(seed)
    centre = rest * (1 - v_kms / C_KMS)
    sigma = rest * 25.0 / C_KMS / 2.3548
    y = 0.3 + rng.normal(0, 0.01, freq.size) + 0.2 * np.exp(-0.5 * ((freq - centre) / sigma) ** 2)
    return Spectrum(
        freq_hz=freq,
        intensity={"I": y},
        intensity_unit="K",
        source=source,
        origin=Origin("synthetic"),
        ra_deg=281.5,
        dec_deg=-3.9,
        obs_time=when,
        specsys="LSRK",
    )


@pytest.fixture
def night(tmp_path: Path) -> Path:
    folder = tmp_path / "night"
    (folder / "sub").mkdir(parents=True)
    t0 = datetime(2031, 5, 6, 23, 10, tzinfo=UTC)
    for i in range(4):
        spec = _spectrum(f"Ember-{i}", "H109a", 20.0 + 10 * i, t0.replace(hour=23 - i), i)
        write_fits_image(folder / f"scan{i}.fits", spec)
    write_csv(folder / "sub" / "scan9.csv", _spectrum("Ember-9", "H109a", 55.0, t0, 9))
    (folder / "broken.fits").write_bytes(b"SIMPLE  =                    T" + b"\0" * 50)
    (folder / "notes.txt").write_text("not a spectrum, and not looked at")
    return folder


def _table_digests(db: Path) -> dict[str, tuple[int, str]]:
    con = sqlite3.connect(db)
    out = {}
    for table in TABLES:
        rows = con.execute(f"select * from {table} order by 1").fetchall()
        if table == "runs":  # a second run adds its own row; compare the rest
            rows = []
        out[table] = (len(rows), hashlib.sha256(repr(rows).encode()).hexdigest())
    con.close()
    return out


def _ingest(db: Path, *args: str, capsys: pytest.CaptureFixture[str]) -> dict:
    assert main(["--archive", str(db), "ingest", *args, "--json"]) == 0
    return json.loads(capsys.readouterr().out)


def test_ingest_stores_good_files_and_reports_broken_ones(
    night: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    db = tmp_path / "a.sqlite"
    summary = _ingest(db, str(night), "--jobs", "1", capsys=capsys)
    assert summary["files_found"] == 6
    assert summary["files_stored"] == 5
    assert [f["file"] for f in summary["failures"]] == [str(night / "broken.fits")]
    assert summary["detections_per_line"].get("H109a") == 5
    # The night label: earliest observation 2031-05-06T20:10 UTC, shifted back 12 h.
    assert summary["night"] == "2031-05-06"
    con = sqlite3.connect(db)
    paths = {p for (p,) in con.execute("select path from files")}
    assert str(night / "broken.fits") not in paths and len(paths) == 5
    nights = {n for (n,) in con.execute("select distinct night from detections")}
    assert nights == {"2031-05-06"}


def test_reingest_changes_nothing(
    night: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    db = tmp_path / "a.sqlite"
    _ingest(db, str(night), "--jobs", "1", capsys=capsys)
    before = _table_digests(db)
    again = _ingest(db, str(night), "--jobs", "1", capsys=capsys)
    assert again["files_stored"] == 0 and again["files_skipped"] == 5
    after = _table_digests(db)
    before.pop("failures"), after.pop("failures")  # the broken file is reported again
    assert before == after


def test_parallel_ingest_stores_what_a_serial_one_does(
    night: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    serial = _ingest(tmp_path / "s.sqlite", str(night), "--jobs", "1", capsys=capsys)
    parallel = _ingest(tmp_path / "p.sqlite", str(night), "--jobs", "2", capsys=capsys)
    for key in ("files_stored", "spectra", "detections", "detections_per_line", "night"):
        assert serial[key] == parallel[key]
    q = "select source, line, v_lsr_kms, peak from detections order by source"
    rows_s = sqlite3.connect(tmp_path / "s.sqlite").execute(q).fetchall()
    rows_p = sqlite3.connect(tmp_path / "p.sqlite").execute(q).fetchall()
    assert rows_s == rows_p


def test_night_flag_overrides_the_label(
    night: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    summary = _ingest(
        tmp_path / "a.sqlite", str(night), "--night", "run-7", "--jobs", "1", capsys=capsys
    )
    assert summary["night"] == "run-7"


def test_inputs_are_never_modified(
    night: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    def digests() -> dict[str, str]:
        return {
            str(p): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in night.rglob("*")
            if p.is_file()
        }

    before = digests()
    _ingest(tmp_path / "a.sqlite", str(night), "--jobs", "1", capsys=capsys)
    assert digests() == before


def test_measure_json_reports_identified_lines(
    night: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    assert main(["measure", str(night / "scan1.fits"), "--format", "json"]) == 0
    (record,) = json.loads(capsys.readouterr().out)
    assert record["source"] == "Ember-1" and record["channels"] == 1024
    (line,) = record["lines"]
    assert line["line"] == "H109a"
    # injected at +30 km/s LSRK with FWHM 25 km/s: recovered within a tenth of the width
    assert abs(line["v_lsr_kms"] - 30.0) < 2.5
    assert line["v_lsr_err_kms"] > 0


def test_measure_of_a_broken_file_is_one_line_and_exit_1(night: Path) -> None:
    out = subprocess.run(
        [sys.executable, "-m", "speccat", "measure", str(night / "broken.fits")],
        capture_output=True,
        text=True,
    )
    assert out.returncode == 1
    assert "Traceback" not in out.stderr
    assert len(out.stderr.strip().splitlines()) == 1 and "broken.fits" in out.stderr


def test_missing_path_is_reported_not_fatal(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    summary = _ingest(tmp_path / "a.sqlite", str(tmp_path / "nowhere"), capsys=capsys)
    assert summary["failures"][0]["reason"] == "no such file or folder"


def test_every_subcommand_has_help() -> None:
    from speccat.cli import build_parser

    sub = next(a for a in build_parser()._actions if a.dest == "command")
    names = sorted(sub.choices)  # type: ignore[arg-type]
    for expected in (
        "ingest",
        "measure",
        "query",
        "export",
        "report",
        "catalogue",
        "calc",
        "browse",
        "demo",
    ):
        assert expected in names
    for name in names:
        out = subprocess.run(
            [sys.executable, "-m", "speccat", name, "--help"], capture_output=True, text=True
        )
        assert out.returncode == 0 and "usage: speccat" in out.stdout, name
