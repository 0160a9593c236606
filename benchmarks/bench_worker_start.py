"""Ingest worker start-up: CPU a worker spends until its first file is done, and the wall time
until two workers have done two files, each from a fresh process.

- speccat: the pool as ``speccat ingest`` sets it up (``workers.worker_context``: a
  forkserver that preloads the worker modules; the parent's catalogue in shared memory);
- baseline: a plain forkserver pool whose workers import their modules and build the catalogue
  themselves (how each worker started before; SQLAlchemy is no longer on that path either way).

The files are two 8,192-channel FITS spectra made by ``bench_ingest.make_night``. The worker's
CPU is its ``time.process_time()`` after the file (a forked child starts from zero); the
server's one-off import CPU is reported apart.
"""

from __future__ import annotations

import json
import statistics
import subprocess
import sys
import tempfile
from pathlib import Path
from typing import Any

#: Run in a fresh interpreter: argv = mode ("speccat" | "baseline"), file, file.
SCRIPT = """
import json, multiprocessing as mp, os, sys, time
from concurrent.futures import ProcessPoolExecutor
from speccat import workers
from speccat.config import Settings

mode, files = sys.argv[1], sys.argv[2:]
t0 = time.perf_counter()
if mode == "speccat":
    ctx = workers.worker_context()
    args = (Settings(), {}, None, workers.shared_catalogue(Settings(), ctx))
else:
    ctx = mp.get_context("forkserver")
    args = (Settings(), {}, None, None)
cpu_now = "__import__('time').process_time()"
with ProcessPoolExecutor(2, mp_context=ctx, initializer=workers.init_worker, initargs=args) as pool:
    for fut in [pool.submit(workers.prepare_files, [f]) for f in files]:
        assert all(p.error is None for p in fut.result())
    wall = time.perf_counter() - t0
with ProcessPoolExecutor(1, mp_context=ctx, initializer=workers.init_worker, initargs=args) as pool:
    assert all(p.error is None for p in pool.submit(workers.prepare_files, files[:1]).result())
    worker_cpu = pool.submit(eval, cpu_now).result()

def server_cpu():
    tick = os.sysconf("SC_CLK_TCK")
    for pid in os.listdir("/proc"):
        try:
            cmd = open(f"/proc/{pid}/cmdline", "rb").read()
            stat = open(f"/proc/{pid}/stat").read().rsplit(")", 1)[1].split()
        except OSError:
            continue
        if b"forkserver import main" in cmd and stat[1] == str(os.getpid()):
            return (int(stat[11]) + int(stat[12])) / tick
    return None

print(json.dumps({"wall": wall, "worker_cpu": worker_cpu, "server_cpu": server_cpu()}))
"""


def _measure(mode: str, files: list[Path]) -> dict[str, Any]:
    out = subprocess.run(
        [sys.executable, "-c", SCRIPT, mode, *map(str, files)],
        capture_output=True,
        text=True,
        check=True,
        timeout=120,
    )
    result: dict[str, Any] = json.loads(out.stdout)
    return result


def run(quick: bool) -> list[dict[str, Any]]:
    from benchmarks.bench_ingest import make_night

    repeats = 1 if quick else 3
    with tempfile.TemporaryDirectory(prefix="speccat-bench-") as tmp:
        files = make_night(Path(tmp), 2)
        new = [_measure("speccat", files) for _ in range(repeats)]
        old = [_measure("baseline", files) for _ in range(repeats)]

    def med(runs: list[dict[str, Any]], key: str) -> float:
        return float(statistics.median(r[key] for r in runs))

    rows = []
    for key, figure in (
        ("worker_cpu", "ingest worker: CPU until its first file is done"),
        ("wall", "ingest, 2 workers: wall time until 2 files are done"),
    ):
        value, base = med(new, key), med(old, key)
        rows.append(
            {"figure": figure, "value": value, "unit": "s", "baseline": base, "ratio": value / base}
        )
    if all(r["server_cpu"] is not None for r in new):
        rows.append(
            {
                "figure": "ingest: forkserver preloading the worker modules (once)",
                "value": med(new, "server_cpu"),
                "unit": "s CPU",
            }
        )
    return rows
