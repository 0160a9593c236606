"""An ingest worker starts light: forked with its modules already imported, without SQLAlchemy
or astropy.constants (it is given the parent's catalogue instead of building its own), and its
results are those of a catalogue it built."""

from __future__ import annotations

import importlib
import multiprocessing as mp
import pickle
import subprocess
import sys
from pathlib import Path

import pytest

from speccat import workers
from speccat.catalogue import Catalogue
from speccat.catalogue.loader import curated_lines, recombination_series
from speccat.config import Settings

SAMPLE = Path(__file__).resolve().parents[2] / "sample_archive"
FILES = [SAMPLE / "core04_co.fits", SAMPLE / "cloud05_oh_zeeman.fits", SAMPLE / "core06_cs.csv"]

#: A pool set up as the ingest sets it up: it reports the modules its worker starts with, then
#: measures the files named in argv and reports which heavy modules it had to import.
POOL = """
import sys
from concurrent.futures import ProcessPoolExecutor
from speccat.config import Settings
from speccat.workers import init_worker, shared_catalogue, worker_context, prepare_files
ctx = worker_context()
args = (Settings(), {}, None, shared_catalogue(Settings(), ctx))
modules = "sorted(__import__('sys').modules)"
with ProcessPoolExecutor(1, mp_context=ctx, initializer=init_worker, initargs=args) as pool:
    print(",".join(pool.submit(eval, modules).result()))
    for prepared in pool.submit(prepare_files, sys.argv[1:]).result():
        assert prepared.error is None and prepared.spectra, (prepared.path, prepared.error)
    heavy = "[m for m in ('sqlalchemy', 'astropy.constants') if m in __import__('sys').modules]"
    print(",".join(pool.submit(eval, heavy).result()))
"""


def test_a_pool_worker_starts_with_its_modules_and_imports_no_database_or_constants() -> None:
    out = subprocess.run(
        [sys.executable, "-c", POOL, *map(str, FILES)], capture_output=True, text=True, check=True
    )
    at_start, heavy = out.stdout.splitlines()
    assert set(workers.WORKER_MODULES) | {"scipy.optimize"} <= set(at_start.split(","))
    assert heavy == ""


def test_every_preloaded_module_exists() -> None:
    """The forkserver skips a preload it cannot import without a word: a renamed module would
    quietly bring back its import in every worker."""
    for name in workers.WORKER_MODULES:
        importlib.import_module(name)


def _fresh() -> Catalogue:
    return Catalogue(curated_lines(), computed=recombination_series())


def test_catalogue_pickles_whole_and_without_its_made_lines() -> None:
    used = _fresh()
    assert used.by_name("H109a").n == 109  # makes lines on demand ...
    assert len(used.lines) == len(used)  # ... and caches them all
    copy = pickle.loads(pickle.dumps(used, protocol=pickle.HIGHEST_PROTOCOL))
    assert copy.lines == used.lines
    assert copy.names == used.names
    assert copy.groups == used.groups
    assert copy.by_name("H109alpha") == used.by_name("H109a")
    assert copy.between(4.9e9, 5.1e9) == used.between(4.9e9, 5.1e9)
    assert (copy.rest_freq_hz == used.rest_freq_hz).all()
    assert not copy.rest_freq_hz.flags.writeable
    # the lines made on demand are not sent: the pickle of a catalogue never used
    assert len(pickle.dumps(used)) == len(pickle.dumps(_fresh()))


def test_worker_results_with_the_parents_catalogue_equal_a_self_built_one() -> None:
    paths = [str(p) for p in FILES]
    settings = Settings()
    shared = workers.shared_catalogue(settings, mp.get_context("forkserver"))
    assert shared is not None
    try:
        workers.init_worker(settings, {})  # builds its own on first use
        own = workers.prepare_files(paths)
        workers.init_worker(settings, {}, None, shared)
        assert workers._STATE is not None and workers._STATE.catalogue is not None
        given = workers.prepare_files(paths)
    finally:
        workers._STATE = None
    assert all(p.error is None for p in own)
    assert sum(len(s.detections) for p in own for s in p.spectra) > 0
    assert given == own


def test_a_catalogue_that_cannot_load_is_left_to_the_workers(tmp_path: Path) -> None:
    settings = Settings(catalogue=str(tmp_path / "missing.csv"))
    shared = workers.shared_catalogue(settings, mp.get_context("forkserver"))
    assert shared is None
    try:
        workers.init_worker(settings, {}, None, shared)
        [failed] = workers.prepare_files([str(FILES[0])])
    finally:
        workers._STATE = None
    assert failed.error is not None and "missing.csv" in failed.error


def test_many_known_sources_reach_the_workers_through_shared_memory() -> None:
    # a group archive may know thousands of sources: their velocities must not go down the
    # start-up pipe (over 64 kB a killed starting worker broke the ingest there)
    known = {f"Src-{i:05d}": float(i % 300) - 150.0 for i in range(20_000)}
    shared = workers.to_shared(known, mp.get_context("forkserver"))
    assert len(pickle.dumps(known)) > 64 * 1024
    try:
        workers.init_worker(Settings(), shared)
        assert workers._STATE is not None and workers._STATE.known_velocities == known
    finally:
        workers._STATE = None


def test_a_broken_pipe_inside_a_command_is_an_error_not_a_quiet_exit(
    monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]
) -> None:
    from speccat import cli
    from speccat.cli import cmd_catalogue

    def broken(args: object) -> int:
        raise BrokenPipeError("worker start-up pipe")

    monkeypatch.setattr(cmd_catalogue, "run", broken)
    monkeypatch.setattr(cli, "stdout_closed", lambda: False)
    assert cli.main(["catalogue"]) == 1
    assert "broke unexpectedly" in capsys.readouterr().err
    monkeypatch.setattr(cli, "stdout_closed", lambda: True)  # `| head` went away: quiet
    assert cli.main(["catalogue"]) == 0
