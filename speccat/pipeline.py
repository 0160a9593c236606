"""Ingest a night: discover files -> read, reduce and identify in worker processes -> one writer.

Workers only parse and compute; they never touch the archive (a pooled connection must not cross
a fork). The single writer in the calling process stores each file in its own transaction, so a
file is all in or all out, and a killed ingest can simply be run again.
"""

from __future__ import annotations

import getpass
import os
import platform
import signal
import stat
import threading
import time
from collections import Counter, deque
from collections.abc import Callable, Generator, Iterable, Iterator
from concurrent.futures import FIRST_COMPLETED, Future, ProcessPoolExecutor, wait
from contextlib import suppress
from dataclasses import dataclass, field
from datetime import datetime, timedelta
from pathlib import Path
from typing import TYPE_CHECKING, Any

from speccat import __version__
from speccat.config import Settings
from speccat.errors import SpeccatError
from speccat.workers import (
    file_digest,
    init_worker,
    prepare_files,
    shared_catalogue,
    to_shared,
    worker_context,
    worker_log_tail,
)

if TYPE_CHECKING:
    from speccat.archive import Archive
    from speccat.archive.rows import PreparedFile


# --------------------------------------------------------------------------- discovery


def _has_suffix(name: str) -> bool:
    from speccat.io import SUFFIXES

    low = name.lower()
    return any(low.endswith(s) for s in SUFFIXES)


def discover(paths: Iterable[str | Path]) -> tuple[list[str], list[tuple[str, str]]]:
    """Every spectrum file under ``paths`` (sorted, unique) and the paths that cannot be used.

    Folders are walked recursively without following symbolic links to folders (so a link loop
    cannot trap the walk); a named file is taken whatever its suffix.
    """
    found: dict[str, None] = {}
    problems: list[tuple[str, str]] = []
    for raw in paths:
        p = Path(raw)
        if p.is_dir():
            for root, dirs, files in os.walk(p, followlinks=False):
                dirs.sort()
                for name in sorted(files):
                    if _has_suffix(name):
                        _take(str(Path(root) / name), found, problems)
                for name in dirs:
                    if _has_suffix(name):
                        problems.append((str(Path(root) / name), "is a folder, not a file"))
        elif p.exists() or p.is_symlink():
            _take(str(p), found, problems)
        else:
            problems.append((str(p), "no such file or folder"))
    return list(found), problems


def _take(path: str, found: dict[str, None], problems: list[tuple[str, str]]) -> None:
    """Keep ``path`` if it leads to a regular file; a pipe or a device would block the reader."""
    try:
        mode = os.stat(path).st_mode
    except OSError as exc:
        link = os.path.islink(path)
        problems.append((path, "broken or looping symbolic link" if link else str(exc.strerror)))
        return
    if stat.S_ISREG(mode):
        found[path] = None
    elif stat.S_ISDIR(mode):
        problems.append((path, "is a folder, not a file"))
    else:
        problems.append((path, "not a regular file (a pipe, socket or device)"))


# --------------------------------------------------------------------------- the night


def night_label(obs_time: datetime) -> str:
    """The night an observation belongs to: its UTC date shifted back 12 hours (DESIGN.md)."""
    return (obs_time - timedelta(hours=12)).date().isoformat()


@dataclass
class IngestSummary:
    """What one ingest did; ``as_dict`` is the ``--json`` output."""

    run_id: int
    night: str
    files_found: int = 0
    files_stored: int = 0
    files_skipped: int = 0
    spectra: int = 0
    detections: int = 0
    identified: int = 0
    per_line: Counter[str] = field(default_factory=Counter)
    sources: set[str] = field(default_factory=set)
    failures: list[tuple[str, str]] = field(default_factory=list)
    seconds: float = 0.0

    def as_dict(self) -> dict[str, Any]:
        return {
            "run_id": self.run_id,
            "night": self.night,
            "files_found": self.files_found,
            "files_stored": self.files_stored,
            "files_skipped": self.files_skipped,
            "files_failed": len(self.failures),
            "spectra": self.spectra,
            "detections": self.detections,
            "identified": self.identified,
            "detections_per_line": dict(sorted(self.per_line.items())),
            "failures": [{"file": p, "reason": r} for p, r in self.failures],
            "seconds": round(self.seconds, 3),
        }


