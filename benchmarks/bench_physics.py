"""Physics figures: LSRK correction vs astropy SpectralCoord, kinematic distances, Zeeman, stacking."""

from __future__ import annotations

import time
import warnings
from collections.abc import Callable
from datetime import datetime, timedelta
from typing import Any

import numpy as np

from speccat.model import Origin, Site, Spectrum


def _per_call_ms(fn: Callable[[int], Any], n: int) -> float:
    t0 = time.perf_counter()
    for k in range(n):
        fn(k)
    return (time.perf_counter() - t0) / n * 1e3


def _spectra(n: int) -> list[Spectrum]:
    rng = np.random.default_rng(0)
    start = datetime(2024, 1, 1)
    return [
        Spectrum(
            np.array([1.4e9]),
            {"I": np.zeros(1)},
            "K",
            "invented",
            Origin("bench"),
            ra_deg=float(rng.uniform(0, 360)),
            dec_deg=float(rng.uniform(-60, 60)),
            obs_time=start + timedelta(minutes=7 * k),
            site=Site(10.0, 40.0, 500.0),
            specsys="TOPOCENT",
        )
        for k in range(n)
    ]


def _astropy_lsrk_ms(spectra: list[Spectrum]) -> float:
    import astropy.units as u
    from astropy.coordinates import EarthLocation, SkyCoord, SpectralCoord
    from astropy.time import Time
    from astropy.utils import iers

    iers.conf.auto_download = False
    iers.conf.auto_max_age = None

    def one(k: int) -> None:
        s = spectra[k]
        assert s.site is not None and s.ra_deg is not None and s.dec_deg is not None
        loc = EarthLocation.from_geodetic(s.site.lon_deg * u.deg, s.site.lat_deg * u.deg,
                                          s.site.height_m * u.m)  # fmt: skip
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            sc = SpectralCoord(1.4e9 * u.Hz, observer=loc.get_itrs(Time(s.obs_time)),
                               target=SkyCoord(s.ra_deg * u.deg, s.dec_deg * u.deg))  # fmt: skip
            sc.with_observer_stationary_relative_to("lsrk")

    one(0)  # warm-up: IERS tables, transform graph
    return _per_call_ms(one, len(spectra))


def run(quick: bool) -> list[dict[str, Any]]:
    from speccat.physics import doppler, kinematic, stacking, zeeman

    rows: list[dict[str, Any]] = []
    n = 200 if quick else 2000
    spectra = _spectra(n)
    doppler.lsrk_correction(spectra[0])
    ours = _per_call_ms(lambda k: doppler.lsrk_correction(spectra[k]), n)
    ref = _astropy_lsrk_ms(spectra[: 5 if quick else 50])
    rows.append({"figure": "LSRK correction per spectrum (TOPOCENT, uncached)", "value": ours,
                 "unit": "ms", "baseline": ref, "ratio": ref / ours})  # fmt: skip
    for name in kinematic.CURVES:
        ms = _per_call_ms(lambda k, c=name: kinematic.kinematic_distance(
            30.0, 0.0, 20.0 + k % 50, 3.0, c), 20 if quick else 200)  # fmt: skip
        rows.append({"figure": f"kinematic distance + 4000-draw MC ({name})", "value": ms,
                     "unit": "ms"})  # fmt: skip
    m = 2000 if quick else 20000
    freq = 1.6e9 + 150.0 * np.arange(256)
    rng = np.random.default_rng(1)
    prof = -np.exp(-4 * np.log(2) * ((freq - freq[128]) / 2500.0) ** 2)
    i = prof + rng.normal(0, 0.005, (m, 256))
    v = rng.normal(0, 0.005, (m, 256))
    t0 = time.perf_counter()
    zeeman.fit_zeeman_many(freq, i, v, slice(8, 248), 1.96)
    batch = (time.perf_counter() - t0) / m * 1e3
    single = _per_call_ms(lambda k: zeeman.fit_zeeman(freq, i[k], v[k], slice(8, 248), 1.96), 50)
    rows.append({"figure": "Zeeman fit, 256 channels, batched per spectrum", "value": batch,
                 "unit": "ms", "baseline": single, "ratio": single / batch})  # fmt: skip
    segs = 16
    vs = [np.linspace(-300, 300, 4096) + rng.uniform(0, 0.1) for _ in range(segs)]
    ys = [rng.normal(0, 1, 4096) for _ in range(segs)]
    ms = _per_call_ms(lambda k: stacking.stack(vs, ys, [1.0] * segs), 10)
    rows.append({"figure": "stack 16 segments x 4096 channels", "value": ms, "unit": "ms"})
    return rows
