"""``speccat browse`` refuses clearly before any screen is drawn: no terminal, no archive."""

from __future__ import annotations

from pathlib import Path

import pytest

from speccat.cli import cmd_browse, main


def test_browse_needs_a_terminal(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    code = main(["--archive", str(tmp_path / "a.sqlite"), "browse"])  # pytest captures stdout
    err = capsys.readouterr().err
    assert code == 1
    assert "interactive terminal" in err
    assert err.count("\n") == 1  # one line, no traceback


def test_missing_archive_is_reported_before_the_app_starts(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setattr(cmd_browse, "interactive", lambda: True)
    missing = tmp_path / "nowhere.sqlite"
    code = main(["--archive", str(missing), "browse"])
    err = capsys.readouterr().err
    assert code == 2  # DESIGN.md: 2 = archive unreachable or corrupt
    assert "nowhere.sqlite" in err and err.count("\n") == 1
    assert not missing.exists()  # browsing never creates an archive


def test_corrupt_archive_is_reported(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setattr(cmd_browse, "interactive", lambda: True)
    bad = tmp_path / "bad.sqlite"
    bad.write_bytes(b"this is not a database at all" * 100)
    code = main(["--archive", str(bad), "browse"])
    err = capsys.readouterr().err
    assert code == 2
    assert "bad.sqlite" in err and err.count("\n") == 1
    assert bad.read_bytes() == b"this is not a database at all" * 100  # input untouched
