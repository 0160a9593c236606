"""What an ingest worker does: its set-up, and the reading, measuring and identifying of one file.

The workers run in a ``forkserver`` process pool (``speccat.pipeline``): the server imports
``WORKER_MODULES`` once and every worker is forked with them loaded; the parent's catalogue and
known source velocities reach them through shared memory. The same functions run in-process
for ``--jobs 1`` and ``speccat measure``. Nothing here touches the archive.
"""

from __future__ import annotations

import hashlib
import os
import signal
import sys
import threading
from collections.abc import Iterator, Mapping
from contextlib import contextmanager
from dataclasses import dataclass, replace
from typing import TYPE_CHECKING, Any

from speccat.config import Settings
from speccat.errors import SpeccatError
from speccat.model import Detection, FileResult, SpectrumResult, with_total_intensity

if TYPE_CHECKING:
    from speccat.archive.rows import PreparedFile
    from speccat.catalogue import Catalogue


def file_digest(path: str) -> tuple[int, str]:
    """Size in bytes and SHA-256 (hex) of a file, read in 1 MiB blocks."""
    h = hashlib.sha256()
    size = 0
    with open(path, "rb") as fh:
        while block := fh.read(1 << 20):
            h.update(block)
            size += len(block)
    return size, h.hexdigest()


@dataclass
class _WorkerState:
    settings: Settings
    known_velocities: dict[str, float]
    catalogue: Catalogue | None = None


_STATE: _WorkerState | None = None


def init_worker(
    settings: Settings,
    known_velocities: Any,
    pids: Any = None,
    catalogue: Any = None,
) -> None:
    """Worker set-up; ``pids`` (a queue) learns the worker's process id (see
    ``speccat.pipeline._close_broken``);
    ``known_velocities`` is a dict or the parent's in shared memory (``to_shared``);
    ``catalogue`` is the parent's in shared memory (``shared_catalogue``), or None to load it
    on first use."""
    global _STATE
    known = (
        known_velocities if isinstance(known_velocities, dict) else from_shared(known_velocities)
    )
    _STATE = _WorkerState(settings, dict(known or {}), from_shared(catalogue))
    if pids is not None:
        pids.put(os.getpid())


#: What a worker imports to read, reduce, identify and build rows: imported once in the
#: forkserver, from which every worker is forked with them loaded (``worker_context``).
WORKER_MODULES = (
    "speccat.workers",
    "speccat.io",
    "speccat.reduce",
    "speccat.identify",
    "speccat.physics.zeeman",
    "speccat.archive.rows",
    "speccat.catalogue",
)


def worker_context() -> Any:
    """The pools' multiprocessing context: forkserver, so that workers never inherit the
    writer's open database connections, with ``WORKER_MODULES`` preloaded in the server.

    The imports (numpy, scipy.optimize...) are then paid once per ingest, in the server, not
    ~1 s of CPU in each worker; and a later pool (one file at a time after a worker died, the
    next ingest in the same process) starts at once. The preload applies when the server
    starts, i.e. at the first call in the process (``start_workers``, before the archive is
    opened, so that its imports run alongside).
    """
    import multiprocessing as mp
    from multiprocessing import forkserver

    ctx = mp.get_context("forkserver")
    ctx.set_forkserver_preload(["__main__", *WORKER_MODULES])  # "__main__": as by default
    with _stderr_to(_worker_log()):  # the server and every worker forked from it inherit it
        forkserver.ensure_running()
    return ctx


_WORKER_LOG: list[Any] = []


def _worker_log() -> Any:
    """The file that the forkserver and the workers write their standard error to, instead of
    the terminal: what they have to say about a file comes back in its result, and what
    Python 3.11's pool makes them print when a dying worker breaks it (EOFError tracebacks of
    the survivors and of the server) would only garble the progress bar and alarm the user
    about an ingest that still stores every file. Its last line is shown when the workers
    cannot be started at all (``worker_log_tail``)."""
    if not _WORKER_LOG:
        import tempfile

        log = tempfile.TemporaryFile(prefix="speccat-workers-")  # noqa: SIM115 (kept open)
        _WORKER_LOG.append(log)
    return _WORKER_LOG[0]


