"""``speccat query`` table format: fitted to the terminal, one line per detection, rounded
numbers (csv/json keep full precision; see test_cli_query.py)."""

from __future__ import annotations

import json

import pytest
from archive_fixtures import fill_archive

from speccat.archive import Archive, Filters
from speccat.cli import main


@pytest.fixture(scope="module")
def archive(tmp_path_factory: pytest.TempPathFactory) -> str:
    url = str(tmp_path_factory.mktemp("qt") / "qt.sqlite")
    fill_archive(url, range(4))[0].close()
    return url


@pytest.mark.parametrize("width", [60, 80, 160])
def test_table_fits_the_terminal_one_line_per_row(
    archive: str, width: int, monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]
) -> None:
    monkeypatch.setenv("COLUMNS", str(width))
    assert main(["--archive", archive, "query", "--limit", "6"]) == 0
    out = capsys.readouterr().out.splitlines()
    with Archive.open(archive, readonly=True) as arch:
        top = arch.page(Filters(), limit=6)
    assert all(len(line) <= width for line in out)
    assert len(out) == 2 + len(top)  # header, rule, one line per detection (nothing wrapped)
    for line, rec in zip(out[2:], top, strict=True):
        cells = line.split()
        assert cells[0] == str(rec["detection_id"])
        assert f"{rec['snr']:.1f}" in cells
        if rec["v_lsr_kms"] is not None:
            assert f"{rec['v_lsr_kms']:.2f}" in cells
    header = out[0].split()
    assert ("night" in header) == (width >= 110)
    assert ("kind" in header) == (width >= 72)


def test_json_keeps_full_precision(archive: str, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["--archive", archive, "query", "--limit", "3", "--format", "json"]) == 0
    data = json.loads(capsys.readouterr().out)
    with Archive.open(archive, readonly=True) as arch:
        top = arch.page(Filters(), limit=3)
    assert [d["snr"] for d in data] == [r["snr"] for r in top]
