"""Speed of the reduction engine: one 8,192-channel spectrum with three lines, and one line fit
side by side with astropy.modeling (Gaussian1D + TRFLSQFitter) on the same data.

Prints figures only (no asserts). Wall-clock medians and per-process CPU medians are both
given because the machine may be shared.
"""

from __future__ import annotations

import time
import warnings
from collections.abc import Callable

import numpy as np

from speccat.reduce import measure
from speccat.reduce.fit import fit_components

FWHM = 2.0 * np.sqrt(2.0 * np.log(2.0))


def _spectrum(seed: int = 3) -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(seed)
    n = 8192
    chan = np.arange(n, dtype=float)
    freq = 1.42e9 + 1.0e3 * chan
    y = rng.normal(0.0, 1.0, n) + 2.0 + 0.5 * ((chan - 4000.0) / 4000.0) ** 2
    for amp, cen, fwhm in ((10.0, 1000.3, 10.0), (-8.0, 4000.7, 30.0), (20.0, 6000.1, 5.0)):
        y += amp * np.exp(-0.5 * ((chan - cen) / (fwhm / FWHM)) ** 2)
    return freq, y


def _times(fn: Callable[[], object], repeat: int) -> tuple[float, float]:
    """Median wall and median CPU time of ``fn`` in ms."""
    fn()
    wall, cpu = [], []
    for _ in range(repeat):
        t0, c0 = time.perf_counter(), time.process_time()
        fn()
        wall.append(time.perf_counter() - t0)
        cpu.append(time.process_time() - c0)
    return float(np.median(wall) * 1e3), float(np.median(cpu) * 1e3)


def _night_row(n_files: int) -> dict:
    """Mean CPU per spectrum over the ingest benchmark's night (H/He pair on a sloped
    baseline, 8192 channels), detect_sigma 5.3 as ingest uses."""
    import tempfile
    from pathlib import Path

    from benchmarks.bench_ingest import make_night
    from speccat.io import read
    from speccat.reduce import ReduceSettings

    settings = ReduceSettings(detect_sigma=5.3)
    with tempfile.TemporaryDirectory() as tmp:
        spectra = [s for path in make_night(Path(tmp), n_files) for s in read(path)]
    c0 = time.process_time()
    for s in spectra:
        measure(s.freq_hz, s.intensity["I"], settings)
    cpu = (time.process_time() - c0) / max(len(spectra), 1) * 1e3
    return {
        "figure": f"reduce bench night, {len(spectra)} x 8192 channels (mean CPU per spectrum)",
        "value": cpu,
        "unit": "ms",
        # before this pass: 44.7 ms (commit 7e01d6a, same machine, CPU, 20 spectra)
        "baseline": 44.7,
        "ratio": cpu / 44.7,
    }


def run(quick: bool) -> list[dict]:
    from astropy.modeling import fitting, models

    repeat = 30 if quick else 200
    freq, y = _spectrum()
    wall, cpu = _times(lambda: measure(freq, y), repeat)
    lines = len(measure(freq, y).lines)
    rows: list[dict] = [
        {
            "figure": f"reduce 8192-channel spectrum, {lines} lines (median wall)",
            "value": wall,
            "unit": "ms",
            "baseline": 3.0,
            "ratio": wall / 3.0,
        },
        {"figure": "reduce 8192-channel spectrum (median CPU)", "value": cpu, "unit": "ms"},
        _night_row(12 if quick else 60),
    ]
    rng = np.random.default_rng(5)
    x = np.arange(96.0)
    data = 5.0 * np.exp(-0.5 * ((x - 48.3) / 4.0) ** 2) + rng.normal(0.0, 0.3, x.size)
    p0 = np.array([[4.0, 47.0, np.log(5.0)]])
    ours, ours_cpu = _times(lambda: fit_components(x, data, p0, "gaussian"), repeat * 5)
    fitter = fitting.TRFLSQFitter()

    def reference() -> object:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            return fitter(models.Gaussian1D(4.0, 47.0, 5.0), x, data)

    ref, ref_cpu = _times(reference, repeat * 2)
    rows += [
        {"figure": "one Gaussian line fit, speccat (median wall)", "value": ours, "unit": "ms"},
        {
            "figure": "one Gaussian line fit, astropy Gaussian1D+TRFLSQFitter (median wall)",
            "value": ref,
            "unit": "ms",
            "baseline": ours,
            "ratio": ref / ours,
        },
        {
            "figure": "astropy fit time / speccat fit time (CPU)",
            "value": ref_cpu / ours_cpu,
            "unit": "x",
        },
        {
            "figure": "astropy fit per line / speccat full reduction per line (wall)",
            "value": ref / (wall / max(lines, 1)),
            "unit": "x",
        },
    ]
    return rows


if __name__ == "__main__":
    for row in run(quick=True):
        print(f"{row['figure']:<72} {row['value']:10.3f} {row['unit']}")