def worker_log_tail() -> str:
    """The last non-empty line the workers wrote to their standard error, or ''."""
    if not _WORKER_LOG:
        return ""
    log = _WORKER_LOG[0]
    log.seek(0, os.SEEK_END)
    log.seek(max(0, log.tell() - 4096))
    lines = [ln.strip() for ln in log.read().decode("utf-8", "replace").splitlines()]
    return next((ln for ln in reversed(lines) if ln), "")


@contextmanager
def _stderr_to(target: Any) -> Iterator[None]:
    """File descriptor 2 points at ``target`` while the block runs (child processes started
    then inherit it); this process's own standard error is restored after it."""
    sys.stderr.flush()
    saved = os.dup(2)
    try:
        os.dup2(target.fileno(), 2)
        yield
    finally:
        os.dup2(saved, 2)
        os.close(saved)


def start_workers(jobs: int) -> None:
    """Start the workers' forkserver now (``worker_context``) when ``jobs`` > 1, so that its
    imports (about 1.4 s of CPU) run while the archive opens and the files are found and
    hashed; the first pool then only forks."""
    if jobs > 1:
        worker_context()


def shared_catalogue(settings: Settings, ctx: Any) -> Any:
    """The catalogue, loaded once here and pickled into shared memory for the workers
    (``to_shared``): each worker unpickles it (0.5 MB, ~10 ms) instead of building it (and,
    with a ``--catalogue`` file, reading and checking that file). None when the catalogue
    cannot be loaded: each worker then loads its own, and its files fail with the reason.
    """
    from speccat.catalogue import load

    try:
        return to_shared(load(settings.catalogue or None), ctx)
    except Exception:  # the workers meet it again and report it for each file
        return None


def to_shared(obj: Any, ctx: Any) -> Any:
    """``obj`` pickled into shared memory, for a pool's initargs. Plain initargs go down a pipe
    as each worker starts, where a write over the pipe's 64 kB waits for the worker to read it,
    and a worker killed meanwhile would break the write; of shared memory only a file
    descriptor is sent, so the initargs stay small whatever the catalogue or the number of
    known sources."""
    import pickle

    data = pickle.dumps(obj, protocol=pickle.HIGHEST_PROTOCOL)
    shared = ctx.RawArray("c", len(data))
    shared.raw = data
    return shared


def from_shared(shared: Any) -> Any:
    """The object of ``to_shared``; None if there is none or it cannot be read (a worker set-up
    that raised would break the whole pool)."""
    if shared is None:
        return None
    import pickle

    try:
        return pickle.loads(shared.raw)
    except Exception:
        return None


def _catalogue(state: _WorkerState) -> Catalogue:
    if state.catalogue is None:
        from speccat.catalogue import load

        state.catalogue = load(state.settings.catalogue or None)
    return state.catalogue


def add_zeeman(result: SpectrumResult) -> SpectrumResult:
    """Fit the line-of-sight field for identified HI/OH lines when Stokes I and V are both present."""
    from speccat.physics.zeeman import SPLIT_HZ_PER_UG, fit_zeeman

    spec = result.spectrum
    if "V" not in spec.intensity or "I" not in spec.intensity:
        return result
    stokes_i = spec.intensity["I"] - result.measurement.baseline.evaluate()
    dets: list[Detection] = []
    changed = False
    for det in result.detections:
        split = SPLIT_HZ_PER_UG.get(det.line.name) if det.line is not None else None
        if split is None:
            dets.append(det)
            continue
        half = max(3.0, 1.5 * det.fit.fwhm_chan)
        lo = max(0, int(det.fit.center_chan - half))
        hi = min(spec.n_channels, int(det.fit.center_chan + half) + 1)
        fit = fit_zeeman(spec.freq_hz, stokes_i, spec.intensity["V"], slice(lo, hi), split)
        if fit is None:
            dets.append(det)
            continue
        dets.append(replace(det, b_los_ug=fit[0], b_los_err_ug=fit[1]))
        changed = True
    return replace(result, detections=tuple(dets)) if changed else result


