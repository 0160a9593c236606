"""The real ``speccat browse`` in a real terminal (tmux): type a filter, read the screen."""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
import time
from pathlib import Path

import pytest
from tui_archive import build_archive

from speccat.archive import Archive, Filters

pytestmark = [
    pytest.mark.skipif(shutil.which("tmux") is None, reason="tmux is not installed"),
    pytest.mark.slow,
]


def _capture(socket: str, session: str) -> str:
    out = subprocess.run(
        ["tmux", "-L", socket, "capture-pane", "-p", "-t", session],
        capture_output=True,
        text=True,
        check=True,
    )
    return out.stdout


def _wait_for(socket: str, session: str, text: str, timeout: float = 60.0) -> str:
    end = time.monotonic() + timeout
    screen = ""
    while time.monotonic() < end:
        screen = _capture(socket, session)
        if text in screen:
            return screen
        time.sleep(0.2)
    raise AssertionError(f"{text!r} never appeared; the screen was:\n{screen}")


def test_browse_in_tmux_filters_by_source(tmp_path: Path) -> None:
    db = build_archive(tmp_path / "night.sqlite")
    with Archive.open(str(db), readonly=True) as archive:
        want = archive.count(Filters.parse({"source": "ember*"}))
        total = archive.count(Filters())
    socket, session = f"speccat-test-{os.getpid()}", "browse"
    env = {
        **os.environ,
        "TERM": "xterm-256color",
        "TEXTUAL_ANIMATIONS": "none",
        "SPECCAT_ARCHIVE": str(db),
    }
    cmd = f"{sys.executable} -m speccat browse"
    subprocess.run(
        ["tmux", "-L", socket, "new-session", "-d", "-s", session, "-x", "120", "-y", "36", cmd],
        check=True,
        env=env,
    )
    try:
        _wait_for(socket, session, f"{total} detections match")
        subprocess.run(["tmux", "-L", socket, "send-keys", "-t", session, "/"], check=True)
        _wait_for(socket, session, "filters apply as you type")
        subprocess.run(
            ["tmux", "-L", socket, "send-keys", "-t", session, "-l", "ember*"], check=True
        )
        _wait_for(socket, session, f"{want} detections match")
        # the count and the table are separate queries: wait for the table's page as well
        screen = _wait_for(socket, session, f"row 1 of {want} ")
        rows = [ln for ln in screen.splitlines() if ln.strip().split(" ")[0:1] and "-" in ln]
        sources = {ln.split()[0] for ln in rows if ln.split() and ln.split()[0][0].isupper()}
        assert "Ember-41" in sources
        assert not (sources & {"Wisp-3", "Halo-9", "Lantern-7", "Cinder-12"})
        assert f"row 1 of {want} " in screen
        subprocess.run(
            ["tmux", "-L", socket, "send-keys", "-t", session, "Escape", "q"], check=True
        )
    finally:
        subprocess.run(["tmux", "-L", socket, "kill-server"], capture_output=True)
