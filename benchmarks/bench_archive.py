"""Archive scale: bulk fill, first-page and count latency per filter, CSV export rate.

Archives of 10k/100k (quick) or 10k/100k/1M (full) detections are written directly with
executemany (no pipeline), with invented, plausible distributions. Issue 7's targets at 1M:
first page of any single-filter query < 50 ms; CSV export of all rows < 10 s, flat memory.
Times are wall clock (best of a few) with the CPU seconds beside them (this process and its
export workers), since a shared machine's wall clock says as much about the neighbours.
``SPECCAT_BENCH_KEEP=DIR`` keeps the filled archives in DIR and reuses them on the next run
(the 1M fill takes minutes).
"""

from __future__ import annotations

import os
import resource
import sqlite3
import tempfile
import time
from datetime import datetime, timedelta
from pathlib import Path
from typing import Any

import numpy as np
from sqlalchemy.dialects import sqlite as sqlite_dialect
from sqlalchemy.schema import CreateIndex

from speccat.archive import Archive, Filters
from speccat.archive.blobs import encode_data, encode_freq
from speccat.archive.schema import detections, files, spectra, spectrum_data
from speccat.cli.cmd_query import COUNT_UP_TO
from speccat.export import PARALLEL_MIN_ROWS, export, export_workers

SPECTRA_PER_FILE = 10
DETECTIONS_PER_SPECTRUM = 2
LINES = [
    ("H109a", "H", 5.008922e9),
    ("He109a", "He", 5.010963e9),
    ("OH1667", "OH", 1.667359e9),
    ("HI", "HI", 1.420405752e9),
    ("H2O22", "H2O", 2.223508e10),
]
FILTERS: dict[str, dict[str, str]] = {
    "none": {},
    "source": {"source": "SRC-017*"},
    "species": {"species": "OH"},
    "line": {"line": "H109a"},
    "vel": {"vel": "10:12"},
    "freq": {"freq": "1667:1668"},
    "snr": {"snr": "400"},
    "night": {"night": "2026-01-07"},
    "kind": {"kind": "absorption"},
    "unidentified": {"unidentified": "yes"},
    "since": {"since": "2026-01-29T12:00"},
    # ranges that match most rows, or almost none at the far end of the S/N order
    "vel_wide": {"vel": "-100:100"},
    "freq_wide": {"freq": "1000:6000"},
    "vel_tail": {"vel": ":-149"},
    "source_all": {"source": "SRC*"},
}


def _insert(conn: Any, table: Any, columns: dict[str, Any], n: int) -> None:
    names = list(columns)
    sql = f"INSERT INTO {table.name} ({', '.join(names)}) VALUES ({', '.join('?' * len(names))})"
    cols = [c if isinstance(c, list) else [c] * n for c in columns.values()]
    conn.executemany(sql, zip(*cols, strict=True))


