"""Ingest throughput against the astropy read floor and against the obvious script.

A synthetic night (N FITS files x 8,192 channels, two recombination lines each at 5 GHz) is
written with plain astropy, then, in one run:
- floor: every file only opened and read with astropy.io.fits;
- speccat: ``speccat ingest`` in a subprocess (all cores), peak memory of that process tree;
- obvious script: astropy.io.fits + numpy polyfit baseline + astropy.modeling Gaussian fit per
  line + sqlite3 inserts, on a subset, as files per second;
- the single writer alone: one file measured by the pipeline's worker code, then stored again
  and again under new SHA-256s (``Archive.store_prepared``), as files per second and CPU per
  file: the ceiling the writer puts on an ingest, whatever the workers' speed;
- a worker alone: the pipeline's worker code (read, measure, identify, build rows) in this
  process on a subset, CPU per file; with the writer's CPU per file it gives the most an ingest
  could reach if every core were busy all the time with nothing else.
"""

from __future__ import annotations

import json
import os
import resource
import sqlite3
import subprocess
import sys
import tempfile
import time
import warnings
from pathlib import Path
from typing import Any

import numpy as np
from astropy.io import fits

C_KMS = 299_792.458
H109A_HZ = 5.008922e9  # only sets where the synthetic lines sit; not a check value


def make_night(folder: Path, n_files: int, n_chan: int = 8192, seed: int = 7) -> list[Path]:
    """N single-spectrum FITS images with a baseline, noise and an H/He pair of lines."""
    rng = np.random.default_rng(seed)
    folder.mkdir(parents=True, exist_ok=True)
    chan = np.arange(n_chan)
    df = 6.1e3
    f0 = H109A_HZ - df * n_chan / 2
    freq = f0 + df * chan
    paths = []
    for i in range(n_files):
        v = rng.uniform(-40, 90)
        y = 0.02 * (chan / n_chan - 0.5) + rng.normal(0, 0.01, n_chan)
        for rest, amp, width_kms in (
            (H109A_HZ, rng.uniform(0.1, 0.5), 25.0),
            (H109A_HZ * (1 + 122.2 / C_KMS), 0.03, 18.0),
        ):
            centre = rest * (1 - v / C_KMS)
            sigma = rest * width_kms / C_KMS / 2.3548
            y += amp * np.exp(-0.5 * ((freq - centre) / sigma) ** 2)
        h = fits.Header()
        h["CTYPE1"], h["CRVAL1"], h["CDELT1"], h["CRPIX1"] = "FREQ", f0, df, 1.0
        h["CUNIT1"] = "Hz"
        h["SPECSYS"], h["BUNIT"] = "LSRK", "K"
        h["OBJECT"] = f"BENCH-{i % 40:02d}"
        h["RA"], h["DEC"] = 270.0 + (i % 40) * 0.1, -20.0
        h["DATE-OBS"] = f"2026-03-14T{20 + (i * 10 // n_files) % 4:02d}:{i % 60:02d}:00"
        h["RESTFRQ"] = H109A_HZ
        p = folder / f"scan_{i:05d}.fits"
        fits.PrimaryHDU(y.astype(np.float32), h).writeto(p, overwrite=True)
        paths.append(p)
    return paths


def floor_read(paths: list[Path]) -> float:
    t0 = time.perf_counter()
    for p in paths:
        with fits.open(p, memmap=False) as hdul:
            hdul[0].header.get("CRVAL1")
            np.asarray(hdul[0].data, dtype=float)
    return time.perf_counter() - t0


def obvious_script(paths: list[Path], db: Path) -> float:
    """What a hurried person would write: per file, per line, astropy.modeling; sqlite3 rows."""
    from astropy.modeling import fitting, models

    con = sqlite3.connect(db)
    con.execute("create table if not exists lines (file text, centre real, amp real, width real)")
    fitter = fitting.TRFLSQFitter()
    t0 = time.perf_counter()
    for p in paths:
        with fits.open(p, memmap=False) as hdul:
            y = np.asarray(hdul[0].data, dtype=float)
            h = hdul[0].header
        x = h["CRVAL1"] + h["CDELT1"] * (np.arange(y.size) + 1 - h["CRPIX1"])
        xn = (x - x.mean()) / (x.max() - x.min())
        resid = y - np.polyval(np.polyfit(xn, y, 3), xn)
        rms = 1.4826 * np.median(np.abs(resid - np.median(resid)))
        peaks = np.flatnonzero(resid > 5 * rms)
        groups = np.split(peaks, np.flatnonzero(np.diff(peaks) > 20) + 1) if peaks.size else []
        for g in groups:
            k = int(g[np.argmax(resid[g])])
            sl = slice(max(0, k - 200), k + 200)
            g0 = models.Gaussian1D(resid[k], x[k], 10 * h["CDELT1"])
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                m = fitter(g0, x[sl], resid[sl])
            con.execute(
                "insert into lines values (?,?,?,?)",
                (str(p), m.mean.value, m.amplitude.value, m.stddev.value),
            )
        con.commit()
    con.close()
    return time.perf_counter() - t0