ProgressFn = Callable[[int, int, str], None]


def _results(
    paths: list[str], settings: Settings, known: dict[str, float], jobs: int
) -> Iterator[PreparedFile]:
    """Prepared files in completion order; at most a few files per worker in flight (flat
    memory). Files go to the workers in small chunks (fewer round trips through the pool).

    A worker that dies (killed by the kernel for memory, a crash in C code) breaks the pool:
    the files it left unfinished are then read again one at a time in a fresh worker, so the
    one that kills a worker is reported as a failure and every other file still goes in.
    """
    if jobs <= 1 or len(paths) <= 1:
        init_worker(settings, known)
        for p in paths:
            yield from prepare_files([p])
        return
    chunk = max(1, min(8, len(paths) // (8 * jobs)))
    todo = deque(paths)
    stalls = 0
    while todo:
        before = len(todo)
        orphans = deque(
            (yield from _pool_pass(todo, settings, known, jobs, 4 * jobs * chunk, chunk))
        )
        if not orphans and len(todo) == before:  # the pool broke before taking any file
            stalls += 1
            if stalls == 3:
                said = worker_log_tail()
                raise SpeccatError(
                    "worker processes cannot be started"
                    + (f" (a worker said: {said[:200]})" if said else " (out of memory?)")
                )
            continue
        stalls = 0
        while orphans:  # one in flight at a time: a second death names its file
            for path in (yield from _pool_pass(orphans, settings, known, 1, 1, 1)):
                yield _worker_died(path)


def _pool_pass(
    todo: deque[str],
    settings: Settings,
    known: dict[str, float],
    jobs: int,
    window: int,
    chunk: int,
) -> Generator[PreparedFile, None, list[str]]:
    """Run files from ``todo`` in a process pool, ``chunk`` files per task and at most
    ``window`` files in flight, until it is empty or the pool breaks; returns the files that
    were in flight when a worker died."""
    from concurrent.futures.process import BrokenProcessPool

    ctx = worker_context()
    pids = ctx.SimpleQueue()
    in_flight: dict[Future[list[PreparedFile]], list[str]] = {}
    n_flight = 0
    initargs = (settings, to_shared(known, ctx), pids, shared_catalogue(settings, ctx))
    pool = ProcessPoolExecutor(jobs, mp_context=ctx, initializer=init_worker, initargs=initargs)
    broken = False
    try:
        while todo or in_flight:
            while todo and n_flight < window:
                task = [todo.popleft() for _ in range(min(chunk, len(todo)))]
                try:
                    fut = pool.submit(prepare_files, task)
                except (BrokenProcessPool, OSError) as exc:
                    # OSError: a worker being started died before it read its start-up data
                    todo.extendleft(reversed(task))  # not sent: still to do
                    raise BrokenProcessPool(str(exc)) from exc
                in_flight[fut] = task
                n_flight += len(task)
            done, _ = wait(in_flight, return_when=FIRST_COMPLETED)
            for fut in done:
                results = fut.result()
                n_flight -= len(in_flight.pop(fut))
                yield from results
    except BrokenProcessPool:
        broken = True
        return [p for task in in_flight.values() for p in task]
    finally:
        if broken:
            _close_broken(pool, pids)
        else:
            pool.shutdown(wait=True)
    return []


#: How long a broken pool may take to close before the ingest goes on without waiting.
BROKEN_POOL_CLOSE_S = 120.0


def _close_broken(pool: ProcessPoolExecutor, pids: Any) -> None:
    """Close a pool that a dying worker broke, without hanging.

    Python 3.11's pool can start a worker while it is being declared broken, never stop that
    worker, and then wait for it to exit (seen under load in the killed-worker test). So the
    wait runs in a helper thread while every worker that reports its process id to ``pids``
    (each does, once started) is killed here; the pool is broken, so none of them has work
    that counts.
    """
    closed = threading.Event()

    def close() -> None:
        pool.shutdown(wait=True, cancel_futures=True)
        closed.set()

    threading.Thread(target=close, name="speccat-close-pool", daemon=True).start()
    deadline = time.monotonic() + BROKEN_POOL_CLOSE_S
    while not closed.wait(0.05) and time.monotonic() < deadline:
        while not pids.empty():
            with suppress(ProcessLookupError, PermissionError):
                os.kill(pids.get(), signal.SIGKILL)


def _worker_died(path: str) -> PreparedFile:
    from speccat.archive.rows import PreparedFile

    try:
        size, sha = file_digest(path)
    except OSError:
        size, sha = 0, ""
    return PreparedFile(path, size, sha, error="the worker reading it died (out of memory?)")


def ingest(
    paths: Iterable[str | Path],
    archive: Archive,
    settings: Settings,
    *,
    night: str | None = None,
    jobs: int | None = None,
    progress: ProgressFn | None = None,
) -> IngestSummary:
    """Ingest every spectrum file under ``paths`` into ``archive``; returns the summary.

    Files whose SHA-256 is already archived are skipped unread. Unreadable files are recorded
    with their reason and never stop the run. Without ``night``, the run's label is derived from
    the earliest observation of the batch (``night_label``) and applied to every file it stored.
    """
    t0 = time.perf_counter()
    files, problems = discover(paths)
    n_jobs = jobs or settings.jobs or os.cpu_count() or 1
    run_id = archive.begin_run(_run_params(settings, paths, night, n_jobs))
    summary = IngestSummary(run_id=run_id, night=night or "", files_found=len(files))
    for path, reason in problems:
        archive.store_failure(run_id, path, reason, night=night)
        summary.failures.append((path, reason))
    todo = _unarchived(files, archive, run_id, night, summary)
    if progress:
        progress(0, len(todo), "")
    earliest: datetime | None = None
    provisional = night or "unlabelled"
    for done, result in enumerate(_results(todo, settings, archive.source_velocities(), n_jobs), 1):
        if result.error is not None:
            archive.store_failure(run_id, result.path, result.error, night=night)
            summary.failures.append((result.path, result.error))
        else:
            t = result.earliest_obs
            if t is not None and (earliest is None or t < earliest):
                earliest = t
            label = night or (night_label(t) if t is not None else provisional)
            if archive.store_prepared(run_id, result, label):
                _count(summary, result)
            else:
                summary.files_skipped += 1
        if progress:
            progress(done, len(todo), result.path)
    if night is None:
        summary.night = night_label(earliest) if earliest is not None else provisional
        if summary.files_stored or summary.failures:
            archive.relabel_run(run_id, summary.night)
    if summary.sources:
        archive.update_sources(sorted(summary.sources))
    summary.seconds = time.perf_counter() - t0
    archive.finish_run(run_id, summary.as_dict())
    return summary


def _unarchived(
    files: list[str], archive: Archive, run_id: int, night: str | None, summary: IngestSummary
) -> list[str]:
    """The files whose SHA-256 is not archived yet (the others count as skipped; an unreadable
    one is recorded as a failure). One query per few hundred files."""
    digests: dict[str, str] = {}
    for path in files:
        try:
            _, digests[path] = file_digest(path)
        except OSError as exc:
            reason = f"cannot read file ({exc.strerror or exc})"
            archive.store_failure(run_id, path, reason, night=night)
            summary.failures.append((path, reason))
    known = archive.known_sha256(digests.values())
    todo = [p for p, sha in digests.items() if sha not in known]
    summary.files_skipped += len(digests) - len(todo)
    return todo


def _count(summary: IngestSummary, result: PreparedFile) -> None:
    from speccat.archive.rows import LINE_AT

    summary.files_stored += 1
    for s in result.spectra:
        summary.spectra += 1
        summary.sources.add(s.source)
        for d in s.detections:
            summary.detections += 1
            line = d.row[LINE_AT]
            if line is not None:
                summary.identified += 1
                summary.per_line[str(line)] += 1
            else:
                summary.per_line["(unidentified)"] += 1


def _run_params(
    settings: Settings, paths: Iterable[str | Path], night: str | None, jobs: int
) -> dict[str, Any]:
    return {
        "paths": [str(p) for p in paths],
        "night": night,
        "jobs": jobs,
        "detect_sigma": settings.detect_sigma,
        "id_threshold": settings.id_threshold,
        "vel_window_kms": settings.vel_window_kms,
        "catalogue": settings.catalogue,
        "user": _user(),
        "host": platform.node(),
        "speccat_version": __version__,
    }


def _user() -> str:
    try:
        return getpass.getuser()
    except (KeyError, OSError):
        return "unknown"
