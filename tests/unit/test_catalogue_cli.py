"""``speccat catalogue``: flags in, catalogue look-ups, table/json/csv out, clear errors."""

from __future__ import annotations

import csv
import io
import json
from pathlib import Path

import pytest

from speccat.catalogue import builtin
from speccat.cli import main
from speccat.model import C_KMS


def _run(capsys: pytest.CaptureFixture[str], *argv: str) -> tuple[int, str, str]:
    code = main(["catalogue", *argv])
    out, err = capsys.readouterr()
    return code, out, err


def test_json_window_around_a_frequency(capsys: pytest.CaptureFixture[str]) -> None:
    code, out, _ = _run(capsys, "--near", "5008.9MHz", "--window", "3MHz", "--format", "json")
    assert code == 0
    data = json.loads(out)
    assert list(data[0]) == ["name", "species", "transition", "rest_freq_mhz", "reference"]
    names = [d["name"] for d in data]
    assert names[0] == "H109a"  # nearest first
    assert {"H109a", "He109a", "C109a", "S109a"} <= set(names)
    for d in data:
        assert abs(d["rest_freq_mhz"] - 5008.9) <= 3.0
    expected = {
        line.name for line in builtin().between(5005.9e6, 5011.9e6)
    }  # the library's own answer
    assert set(names) == expected


def test_units_in_arguments_and_bare_numbers_are_mhz(capsys: pytest.CaptureFixture[str]) -> None:
    _, a, _ = _run(capsys, "--near", "1.4204GHz", "--window", "100kHz", "--format", "csv")
    _, b, _ = _run(capsys, "--near", "1420.4", "--window", "0.1", "--format", "csv")
    assert a == b
    rows = list(csv.DictReader(io.StringIO(a)))
    assert [r["name"] for r in rows] == ["HI"]
    assert float(rows[0]["rest_freq_mhz"]) == 1420.405751768


def test_default_window_is_the_velocity_window(capsys: pytest.CaptureFixture[str]) -> None:
    _, out, _ = _run(capsys, "--near", "1420.4MHz", "--format", "json")
    mhz = [d["rest_freq_mhz"] for d in json.loads(out)]
    half = 1420.4 * 400.0 / C_KMS  # Settings.vel_window_kms default, 400 km/s
    assert mhz and all(abs(f - 1420.4) <= half for f in mhz)
    assert 1420.405751768 in mhz


def test_species_and_name_globs(capsys: pytest.CaptureFixture[str]) -> None:
    _, out, _ = _run(capsys, "--species", "nh3", "--format", "json")
    names = [d["name"] for d in json.loads(out)]
    assert "NH3(1,1)s-2" in names and all(n.startswith("NH3") for n in names)
    _, out, _ = _run(capsys, "--name", "OH16*", "--format", "csv")
    assert [r["name"] for r in csv.DictReader(io.StringIO(out))] == ["OH1612", "OH1665", "OH1667"]


def test_table_output_and_limit(capsys: pytest.CaptureFixture[str]) -> None:
    code, out, err = _run(capsys, "--near", "23.6945GHz", "--window", "2MHz", "--limit", "2")
    assert code == 0
    assert "NH3(1,1)" in out and "23694.495500" in out
    assert "showing 2 of" in err
    code, out, _ = _run(capsys, "--name", "H1??a", "--format", "json", "--limit", "5")
    assert len(json.loads(out)) == 5


def test_user_catalogue_flag(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    extra = tmp_path / "mine.csv"
    extra.write_text("name,species,rest_freq_mhz\nZZ(1-0),ZZ,777.125\n", encoding="utf-8")
    _, out, _ = _run(capsys, "--catalogue", str(extra), "--species", "ZZ", "--format", "json")
    assert json.loads(out) == [
        {
            "name": "ZZ(1-0)",
            "species": "ZZ",
            "transition": "",
            "rest_freq_mhz": 777.125,
            "reference": f"user catalogue {extra}",
        }
    ]


def test_user_catalogue_from_settings(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    extra = tmp_path / "env.csv"
    extra.write_text("name,species,rest_freq_mhz\nQQ,QQ,999.5\n", encoding="utf-8")
    monkeypatch.setenv("SPECCAT_CATALOGUE", str(extra))
    _, out, _ = _run(capsys, "--name", "QQ", "--format", "json")
    assert [d["name"] for d in json.loads(out)] == ["QQ"]


@pytest.mark.parametrize(
    ("argv", "fragment"),
    [
        (["--near", "abc"], "--near"),
        (["--near", "5 km/s"], "--near"),
        (["--window", "3MHz"], "--window needs --near"),
        (["--near=-5MHz"], "must be positive"),
        (["--near", "5GHz", "--window=-1MHz"], "must not be negative"),
        (["--limit", "0"], "--limit"),
    ],
)
def test_bad_arguments_exit_1_with_one_line(
    capsys: pytest.CaptureFixture[str], argv: list[str], fragment: str
) -> None:
    code, out, err = _run(capsys, *argv)
    assert code == 1
    assert out == ""
    assert fragment in err and err.count("\n") == 1


def test_malformed_user_file_exits_1(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    extra = tmp_path / "bad.csv"
    extra.write_text("name,species,rest_freq_mhz\nA,B,fast\n", encoding="utf-8")
    code, out, err = _run(capsys, "--catalogue", str(extra))
    assert code == 1 and out == ""
    assert f"{extra}: row 2: field 'rest_freq_mhz'" in err
