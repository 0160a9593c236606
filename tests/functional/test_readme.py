"""The commands the README documents run as written (on the bundled sample night)."""

from __future__ import annotations

import os
import re
import shlex
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]
README = (ROOT / "README.md").read_text(encoding="utf-8")


def _usage_commands() -> list[str]:
    """``speccat ...`` lines of the bash blocks under "## Usage", comments stripped."""
    usage = README.split("## Usage", 1)[1].split("\n## ", 1)[0]
    blocks = re.findall(r"```bash\n(.*?)```", usage, flags=re.S)
    lines = [ln.split("  #", 1)[0].strip() for b in blocks for ln in b.splitlines()]
    return [ln for ln in lines if ln.startswith("speccat ")]


def _run(command: str, cwd: Path) -> subprocess.CompletedProcess[str]:
    argv = shlex.split(command)
    env = {**os.environ, "COLUMNS": "100"}
    return subprocess.run(
        [sys.executable, "-m", "speccat", *argv[1:]],
        cwd=cwd,
        capture_output=True,
        text=True,
        env=env,
        stdin=subprocess.DEVNULL,
    )


def test_the_readme_documents_commands() -> None:
    commands = _usage_commands()
    assert len(commands) >= 8
    assert commands[0].split()[3] == "ingest"  # the archive is filled first


@pytest.mark.slow
def test_every_documented_command_runs(tmp_path: Path) -> None:
    (tmp_path / "sample_archive").symlink_to(ROOT / "sample_archive")
    for command in _usage_commands():
        out = _run(command, tmp_path)
        if " browse" in command:
            # without a terminal the browser refuses politely (tmux test drives it for real)
            assert out.returncode == 1 and "terminal" in out.stderr, out.stderr
            continue
        assert out.returncode == 0, f"{command}\n{out.stderr}"
        assert "Traceback" not in out.stderr
    assert (tmp_path / "h109a.ecsv").is_file()


@pytest.mark.slow
def test_demo_without_a_terminal_prints_the_summary(tmp_path: Path) -> None:
    # the README's first set-up command ends with `speccat demo`
    assert 'pip install -e ".[test]" && speccat demo' in README
    out = _run("speccat demo", tmp_path)
    assert out.returncode == 0, out.stderr
    text = " ".join(out.stdout.split())  # rich wraps at the terminal width
    assert "31 files stored" in text and "2 unreadable" in text