def measure_file(
    path: str,
    settings: Settings,
    catalogue: Catalogue,
    known_velocities: Mapping[str, float] | None = None,
) -> list[SpectrumResult]:
    """Read, reduce and identify every spectrum of one file (raises SpeccatError on bad input)."""
    from speccat.identify import identify
    from speccat.io import read
    from speccat.reduce import ReduceSettings, measure

    reduce_settings = ReduceSettings(detect_sigma=settings.detect_sigma)
    results = []
    with _read_time_limit(path):
        spectra = read(path)
    for spectrum in map(with_total_intensity, spectra):
        stokes = spectrum.primary_stokes
        m = measure(spectrum.freq_hz, spectrum.intensity[stokes], reduce_settings, stokes=stokes)
        result = identify(
            spectrum,
            m,
            catalogue,
            known_velocities=known_velocities,
            threshold=settings.id_threshold,
            vel_window_kms=settings.vel_window_kms,
        )
        results.append(add_zeeman(result))
    return results


#: Reading a file may take this long plus one second per MB before it is given up: a hostile
#: header (a negative GCOUNT, a billion TFIELDS) can send astropy's FITS parser into an endless
#: or hours-long loop, and one file must never stall a night's ingest.
READ_TIME_LIMIT_S = 30.0


class _ReadTimeout(BaseException):
    """Raised by SIGALRM inside a stuck reader (BaseException: no reader swallows it)."""


@contextmanager
def _read_time_limit(path: str) -> Iterator[None]:
    """Interrupt the block after the read limit; only in a main thread (signals need one)."""
    if threading.current_thread() is not threading.main_thread() or not hasattr(
        signal, "setitimer"
    ):
        yield
        return
    try:
        seconds = READ_TIME_LIMIT_S + os.path.getsize(path) / 1e6
    except OSError:
        seconds = READ_TIME_LIMIT_S

    def _alarm(signum: int, frame: object) -> None:
        raise _ReadTimeout(seconds)

    previous = signal.signal(signal.SIGALRM, _alarm)
    signal.setitimer(signal.ITIMER_REAL, seconds)
    try:
        yield
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, previous)


def process_file(path: str, settings: Settings | None = None) -> FileResult:
    """One file end to end, for a worker: never raises, a failure becomes ``FileResult.error``."""
    state = _STATE or _WorkerState(settings or Settings(), {})
    if settings is not None:
        state.settings = settings
    try:
        size, sha = file_digest(path)
    except OSError as exc:
        return FileResult(path, 0, "", error=f"cannot read file ({exc.strerror or exc})")
    try:
        spectra = measure_file(path, state.settings, _catalogue(state), state.known_velocities)
    except SpeccatError as exc:
        reason = getattr(exc, "reason", None) or str(exc)
        return FileResult(path, size, sha, error=reason)
    except _ReadTimeout as exc:
        return FileResult(path, size, sha, error=f"reading took over {exc.args[0]:.0f} s; given up")
    except Exception as exc:  # a file must never take the ingest down
        return FileResult(path, size, sha, error=f"internal error: {type(exc).__name__}: {exc}")
    return FileResult(path, size, sha, spectra=tuple(spectra))


def prepare_files(paths: list[str]) -> list[PreparedFile]:
    """Worker task: ``process_file`` on each path, turned into ready-to-insert archive rows
    (building rows and compressing arrays here keeps the single writer's work small)."""
    from speccat.archive.rows import PreparedFile, prepare_file

    out = []
    for path in paths:
        result = process_file(path)
        try:
            out.append(prepare_file(result))
        except Exception as exc:  # a file must never take the ingest down
            reason = f"internal error: {type(exc).__name__}: {exc}"
            out.append(PreparedFile(path, result.size_bytes, result.sha256, error=reason))
    return out
