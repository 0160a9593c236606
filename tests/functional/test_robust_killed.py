"""Robustness, killed ingests (issue 11): SIGKILL at random moments, then check and re-run.

After every kill the SQLite archive must pass ``PRAGMA integrity_check``, every stored file must
hold exactly what a clean ingest stores for it (spectra, detections, candidates: never half a
file), and a final run must complete with no duplicates and the same content as a clean ingest.

Most trials kill a forked child that runs ``speccat.pipeline.ingest`` (the parent has imported
everything, so the child writes at once and a random moment really falls among the writes);
one more kills the real ``speccat ingest --jobs 2`` with its worker processes, once the first
file is in.
"""

from __future__ import annotations

import json
import multiprocessing as mp
import os
import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
from hostile_inputs import bases
from robust_archive import Signature, integrity, signatures

SEED = 20261202
FORK_TRIALS = 10
CLI_TRIALS = 1


def _run_ingest(folder: str, archive: str) -> None:
    from speccat.archive import Archive
    from speccat.config import Settings
    from speccat.pipeline import ingest

    with Archive.open(archive, create=True) as arch:
        ingest([folder], arch, Settings(), night="kill-test", jobs=1)
    os._exit(0)


def _warm_up() -> None:
    """Import and build everything the ingest needs, so that a forked child writes at once."""
    from speccat.archive import Archive  # noqa: F401
    from speccat.catalogue import builtin
    from speccat.identify import identify  # noqa: F401
    from speccat.io import read  # noqa: F401
    from speccat.reduce import measure  # noqa: F401

    builtin()


def _fork_ingest(folder: Path, archive: Path) -> mp.process.BaseProcess:
    ctx = mp.get_context("fork")
    proc = ctx.Process(target=_run_ingest, args=(str(folder), str(archive)))
    proc.start()
    return proc


@pytest.fixture(scope="module")
def night(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, dict[str, Signature], float]:
    """A folder of 16 valid files, the signatures of a clean ingest, and its duration (s)."""
    root = tmp_path_factory.mktemp("killed")
    folder = root / "night"
    folder.mkdir()
    for seed in range(300, 304):
        for name, content in bases(seed).items():
            (folder / f"s{seed}_{name}").write_bytes(content)
    _warm_up()
    clean = root / "clean.sqlite"
    t0 = time.perf_counter()
    proc = _fork_ingest(folder, clean)
    proc.join(300)
    duration = time.perf_counter() - t0
    assert proc.exitcode == 0
    reference = signatures(clean)
    assert len(reference) == 16
    assert all(n_spec > 0 for n_spec, *_ in reference.values())
    return folder, reference, duration


def _check_after_kill(archive: Path, reference: dict[str, Signature]) -> int:
    if not archive.exists():
        return 0
    assert integrity(archive) == "ok"
    found = signatures(archive)
    half = {sha: sig for sha, sig in found.items() if reference.get(sha) != sig}
    assert half == {}, "a file is stored differently from a clean ingest (half stored?)"
    return len(found)


@pytest.mark.slow
def test_sigkill_at_random_moments_never_half_stores_a_file(
    tmp_path: Path, night: tuple[Path, dict[str, Signature], float]
) -> None:
    folder, reference, duration = night
    rng = np.random.default_rng(SEED)
    archive = tmp_path / "killed.sqlite"
    stored = 0
    killed = 0
    for _ in range(FORK_TRIALS):
        if stored == len(reference):  # nothing left to interrupt: start a new archive
            for p in tmp_path.glob("killed.sqlite*"):
                p.unlink()
            stored = 0
        remaining = duration * (len(reference) - stored) / len(reference)
        proc = _fork_ingest(folder, archive)
        proc.join(float(rng.uniform(0.0, remaining)))
        if proc.is_alive():
            os.kill(proc.pid, signal.SIGKILL)  # type: ignore[arg-type]
            killed += 1
        proc.join(60)
        stored = _check_after_kill(archive, reference)
    assert killed >= FORK_TRIALS // 2, "most trials must really be killed mid-run"
    proc = _fork_ingest(folder, archive)
    proc.join(300)
    assert proc.exitcode == 0
    assert integrity(archive) == "ok"
    assert signatures(archive) == reference  # no duplicates, nothing missing, same content
    with sqlite3.connect(archive) as db:
        assert db.execute("SELECT count(*) FROM files").fetchone()[0] == len(reference)


