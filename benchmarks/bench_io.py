"""Read rate of speccat.io against plain astropy (``fits.open`` + header + data), in files/s.

Files are written once into a temporary folder (4,096-channel float32 spectra like a night's
output): plain FITS images, images with a STOKES axis and degenerate sky axes, gzipped images,
4-row binary tables and CSV. The baseline for FITS is the least a script must do with astropy:
open with ``memmap=False``, take the header and the data array (no axis, no metadata); speccat
does that plus the frequency axis, Stokes products, time, site and position.
"""

from __future__ import annotations

import tempfile
import time
from collections.abc import Callable
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

import numpy as np

from speccat.io import read
from speccat.io.writers import write_csv, write_fits_image, write_fits_table
from speccat.model import Origin, Site, Spectrum


def _spectrum(k: int, products: tuple[str, ...]) -> Spectrum:
    rng = np.random.default_rng(k)
    n = 4096
    freq = 5.0e9 + np.arange(n) * 6103.515625
    return Spectrum(
        freq_hz=freq,
        intensity={p: rng.normal(size=n).astype(np.float32).astype(float) for p in products},
        intensity_unit="K",
        source=f"Bench {k}",
        origin=Origin("bench"),
        ra_deg=120.0 + k * 0.01,
        dec_deg=-10.0,
        obs_time=datetime(2026, 3, 14, 20, 0, tzinfo=UTC),
        site=Site(-3.9, 52.6, 212.0),
        telescope="Bench dish",
        specsys="LSRK",
        rest_freq_hz=5.008922e9,
    )


def _astropy_baseline(path: Path) -> Any:
    from astropy.io import fits

    with fits.open(path, memmap=False) as hdul:
        for hdu in hdul:
            _ = hdu.header
            data = hdu.data
    return data


def _rate(paths: list[Path], reader: Callable[[Path], Any], repeat: int) -> float:
    """Best-of-``repeat`` files per second over ``paths``."""
    best = float("inf")
    for _ in range(repeat):
        t0 = time.perf_counter()
        for p in paths:
            reader(p)
        best = min(best, time.perf_counter() - t0)
    return len(paths) / best


def run(quick: bool) -> list[dict[str, Any]]:
    n_files = 40 if quick else 400
    repeat = 2 if quick else 3
    rows: list[dict[str, Any]] = []
    with tempfile.TemporaryDirectory() as tmp:
        d = Path(tmp)
        kinds: dict[str, list[Path]] = {k: [] for k in ("image", "stokes", "gzip", "table", "csv")}
        for k in range(n_files):
            s, sv = _spectrum(k, ("I",)), _spectrum(k, ("I", "V"))
            kinds["image"].append(d / f"i{k}.fits")
            write_fits_image(kinds["image"][-1], s, dtype="float32")
            kinds["stokes"].append(d / f"s{k}.fits")
            write_fits_image(kinds["stokes"][-1], sv, dtype="float32", sky_axes=True)
            kinds["gzip"].append(d / f"g{k}.fits.gz")
            write_fits_image(kinds["gzip"][-1], s, dtype="float32")
            if k % 4 == 0:
                kinds["table"].append(d / f"t{k}.fits")
                write_fits_table(kinds["table"][-1], [s] * 4, dtype="float32")
            if k % 4 == 1:
                kinds["csv"].append(d / f"c{k}.csv")
                write_csv(kinds["csv"][-1], s, digits=7)
        read(kinds["image"][0])  # imports and caches outside the timing
        _astropy_baseline(kinds["image"][0])
        for kind in ("image", "stokes", "gzip", "table"):
            ours = _rate(kinds[kind], read, repeat)
            base = _rate(kinds[kind], _astropy_baseline, repeat)
            rows.append(
                {
                    "figure": f"read 4096-ch {kind} FITS (vs fits.open+data)",
                    "value": round(ours, 1),
                    "unit": "files/s",
                    "baseline": round(base, 1),
                    "ratio": round(ours / base, 2),
                }
            )
        rows.append(
            {
                "figure": "read 4096-row CSV",
                "value": round(_rate(kinds["csv"], read, repeat), 1),
                "unit": "files/s",
            }
        )
    return rows


if __name__ == "__main__":
    for row in run(quick=True):
        print(row)
