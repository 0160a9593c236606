"""Robustness, hostile filter values (issue 11) in the CLI and in the browser's filter form.

SQL metacharacters, 100,000-character strings, non-ASCII text (Ω, emoji, right-to-left) and
impossible ranges go into every filter. Each gives either a one-line message with exit 1 or
a result (empty for a glob that simply matches nothing); never a traceback, and the archive's
tables are byte-for-byte unchanged afterwards. The CLI is driven in-process through
``speccat.cli.main`` for the whole grid (hundreds of runs) and as a real subprocess for a few.
"""

from __future__ import annotations

import asyncio
import json
import subprocess
import sys
import time
from pathlib import Path
from typing import Any

import pytest
from robust_archive import table_digests
from tui_archive import build_archive

HUGE = "x" * 100_000
HOSTILE = (
    "'; DROP TABLE detections; --",
    "\"; DELETE FROM files WHERE '1'='1",
    "' OR '1'='1",
    "%",
    "_",
    "\\",
    "%%'%_\\",
    "Lantern-7' --",
    "Ω",
    "☄️🔭",
    "\u202eLantern-7\u202c",  # right-to-left override
    "שלום",
    "\x00",
    " ",
    "",
    HUGE,
)
#: the browser types all of HOSTILE into two fields and these into the others (time)
SHORT_LIST = ("'; DROP TABLE detections; --", "%", "_", "\\", "Ω", "\u202eLantern-7", HUGE)
GLOB_FLAGS = ("--source", "--species", "--night")
ALL_FLAGS = (*GLOB_FLAGS, "--line", "--vel", "--freq", "--snr", "--kind", "--since", "--until")
#: values that are malformed for the flag: exit 1 with a message, never a result
BAD_RANGES = (
    ("--vel", "10:-5"),
    ("--vel", "abc"),
    ("--vel", "1:2:3"),
    ("--vel", "nan:5"),
    ("--freq", "abc"),
    ("--freq", "5GHz:1GHz"),
    ("--freq", "1.4 parsec:"),
    ("--snr", "nan"),
    ("--snr", "abc"),
    ("--since", "2026-13-45"),
    ("--until", "2026-02-30"),
    ("--since", "yesterday"),
    ("--kind", "sideways"),
)