@pytest.mark.slow
def test_sigkill_of_the_real_cli_with_workers(
    tmp_path: Path, night: tuple[Path, dict[str, Signature], float]
) -> None:
    folder, reference, _ = night
    rng = np.random.default_rng(SEED + 1)
    archive = tmp_path / "cli.sqlite"
    cmd = [sys.executable, "-m", "speccat", "--archive", str(archive), "ingest", str(folder)]
    for _ in range(CLI_TRIALS):
        before = _check_after_kill(archive, reference)
        proc = subprocess.Popen(
            [*cmd, "--jobs", "2", "--json"],
            stdout=subprocess.DEVNULL,
            stderr=subprocess.DEVNULL,
            start_new_session=True,  # its own process group: the kill takes the workers too
        )
        deadline = time.monotonic() + 240
        while proc.poll() is None and time.monotonic() < deadline:
            if archive.exists() and _count_files(archive) > before:
                break
            time.sleep(0.05)
        time.sleep(float(rng.uniform(0.0, 0.5)))
        if proc.poll() is None:
            os.killpg(proc.pid, signal.SIGKILL)
        proc.wait(60)
        _check_after_kill(archive, reference)
    done = subprocess.run([*cmd, "--jobs", "2"], capture_output=True, text=True, timeout=300)
    assert done.returncode == 0, done.stderr[-1500:]
    assert integrity(archive) == "ok"
    got = signatures(archive)
    assert set(got) == set(reference)
    # counts must match exactly; values too, except what depends on the night label
    assert {k: v[:3] for k, v in got.items()} == {k: v[:3] for k, v in reference.items()}


def _count_files(archive: Path) -> int:
    try:
        db = sqlite3.connect(f"file:{archive}?mode=ro", uri=True, timeout=5)
        try:
            return int(db.execute("SELECT count(*) FROM files").fetchone()[0])
        finally:
            db.close()
    except sqlite3.Error:
        return 0


def _children(pid: int) -> list[int]:
    try:
        text = Path(f"/proc/{pid}/task/{pid}/children").read_text()
    except OSError:
        return []
    return [int(x) for x in text.split()]


def _pool_workers(pid: int) -> list[int]:
    """The ingest's worker processes: children of its forkserver process."""
    out = []
    for child in _children(pid):
        try:
            cmdline = Path(f"/proc/{child}/cmdline").read_bytes()
        except OSError:
            continue
        if b"forkserver" in cmdline:
            out += _children(child)
    return out


@pytest.mark.slow
def test_a_worker_killed_mid_ingest_loses_no_file(
    tmp_path: Path, night: tuple[Path, dict[str, Signature], float]
) -> None:
    """The kernel's OOM killer (here: SIGKILL) takes one worker: the ingest finishes anyway,
    exit 0, no traceback, every file stored once, as a clean ingest stores it."""
    folder, reference, _ = night
    archive = tmp_path / "worker.sqlite"
    cmd = [sys.executable, "-m", "speccat", "--archive", str(archive), "ingest", str(folder)]
    proc = subprocess.Popen(
        [*cmd, "--jobs", "2", "--json", "--night", "kill-test"],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
        start_new_session=True,
    )
    victim = None
    deadline = time.monotonic() + 240
    while proc.poll() is None and time.monotonic() < deadline and victim is None:
        workers = _pool_workers(proc.pid)
        if workers:
            victim = workers[0]
            os.kill(victim, signal.SIGKILL)
        time.sleep(0.02)
    stdout, stderr = proc.communicate(timeout=300)
    assert victim is not None, "the ingest ended before a worker could be killed"
    assert "Traceback" not in stderr, stderr[-2000:]
    assert proc.returncode == 0, stderr
    summary = json.loads(stdout)
    assert summary["failures"] == []
    assert summary["files_stored"] == len(reference)
    assert integrity(archive) == "ok"
    assert signatures(archive) == reference