def fill(path: Path, n_det: int, seed: int = 7) -> float:
    """Write an archive of ``n_det`` detections; returns the seconds the bulk insert took."""
    Archive.open(str(path), create=True).close()
    rng = np.random.default_rng(seed)
    n_spec = n_det // DETECTIONS_PER_SPECTRUM
    n_files = max(1, n_spec // SPECTRA_PER_FILE)

    t0 = time.perf_counter()
    conn = sqlite3.connect(path)
    conn.execute("PRAGMA synchronous=OFF")
    conn.execute("BEGIN")
    # bulk load without the detection indexes, then build them once (faster than row by row)
    for index in detections.indexes:
        conn.execute(f"DROP INDEX {index.name}")
    conn.execute(
        "INSERT INTO runs (id, user, host, started_utc, speccat_version, parameters) VALUES (1,'bench','bench','2026-01-01 00:00:00','0','{}')"
    )
    nights = [f"2026-01-{d:02d}" for d in range(1, 31)]
    file_night = rng.integers(0, 30, n_files)
    _insert(
        conn,
        files,
        {
            "id": list(range(1, n_files + 1)),
            "path": [f"bench/f{i}.fits" for i in range(n_files)],
            "size_bytes": 1000,
            "sha256": [f"{i:064x}" for i in range(n_files)],
            "run_id": 1,
            "night": [nights[k] for k in file_night],
        },
        n_files,
    )
    spec_file = np.minimum(np.arange(n_spec) // SPECTRA_PER_FILE, n_files - 1)
    sources = [f"SRC-{k:03d}" for k in rng.integers(0, 200, n_spec)]
    start = datetime(2026, 1, 1, 20)
    times = [
        (start + timedelta(days=int(file_night[f]), seconds=int(s))).isoformat(" ")
        for f, s in zip(spec_file, rng.integers(0, 36000, n_spec), strict=True)
    ]
    freq_blob = encode_freq(np.linspace(1.4e9, 1.5e9, 256))
    data_blob = encode_data({"I": rng.normal(0, 1, 256).astype(np.float32)})
    spec_night = [nights[file_night[f]] for f in spec_file]
    _insert(
        conn,
        spectra,
        {
            "id": list(range(1, n_spec + 1)),
            "file_id": [int(f) + 1 for f in spec_file],
            "source": sources,
            "ra_deg": rng.uniform(0, 360, n_spec).tolist(),
            "dec_deg": rng.uniform(-60, 60, n_spec).tolist(),
            "obs_time": times,
            "night": spec_night,
            "telescope": "bench",
            "specsys": "TOPOCENT",
            "lsrk_factor": 1.0,
            "stokes": '["I"]',
            "primary_stokes": "I",
            "n_channels": 256,
            "intensity_unit": "K",
            "rms": rng.uniform(0.01, 0.1, n_spec).tolist(),
            "continuum": rng.uniform(0, 2, n_spec).tolist(),
            "baseline": '{"n_channels": 256, "coeffs": [0.0], "ripple_amp": 0.0, "ripple_period_chan": 0.0, "ripple_phase": 0.0}',
            "flags": "",
            "meta": "{}",
        },
        n_spec,
    )
    _insert(
        conn,
        spectrum_data,
        {"spectrum_id": list(range(1, n_spec + 1)), "freq_hz": freq_blob, "data": data_blob},
        n_spec,
    )
    det_spec = np.arange(n_det) // DETECTIONS_PER_SPECTRUM
    which = rng.integers(0, len(LINES), n_det)
    ident = rng.random(n_det) > 0.2
    v = rng.uniform(-150, 150, n_det)
    rest = np.array([LINES[k][2] for k in which])
    center = rest * (1 - v / 299_792.458)
    _insert(
        conn,
        detections,
        {
            "spectrum_id": (det_spec + 1).tolist(),
            "stokes": "I",
            "center_hz": center.tolist(),
            "peak": rng.lognormal(0, 1, n_det).tolist(),
            "fwhm_hz": rng.uniform(1e4, 1e5, n_det).tolist(),
            "snr": rng.lognormal(2.5, 1, n_det).tolist(),
            "kind": ["absorption" if x < 0.25 else "emission" for x in rng.random(n_det)],
            "profile": "gaussian",
            "blend": 0,
            "fit_flags": "",
            "v_lsr_kms": [float(x) if i else None for x, i in zip(v, ident, strict=True)],
            "fwhm_kms": rng.uniform(1, 30, n_det).tolist(),
            "integral_kms": rng.lognormal(1, 1, n_det).tolist(),
            "flags": "",
            "species": [LINES[k][1] if i else None for k, i in zip(which, ident, strict=True)],
            "species_lc": [
                LINES[k][1].lower() if i else None for k, i in zip(which, ident, strict=True)
            ],
            "line": [LINES[k][0] if i else None for k, i in zip(which, ident, strict=True)],
            "transition": [LINES[k][0] if i else None for k, i in zip(which, ident, strict=True)],
            "rest_freq_hz": [float(r) if i else None for r, i in zip(rest, ident, strict=True)],
            "id_score": rng.uniform(0, 1, n_det).tolist(),
            "source": [sources[s] for s in det_spec],
            "source_lc": [sources[s].lower() for s in det_spec],
            "night": [spec_night[s] for s in det_spec],
            "obs_time": [times[s] for s in det_spec],
        },
        n_det,
    )
    dialect = sqlite_dialect.dialect()
    for index in detections.indexes:
        conn.execute(str(CreateIndex(index).compile(dialect=dialect)))
    conn.commit()
    conn.execute("ANALYZE")
    conn.close()
    return time.perf_counter() - t0


def _cpu() -> float:
    """CPU seconds of this process and of its finished children (the export workers)."""
    own = resource.getrusage(resource.RUSAGE_SELF)
    kids = resource.getrusage(resource.RUSAGE_CHILDREN)
    return own.ru_utime + own.ru_stime + kids.ru_utime + kids.ru_stime


def _ms(fn: Any, repeat: int = 3) -> tuple[float, float]:
    """(wall, CPU) milliseconds of the fastest of ``repeat`` calls."""
    best = (float("inf"), float("inf"))
    for _ in range(repeat):
        t0, c0 = time.perf_counter(), _cpu()
        fn()
        best = min(best, (time.perf_counter() - t0, _cpu() - c0))
    return best[0] * 1e3, best[1] * 1e3


def _label(n: int) -> str:
    return f"{n // 1_000_000}M" if n >= 1_000_000 else f"{n // 1000}k"


def _archive(folder: Path, n: int) -> tuple[Path, float | None]:
    """The bench archive of ``n`` detections: reused from SPECCAT_BENCH_KEEP when there
    (migrated to the current schema), else filled; (path, fill seconds or None)."""
    keep = os.environ.get("SPECCAT_BENCH_KEEP")
    path = (Path(keep) if keep else folder) / f"bench_{n}.sqlite"
    if keep and path.exists():
        Archive.open(str(path)).close()  # applies pending migrations
        return path, None
    path.unlink(missing_ok=True)
    return path, fill(path, n)


def _pages(archive: Archive, n: int, detail: bool) -> list[dict[str, Any]]:
    pages, counts, capped = {}, {}, {}
    for name, values in FILTERS.items():
        f = Filters.parse(values)
        pages[name] = _ms(lambda f=f: archive.page(f, limit=200))
        counts[name] = _ms(lambda f=f: archive.count(f), repeat=2)
        capped[name] = _ms(lambda f=f: archive.count(f, at_most=COUNT_UP_TO), repeat=2)
    worst = max(pages, key=lambda k: pages[k][0])
    worst_c = max(counts, key=lambda k: counts[k][0])
    # what `speccat query` (table format) runs: the page, then the count up to COUNT_UP_TO
    table = {k: pages[k][0] + capped[k][0] for k in pages}
    worst_t = max(table, key=lambda k: table[k])
    deep = _ms(lambda: archive.page(Filters(), offset=int(n * 0.9), limit=200))
    rows = [
        {
            "figure": f"first page, worst filter ({worst}), {_label(n)} (<50 ms@1M)",
            "value": pages[worst][0],
            "unit": "ms",
        },
        {"figure": f"  its CPU time, {_label(n)}", "value": pages[worst][1], "unit": "ms"},
        {
            "figure": f"count, worst single filter ({worst_c}), {_label(n)}",
            "value": counts[worst_c][0],
            "unit": "ms",
        },
        {
            "figure": f"query table: page + count ({worst_t}), {_label(n)}",
            "value": table[worst_t],
            "unit": "ms",
        },
        {
            "figure": f"page at 90% offset, default sort, {_label(n)}",
            "value": deep[0],
            "unit": "ms",
        },
    ]
    if detail:
        rows += [
            {
                "figure": f"first page, --{k} filter, {_label(n)} (CPU {v[1]:.1f} ms)",
                "value": v[0],
                "unit": "ms",
            }
            for k, v in pages.items()
        ]
    return rows


def _export(archive: Archive, path: Path, n: int, jobs: int | None) -> list[dict[str, Any]]:
    rss0 = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    t0, c0 = time.perf_counter(), _cpu()
    export(archive, Filters(), path, force=True, jobs=jobs)
    dt, cpu = time.perf_counter() - t0, _cpu() - c0
    rss1 = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    workers = export_workers(jobs) if n >= PARALLEL_MIN_ROWS else 1
    how = f"{workers} processes" if workers > 1 else "1 process"
    rows = [
        {
            "figure": f"CSV export, all {_label(n)} rows, {how} (<10 s@1M)",
            "value": dt,
            "unit": "s",
        },
        {"figure": f"  its CPU time (all processes), {_label(n)}", "value": cpu, "unit": "s"},
        {"figure": f"  CSV export rate, {_label(n)}", "value": n / dt, "unit": "rows/s"},
        {
            "figure": f"  peak RSS growth of the exporting process, {_label(n)}",
            "value": (rss1 - rss0) / 1024,
            "unit": "MB",
        },
    ]
    if workers > 1:
        worker_rss = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
        rows.append(
            {
                "figure": f"  peak RSS of an export worker, {_label(n)}",
                "value": worker_rss / 1024,
                "unit": "MB",
            }
        )
    return rows


def measure(folder: Path, n: int, detail: bool, sequential: bool) -> list[dict[str, Any]]:
    path, seconds = _archive(folder, n)
    rows: list[dict[str, Any]] = []
    if seconds is not None:
        rows.append(
            {"figure": f"bulk fill, {_label(n)} detections", "value": n / seconds, "unit": "rows/s"}
        )
    with Archive.open(str(path), readonly=True) as archive:
        rows += _pages(archive, n, detail)
        rows += _export(archive, folder / f"all_{n}.csv", n, None)
        if sequential and export_workers(None) > 1 and n >= PARALLEL_MIN_ROWS:
            rows += _export(archive, folder / f"all_{n}.csv", n, 1)
    (folder / f"all_{n}.csv").unlink(missing_ok=True)
    return rows


def run(quick: bool) -> list[dict[str, Any]]:
    sizes = [10_000, 100_000] if quick else [10_000, 100_000, 1_000_000]
    out: list[dict[str, Any]] = []
    with tempfile.TemporaryDirectory(prefix="speccat-bench-") as tmp:
        for n in sizes:
            last = n == sizes[-1]
            out += measure(Path(tmp), n, detail=last, sequential=last and not quick)
    return out