@pytest.fixture(scope="module")
def archive_path(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return build_archive(tmp_path_factory.mktemp("filters") / "night.sqlite", n_files=12)


def run_main(argv: list[str], capsys: pytest.CaptureFixture[str]) -> tuple[int, str, str]:
    from speccat.cli import main

    try:
        rc = main(argv)
    except SystemExit as exc:  # argparse usage errors
        rc = int(exc.code or 0)
    out, err = capsys.readouterr()
    return rc, out, err


def assert_clean_outcome(rc: int, out: str, err: str, what: str) -> list[dict[str, Any]] | None:
    """Exit 0 with a JSON list, or exit 1 (2 for argparse usage) with a short message."""
    assert "Traceback" not in err, what
    if rc == 0:
        rows = json.loads(out)
        assert isinstance(rows, list), what
        return rows
    assert rc in (1, 2), f"{what}: exit {rc}"
    lines = [ln for ln in err.splitlines() if ln.strip()]
    assert lines, f"{what}: no message"
    message = lines[-1]
    assert message.startswith(("speccat: error:", "usage:")) or "error:" in message, what
    if rc == 1:
        assert len(lines) == 1, f"{what}: {len(lines)} lines"
    assert len(message) < 600, f"{what}: the message repeats the whole value"
    return None


def test_every_hostile_value_in_every_filter(
    archive_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    before = table_digests(archive_path)
    base = ["--archive", str(archive_path), "query", "--format", "json", "--limit", "1000"]
    outcomes = {"rows": 0, "empty": 0, "message": 0}
    for flag in ALL_FLAGS:
        for value in HOSTILE:
            if value == "\x00":
                continue  # cannot be a command-line argument; the TUI and API test it
            rc, out, err = run_main([*base, f"{flag}={value}"], capsys)
            rows = assert_clean_outcome(rc, out, err, f"{flag} {value[:30]!r}")
            if rows is None:
                outcomes["message"] += 1
            elif rows:
                outcomes["rows"] += 1
                assert flag not in GLOB_FLAGS or value in (" ", ""), f"{flag} {value[:30]!r}"
            else:
                outcomes["empty"] += 1
    assert table_digests(archive_path) == before
    assert outcomes["empty"] > 0 and outcomes["message"] > 0


@pytest.mark.parametrize(("flag", "value"), BAD_RANGES)
def test_bad_ranges_and_dates_are_refused(
    archive_path: Path, capsys: pytest.CaptureFixture[str], flag: str, value: str
) -> None:
    base = ["--archive", str(archive_path), "query", "--format", "json"]
    rc, out, err = run_main([*base, f"{flag}={value}"], capsys)
    assert rc == 1, err
    assert out == ""
    assert err.count("\n") == 1 and err.startswith("speccat: error:")
    assert "Traceback" not in err


def test_sql_wildcards_are_literal_in_globs(
    archive_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    """'%' and '_' are SQL LIKE wildcards; in a glob they must match only themselves."""
    base = ["--archive", str(archive_path), "query", "--format", "json", "--limit", "1000"]

    def rows(*flags: str) -> list[dict[str, Any]]:
        rc, out, err = run_main([*base, *flags], capsys)
        assert rc == 0, err
        return list(json.loads(out))

    every = rows()
    assert every
    source = every[0]["source"]  # e.g. "Lantern-7"
    assert rows(f"--source={source}")
    assert rows(f"--source={source[:-1]}?")  # the glob's own one-character wildcard works
    assert rows(f"--source={source[:-1]}_") == []
    assert rows(f"--source={source[:3]}*")
    assert rows(f"--source={source[:3]}%") == []
    assert rows("--source=%") == []
    assert rows("--source=\\") == []


def test_the_api_refuses_a_nul_and_survives_every_value(archive_path: Path) -> None:
    from speccat.archive import Archive, Filters
    from speccat.errors import SpeccatError

    before = table_digests(archive_path)
    keys = ("source", "species", "line", "vel", "freq", "snr", "night", "kind", "since", "until")
    with Archive.open(str(archive_path), readonly=True) as archive:
        for key in keys:
            for value in HOSTILE:
                try:
                    f = Filters.parse({key: value})
                except SpeccatError as exc:
                    assert "\n" not in str(exc)
                    continue
                archive.count(f)
                archive.page(f, limit=5)
    assert table_digests(archive_path) == before


@pytest.mark.slow
def test_real_cli_processes_give_one_line_and_exit_1(archive_path: Path) -> None:
    before = table_digests(archive_path)
    base = [sys.executable, "-m", "speccat", "--archive", str(archive_path), "query"]
    for flags, want in (
        (["--vel", "10:-5"], 1),
        (["--freq", "abc", "--format", "json"], 1),
        (["--source", "'; DROP TABLE detections; --", "--format", "json"], 0),
        (["--species", HUGE, "--format", "csv"], None),
    ):
        proc = subprocess.run([*base, *flags], capture_output=True, text=True, timeout=120)
        assert "Traceback" not in proc.stderr
        if want is not None:
            assert proc.returncode == want, proc.stderr
        else:
            assert proc.returncode in (0, 1)
        if proc.returncode == 1:
            assert proc.stderr.count("\n") == 1
            assert len(proc.stderr) < 600
    assert table_digests(archive_path) == before


# --------------------------------------------------------------------------- the browser


async def _until(pilot: Any, cond: Any, timeout: float = 20.0) -> None:
    end = time.monotonic() + timeout
    while not cond():
        if time.monotonic() > end:
            raise AssertionError("the app did not reach the expected state in time")
        await pilot.pause(0.05)


@pytest.mark.slow
def test_browser_filter_form_survives_hostile_values(archive_path: Path) -> None:
    from textual.widgets import Input, Label

    from speccat.archive import Archive
    from speccat.tui.app import make_app

    before = table_digests(archive_path)
    keys = ("source", "species", "line", "vel", "freq", "snr", "night")
    bad = {"vel": "10:-5", "freq": "abc", "snr": "nan"}

    async def body() -> list[str]:
        seen: list[str] = []
        with Archive.open(str(archive_path), readonly=True) as archive:
            app = make_app(archive)
            async with app.run_test(size=(110, 32)) as pilot:
                await pilot.pause(0.5)
                message = app.screen.query_one("#filter-message", Label)
                for key in keys:
                    field = app.screen.query_one(f"#filter-{key}", Input)
                    field.focus()
                    await pilot.pause()
                    await pilot.press(*"';--%_")  # typed key by key
                    await pilot.press("enter")
                    await pilot.pause(0.1)
                    for value in HOSTILE if key in ("source", "vel") else SHORT_LIST:
                        field.value = value
                        await pilot.press("enter")
                        assert app.is_running
                    if key in bad:
                        field.value = bad[key]
                        await pilot.press("enter")
                        await _until(pilot, lambda: message.has_class("-error"))
                        seen.append(str(message.render()))
                    field.value = ""
                    await pilot.press("enter")
                    await _until(pilot, lambda: not message.has_class("-error"))
                assert app.is_running
        return seen

    messages = asyncio.run(body())
    assert len(messages) == 3
    assert all("\n" not in m and m.strip() for m in messages)
    assert table_digests(archive_path) == before