def speccat_ingest(folder: Path, db: Path) -> tuple[float, float, dict[str, Any]]:
    """Seconds, peak resident memory (MB, largest process) and the JSON summary."""
    t0 = time.perf_counter()
    out = subprocess.run(
        [sys.executable, "-m", "speccat", "--archive", str(db), "ingest", str(folder), "--json"],
        capture_output=True,
        text=True,
        check=True,
    )
    seconds = time.perf_counter() - t0
    peak_mb = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024
    return seconds, peak_mb, json.loads(out.stdout)


def writer_only(path: Path, db: Path, n_files: int) -> tuple[float, float]:
    """Files per second (wall) and CPU ms per file of the writer storing ``n_files`` copies of
    one prepared file (each its own transaction, as in an ingest)."""
    from dataclasses import replace

    from speccat.archive import Archive
    from speccat.workers import prepare_files

    (prepared,) = prepare_files([str(path)])
    if prepared.error is not None:
        raise RuntimeError(prepared.error)
    with Archive.open(str(db), create=True) as archive:
        run_id = archive.begin_run({"bench": "writer"})
        copies = [replace(prepared, sha256=f"{i:064x}") for i in range(n_files)]
        archive.store_prepared(run_id, replace(prepared, sha256="f" * 64), "bench")  # warm
        t0, c0 = time.perf_counter(), time.process_time()
        for copy in copies:
            archive.store_prepared(run_id, copy, "bench")
        wall, cpu = time.perf_counter() - t0, time.process_time() - c0
    return n_files / wall, 1e3 * cpu / n_files


def worker_only(paths: list[Path]) -> float:
    """CPU ms per file of the worker code (``prepare_files``) run in this process, after a
    warm-up on the first few files (imports, catalogue, FFT plans)."""
    from speccat.workers import prepare_files

    names = [str(p) for p in paths]
    prepare_files(names[:5])
    c0 = time.process_time()
    prepare_files(names)
    return 1e3 * (time.process_time() - c0) / len(names)


def short_night() -> list[dict[str, Any]]:
    """A short night (30 files, like the sample night), best of 3: here start-up (imports,
    the catalogue, the worker processes) is most of what the user waits for."""
    with tempfile.TemporaryDirectory(prefix="speccat-bench-") as tmp:
        folder = Path(tmp) / "night"
        make_night(folder, 30)
        seconds = min(speccat_ingest(folder, Path(tmp) / f"a{i}.sqlite")[0] for i in range(3))
    return [{"figure": "ingest 30 files (a short night): wall time", "value": seconds, "unit": "s"}]


def run(quick: bool) -> list[dict[str, Any]]:
    sizes = [2000] if quick else [2000, 20000]  # the night size, also in CI
    rows: list[dict[str, Any]] = short_night()
    for n in sizes:
        with tempfile.TemporaryDirectory(prefix="speccat-bench-") as tmp:
            folder = Path(tmp) / "night"
            paths = make_night(folder, n)
            floor = floor_read(paths)
            seconds, peak_mb, summary = speccat_ingest(folder, Path(tmp) / "a.sqlite")
            subset = paths[: min(len(paths), 40 if quick else 200)]
            obvious = (
                obvious_script(subset, Path(tmp) / "obvious.sqlite") * len(paths) / len(subset)
            )
            writer_rate, writer_cpu_ms = writer_only(
                paths[0], Path(tmp) / "writer.sqlite", 300 if quick else 2000
            )
            worker_cpu_ms = worker_only(subset)
            per_file = summary["spectra"] / max(summary["files_stored"], 1)
            ceiling = (os.cpu_count() or 1) * 1e3 / (worker_cpu_ms + writer_cpu_ms) * per_file
            rows += [
                {
                    "figure": f"ingest {n} x 8192-ch spectra: spectra/s (cores={os.cpu_count()})",
                    "value": summary["spectra"] / seconds,
                    "unit": "spectra/s",
                },
                {
                    "figure": f"ingest {n}: time vs astropy read floor",
                    "value": seconds,
                    "unit": "s",
                    "baseline": floor,
                    "ratio": seconds / floor,
                },
                {
                    "figure": f"ingest {n}: obvious script time / speccat time",
                    "value": seconds,
                    "unit": "s",
                    "baseline": obvious,
                    "ratio": obvious / seconds,
                },
                {
                    "figure": f"ingest {n}: peak memory of one process",
                    "value": peak_mb,
                    "unit": "MB",
                },
                {
                    "figure": "ingest writer alone: files stored per second",
                    "value": writer_rate,
                    "unit": "files/s",
                },
                {
                    "figure": "ingest writer alone: CPU per file",
                    "value": writer_cpu_ms,
                    "unit": "ms",
                },
                {
                    "figure": "ingest worker alone: CPU per file (read, measure, identify, rows)",
                    "value": worker_cpu_ms,
                    "unit": "ms",
                },
                {
                    "figure": f"ingest ceiling: cores={os.cpu_count()} / (worker + writer CPU)",
                    "value": ceiling,
                    "unit": "spectra/s",
                },
                {
                    "figure": f"ingest {n}: lines found per spectrum",
                    "value": summary["detections"] / max(summary["spectra"], 1),
                    "unit": "lines",
                },
            ]
    return rows
