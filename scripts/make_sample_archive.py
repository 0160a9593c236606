"""Generate ``sample_archive/``: one invented night at an invented observatory.

Everything here is made up: the Quillmere Radio Observatory, its 24 m dish, its site, and every
source name. Rest frequencies come from speccat's built-in catalogue; the lines are Gaussians in
radio velocity (busy-function profiles for the galaxies) on a continuum with a polynomial
baseline and Gaussian noise from one fixed-seed generator, so the files are byte-identical on
every run. The topocentric file's frequencies are computed with astropy's SpectralCoord.

    python scripts/make_sample_archive.py [--out DIR] [--overwrite]

Writes the data files and README.md (the truth: every file's lines and velocities).
"""

from __future__ import annotations

import argparse
import math
import sys
import warnings
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from datetime import UTC, datetime, timedelta
from pathlib import Path

import numpy as np
from scipy.special import erf

from speccat.catalogue import builtin
from speccat.io.writers import write_csv, write_fits_image, write_fits_table
from speccat.model import C_KMS, Origin, Site, Spectrum

SEED = 20260314
TELESCOPE = "Quillmere 24m"
SITE = Site(lon_deg=-3.9171, lat_deg=52.6143, height_m=212.0)
NIGHT_START = datetime(2026, 3, 14, 18, 40, 0, tzinfo=UTC)
STEP = timedelta(minutes=17)
FOUR_LN2 = 4.0 * math.log(2.0)


@dataclass(frozen=True)
class Line:
    """One synthetic line: catalogue name, radio LSR (or declared-frame) velocity, FWHM, peak."""

    name: str
    v_kms: float
    fwhm_kms: float
    peak: float


@dataclass
class Entry:
    """What README.md says about one file."""

    file: str
    source: str
    kind: str
    truth: str


@dataclass
class Night:
    out: Path
    overwrite: bool
    rng: np.random.Generator = field(default_factory=lambda: np.random.default_rng(SEED))
    entries: list[Entry] = field(default_factory=list)
    clock: datetime = NIGHT_START

    def next_time(self) -> datetime:
        self.clock += STEP
        return self.clock

    def add(self, file: str, source: str, kind: str, truth: str) -> Path:
        self.entries.append(Entry(file, source, kind, truth))
        return self.out / file


def rest_hz(name: str) -> float:
    return builtin().by_name(name).rest_freq_hz


def grid(center_hz: float, n: int, df_hz: float) -> np.ndarray:
    """n channels of width df_hz, centred (to a whole Hz) on center_hz."""
    start = round(center_hz - df_hz * (n // 2))
    return start + np.arange(n) * df_hz


def gaussian_lines(freq_hz: np.ndarray, lines: Sequence[Line]) -> np.ndarray:
    """Sum of Gaussians in radio velocity about each line's rest frequency."""
    out = np.zeros_like(freq_hz)
    for line in lines:
        f0 = rest_hz(line.name)
        v = C_KMS * (f0 - freq_hz) / f0
        out += line.peak * np.exp(-FOUR_LN2 * ((v - line.v_kms) / line.fwhm_kms) ** 2)
    return out


def busy(v_kms: np.ndarray, vsys: float, w50: float, peak: float, horn: float) -> np.ndarray:
    """Double-horned HI profile: the busy function of Westmeier et al. 2014 (MNRAS 438, 1176,
    eq. 2) with equal edge steepness; ``horn`` sets how far the horns rise above the centre."""
    w = w50 / 2.0
    b = 0.35  # edge steepness, 1/(km/s)
    x = v_kms - vsys
    shape = (erf(b * (w + x)) + 1.0) * (erf(b * (w - x)) + 1.0) / 4.0 * (1.0 + horn * (x / w) ** 2)
    return peak * shape / (1.0 + horn)


def baseline(n: int, rng: np.random.Generator, scale: float) -> np.ndarray:
    x = np.linspace(-1.0, 1.0, n)
    c = rng.normal(0.0, scale, 3)
    return c[0] * x + c[1] * (x**2 - 1.0 / 3.0) + c[2] * x**3


def spectrum(
    night: Night,
    freq: np.ndarray,
    intensity: dict[str, np.ndarray],
    unit: str,
    source: str,
    pos: tuple[float, float],
    *,
    specsys: str = "LSRK",
    rest: float | None = None,
) -> Spectrum:
    return Spectrum(
        freq_hz=freq,
        intensity={k: v.astype(np.float32).astype(np.float64) for k, v in intensity.items()},
        intensity_unit=unit,
        source=source,
        origin=Origin("generated"),
        ra_deg=pos[0],
        dec_deg=pos[1],
        obs_time=night.next_time(),
        site=SITE,
        telescope=TELESCOPE,
        specsys=specsys,
        rest_freq_hz=rest,
    )


def describe(lines: Sequence[Line], unit: str, frame: str = "LSR") -> str:
    return "; ".join(
        f"{ln.name} v={ln.v_kms:+.1f} km/s ({frame}) FWHM {ln.fwhm_kms:g} km/s peak {ln.peak:g} {unit}"
        for ln in lines
    )


def simple(
    night: Night,
    file: str,
    source: str,
    pos: tuple[float, float],
    freq: np.ndarray,
    lines: Sequence[Line],
    *,
    unit: str,
    noise: float,
    continuum: float = 0.0,
    kind: str,
    extra: str = "",
    write: Callable[[Path, Spectrum], None] | None = None,
    rest: str | None = None,
    stokes_v: np.ndarray | None = None,
) -> Spectrum:
    """Continuum + lines + baseline + noise, written as a FITS image unless ``write`` says else."""
    rng = night.rng
    model = continuum + gaussian_lines(freq, lines) + baseline(freq.size, rng, noise * 2.0)
    data = {"I": model + rng.normal(0.0, noise, freq.size)}
    if stokes_v is not None:
        data["V"] = stokes_v + rng.normal(0.0, noise, freq.size)
    rest_freq = rest_hz(rest or lines[0].name)
    spec = spectrum(night, freq, data, unit, source, pos, rest=rest_freq)
    truth = describe(lines, unit) + (f"; continuum {continuum:g} {unit}" if continuum else "")
    truth += f"; rms {noise:g} {unit}" + (f"; {extra}" if extra else "")
    path = night.add(file, source, kind, truth)
    if write is None:
        write_fits_image(path, spec, dtype="float32", overwrite=night.overwrite)
    else:
        write(path, spec)
    return spec


def recombination(night: Night) -> None:
    """Ionized nebulae: H, He and C recombination lines at the same n."""
    ow = night.overwrite
    neb3, neb7, neb11, neb14 = (
        (271.3125, -17.8420),
        (283.9550, 1.2710),
        (296.4410, 22.6085),
        (312.0030, 41.9510),
    )
    band = grid(5.0085e9, 2048, 6103.515625)
    trip = [
        Line("H109a", 42.0, 24.0, 0.210),
        Line("He109a", 42.0, 19.0, 0.019),
        Line("C109a", 41.0, 6.0, 0.016),
        Line("H137b", 42.0, 25.0, 0.058),
    ]
    simple(
        night,
        "nebula03_h109a.fits",
        "QRO-Nebula 3",
        neb3,
        band,
        trip,
        unit="K",
        noise=0.0022,
        continuum=1.35,
        kind="FITS image, FREQ axis, LSRK",
    )
    pair = [Line("H109a", -15.5, 28.0, 0.095), Line("He109a", -15.5, 22.0, 0.0085)]
    simple(
        night,
        "nebula07_h109a.fits.gz",
        "QRO-Nebula 7",
        neb7,
        band,
        pair,
        unit="K",
        noise=0.0015,
        continuum=0.62,
        kind="gzipped FITS, image extension, descending FREQ axis",
        write=lambda p, s: write_fits_image(
            p, s, dtype="float32", extension=True, descending=True, overwrite=ow
        ),
    )
    xband = grid(8.5865e9, 2048, 12207.03125)
    trip91 = [
        Line("H91a", 63.0, 22.0, 0.33),
        Line("He91a", 63.0, 18.0, 0.031),
        Line("C91a", 62.0, 5.0, 0.020),
    ]
    simple(
        night,
        "nebula11_h91a_vrad.fits",
        "QRO-Nebula 11",
        neb11,
        xband,
        trip91,
        unit="K",
        noise=0.004,
        continuum=2.1,
        kind="FITS image, VRAD axis (km/s), LSRK",
        write=lambda p, s: write_fits_image(p, s, axis="VRAD", dtype="float32", overwrite=ow),
    )
    trip14 = [
        Line("H109a", -58.0, 31.0, 0.072),
        Line("He109a", -58.0, 24.0, 0.0068),
        Line("C109a", -59.0, 7.0, 0.0055),
    ]
    simple(
        night,
        "nebula14_h109a_velolsr.fits",
        "QRO-Nebula 14",
        neb14,
        band,
        trip14,
        unit="K",
        noise=0.0011,
        continuum=0.44,
        kind="FITS image, legacy VELO-LSR axis with VELREF=257",
        write=lambda p, s: write_fits_image(
            p,
            s,
            axis="VELO-LSR",
            dtype="float32",
            sky_axes=True,
            overwrite=ow,
            extra_cards={"SPECSYS": None},
        ),
    )
    csv_pair = [Line("H109a", 8.5, 21.0, 0.140), Line("He109a", 8.5, 17.0, 0.0125)]
    simple(
        night,
        "nebula07_h109a_night2.csv",
        "QRO-Nebula 7",
        (neb7[0] + 0.05, neb7[1]),
        band,
        csv_pair,
        unit="K",
        noise=0.0025,
        continuum=0.61,
        kind="CSV (freq_mhz, ta_k) with # metadata",
        extra="a second pointing, 3 arcmin east of the first (RA + 0.05 deg), where the gas moves at another velocity",
        write=lambda p, s: write_csv(p, s, intensity_column="ta_k", digits=7, overwrite=ow),
    )
    topocentric(night, band, neb3)
    rrl_table(night, band)
    rfi(night, band, neb11)


def topocentric(night: Night, band: np.ndarray, pos: tuple[float, float]) -> None:
    """QRO-Nebula 3 again, on a topocentric axis: the LSRK correction matters here."""
    import astropy.units as u
    from astropy.coordinates import EarthLocation, SkyCoord, SpectralCoord
    from astropy.time import Time

    when = night.next_time()
    loc = EarthLocation.from_geodetic(
        SITE.lon_deg * u.deg, SITE.lat_deg * u.deg, SITE.height_m * u.m
    )
    target = SkyCoord(pos[0] * u.deg, pos[1] * u.deg, frame="icrs")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        topo = SpectralCoord(band * u.Hz, observer=loc.get_itrs(obstime=Time(when)), target=target)
        lsrk = topo.with_observer_stationary_relative_to("lsrk").to_value(u.Hz)
    lines = [
        Line("H109a", 42.0, 24.0, 0.205),
        Line("He109a", 42.0, 19.0, 0.018),
        Line("C109a", 41.0, 6.0, 0.012),
    ]
    rng = night.rng
    model = 1.33 + gaussian_lines(lsrk, lines) + baseline(band.size, rng, 0.004)
    data = {"I": model + rng.normal(0.0, 0.0021, band.size)}
    spec = spectrum(
        night, band, data, "K", "QRO-Nebula 3", pos, specsys="TOPOCENT", rest=rest_hz("H109a")
    )
    spec = Spectrum(**{**spec.__dict__, "obs_time": when})
    factor = float(np.median(lsrk / band))
    v_shift = C_KMS * (1.0 - factor)
    truth = describe(lines, "K") + (
        f"; continuum 1.33 K; rms 0.0021 K; frequencies TOPOCENTRIC: f_lsrk = f_topo x "
        f"{factor:.9f} (astropy SpectralCoord), so a line at v_LSR appears near "
        f"v_LSR {-v_shift:+.2f} km/s on the file's own (topocentric) axis"
    )
    path = night.add(
        "nebula03_h109a_topo.fits",
        "QRO-Nebula 3",
        "FITS image, topocentric FREQ axis, OBSGEO-X/Y/Z, DATE-OBS, RA/DEC",
        truth,
    )
    loc_xyz = [float(c.to_value(u.m)) for c in loc.geocentric]
    cards = {
        "OBSGEO-X": loc_xyz[0],
        "OBSGEO-Y": loc_xyz[1],
        "OBSGEO-Z": loc_xyz[2],
        "SITELONG": None,
        "SITELAT": None,
        "SITEELEV": None,
    }
    write_fits_image(path, spec, dtype="float32", extra_cards=cards, overwrite=night.overwrite)


def rrl_table(night: Night, band: np.ndarray) -> None:
    """Four pointings across QRO-Nebula 11 as rows of one binary table."""
    rows = []
    truths = []
    for k, (dv, peak) in enumerate([(0.0, 0.19), (3.5, 0.15), (-4.0, 0.11), (7.0, 0.06)]):
        lines = [Line("H109a", 60.0 + dv, 23.0, peak), Line("He109a", 60.0 + dv, 18.0, peak * 0.09)]
        model = 1.8 - 0.3 * k + gaussian_lines(band, lines) + baseline(band.size, night.rng, 0.004)
        data = {"I": model + night.rng.normal(0.0, 0.0024, band.size)}
        pos = (296.4410 + 0.02 * k, 22.6085 - 0.015 * k)
        rows.append(spectrum(night, band, data, "K", "QRO-Nebula 11", pos, rest=rest_hz("H109a")))
        truths.append(f"row {k}: " + describe(lines, "K"))
    truth = " | ".join(truths) + "; rms 0.0024 K"
    path = night.add(
        "nebula11_h109a_scan.fits",
        "QRO-Nebula 11",
        "FITS binary table, 4 rows, per-row CRVAL1/CDELT1/OBJECT/RA/DEC",
        truth,
    )
    write_fits_table(path, rows, dtype="float32", overwrite=night.overwrite)


def rfi(night: Night, band: np.ndarray, pos: tuple[float, float]) -> None:
    rng = night.rng
    lines = [Line("H109a", 61.0, 23.0, 0.125), Line("He109a", 61.0, 18.0, 0.011)]
    model = 1.9 + gaussian_lines(band, lines) + baseline(band.size, rng, 0.004)
    spikes = [(211, 0.9), (212, 0.35), (1090, 0.55), (1641, 1.4), (1800, 0.25)]
    for chan, amp in spikes:
        model[chan] += amp
    data = {"I": model + rng.normal(0.0, 0.0024, band.size)}
    spec = spectrum(night, band, data, "K", "QRO-Nebula 11", pos, rest=rest_hz("H109a"))
    where = ", ".join(f"{band[c] / 1e6:.4f} MHz (+{a:g} K)" for c, a in spikes)
    truth = describe(lines, "K") + f"; continuum 1.9 K; rms 0.0024 K; RFI spikes at {where}"
    path = night.add("nebula11_h109a_rfi.fits", "QRO-Nebula 11", "FITS image with RFI", truth)
    write_fits_image(path, spec, dtype="float32", overwrite=night.overwrite)


def optical_v(freq: np.ndarray, f0: float) -> np.ndarray:
    return C_KMS * (f0 - freq) / freq


def galaxy(
    night: Night,
    file: str,
    n: int,
    cz: float,
    w50: float,
    peak: float,
    kind: str,
    *,
    axis: str = "FREQ",
    ripple: float = 0.0,
    write: str = "fits",
) -> None:
    """A galaxy's double-horned HI profile; velocities optical, barycentric (cz)."""
    f0 = rest_hz("HI")
    rng = night.rng
    pos = (140.0 + 7.31 * n % 97, 12.0 + (n * 3.7) % 40)
    centre = f0 / (1.0 + cz / C_KMS)
    if axis == "VOPT":  # channels evenly spaced in optical velocity
        dv = C_KMS * 3906.25 / centre * (1.0 + cz / C_KMS)
        v = cz + (np.arange(2048) - 1024) * dv
        freq = np.sort(f0 / (1.0 + v / C_KMS))
    else:
        freq = grid(centre, 2048, 3906.25)
    noise = 0.0025
    model = busy(optical_v(freq, f0), cz, w50, peak, 0.45) + baseline(freq.size, rng, 0.003)
    extra = ""
    if ripple:
        model += ripple * np.sin(2 * np.pi * (freq - freq[0]) / 0.9e6 + 0.7)
        extra = f"; baseline ripple {ripple:g} Jy amplitude, period 0.9 MHz (a standing wave)"
    data = {"I": model + rng.normal(0.0, noise, freq.size)}
    source = f"QRO-Galaxy {n}"
    spec = spectrum(night, freq, data, "Jy", source, pos, specsys="BARYCENT", rest=f0)
    truth = (
        f"HI cz={cz:.0f} km/s (optical, barycentric) W50 {w50:g} km/s horn peak {peak:g} Jy"
        f"; rms {noise:g} Jy{extra}"
    )
    path = night.add(file, source, kind, truth)
    ow = night.overwrite
    if write == "csv":
        write_csv(path, spec, intensity_column="flux_jy", digits=6, overwrite=ow)
    else:
        write_fits_image(path, spec, axis=axis, dtype="float32", overwrite=ow)


def galaxies(night: Night) -> None:
    galaxy(night, "galaxy21_hi.fits", 21, 3120.0, 280.0, 0.045, "FITS image, FREQ, BARYCENT")
    galaxy(
        night,
        "galaxy21_hi_ripple.fits",
        21,
        3120.0,
        280.0,
        0.045,
        "FITS image with a baseline ripple",
        ripple=0.004,
    )
    galaxy(
        night,
        "galaxy28_hi_felo.fits",
        28,
        4475.0,
        190.0,
        0.031,
        "FITS image, legacy FELO-HEL axis (optical velocity, linear in frequency)",
        axis="FELO-HEL",
    )
    galaxy(
        night, "galaxy34_hi.csv", 34, 2260.0, 350.0, 0.062, "CSV (freq_mhz, flux_jy)", write="csv"
    )
    galaxy(
        night,
        "galaxy40_hi_vopt.fits",
        40,
        5810.0,
        240.0,
        0.022,
        "FITS image, VOPT axis (channels even in optical velocity)",
        axis="VOPT",
    )
    galaxy(night, "galaxy52_hi.fit", 52, 1870.0, 150.0, 0.085, "FITS image, .fit suffix")
    f0 = rest_hz("HI")
    rows, truths = [], []
    for n, cz, w50, peak in (
        (45, 3650.0, 210.0, 0.028),
        (46, 3710.0, 320.0, 0.051),
        (47, 3580.0, 120.0, 0.019),
    ):
        freq = grid(f0 / (1.0 + cz / C_KMS), 1024, 7812.5)
        model = busy(optical_v(freq, f0), cz, w50, peak, 0.45)
        data = {"I": model + night.rng.normal(0.0, 0.003, freq.size)}
        pos = (178.25 + 0.1 * n, 20.4 + 0.05 * n)
        rows.append(
            spectrum(night, freq, data, "Jy", f"QRO-Galaxy {n}", pos, specsys="BARYCENT", rest=f0)
        )
        truths.append(
            f"row {len(rows) - 1} QRO-Galaxy {n}: HI cz={cz:.0f} km/s W50 {w50:g} km/s "
            f"peak {peak:g} Jy"
        )
    path = night.add(
        "galaxies45-47_hi.fits.gz",
        "QRO-Galaxy 45/46/47",
        "gzipped FITS binary table, 3 rows, each its own axis",
        " | ".join(truths) + "; rms 0.003 Jy",
    )
    write_fits_table(path, rows, dtype="float32", overwrite=night.overwrite)


def galactic_hi(night: Night) -> None:
    ow = night.overwrite
    band = grid(rest_hz("HI"), 1024, 2441.40625)
    comps = [Line("HI", -3.2, 8.5, 38.0), Line("HI", 7.5, 22.0, 14.0), Line("HI", -41.0, 12.0, 6.5)]
    simple(
        night,
        "field01_hi.fits",
        "QRO-Field 1",
        (84.5, 31.0),
        band,
        comps,
        unit="K",
        noise=0.12,
        kind="FITS image, FREQ, LSRK, Galactic HI (three components)",
    )
    comps2 = [Line("HI", 1.5, 6.0, 52.0), Line("HI", 12.0, 30.0, 9.0)]
    simple(
        night,
        "field02_hi_vrad.fits.gz",
        "QRO-Field 2",
        (97.25, 18.5),
        band,
        comps2,
        unit="K",
        noise=0.15,
        kind="gzipped FITS, VRAD axis in m/s, descending",
        write=lambda p, s: write_fits_image(
            p, s, axis="VRAD", descending=True, dtype="float32", overwrite=ow
        ),
    )
    comps3 = [Line("HI", -8.0, 11.0, 27.0), Line("HI", -62.0, 16.0, 4.2)]
    simple(
        night,
        "field03_hi.csv.gz",
        "QRO-Field 3",
        (101.0, 45.75),
        band,
        comps3,
        unit="K",
        noise=0.11,
        kind="gzipped CSV, vel_kms axis (radio, RESTFREQ in the metadata)",
        write=lambda p, s: write_csv(
            p, s, axis="vel_kms", intensity_column="tb_k", digits=6, overwrite=ow
        ),
    )
    comps4 = [Line("HI", 4.0, 9.0, 31.0)]
    simple(
        night,
        "field04_hi_fk5.fts",
        "QRO-Field 4",
        (66.1875, 26.25),
        band,
        comps4,
        unit="K",
        noise=0.13,
        kind="FITS image, .fts suffix, sexagesimal FK5 RA/DEC, MJD-OBS only",
        extra="position given as RA '04:24:45.0' DEC '+26:15:00' FK5 J2000",
        write=lambda p, s: write_fits_image(
            p,
            s,
            dtype="float32",
            overwrite=ow,
            extra_cards={
                "RA": "04:24:45.0",
                "DEC": "+26:15:00",
                "RADESYS": "FK5",
                "EQUINOX": 2000.0,
                "DATE-OBS": None,
                "TIMESYS": None,
                "MJD-OBS": _mjd(s.obs_time),
            },
        ),
    )


def _mjd(when: datetime | None) -> float:
    assert when is not None
    return (when - datetime(1858, 11, 17, tzinfo=UTC)).total_seconds() / 86400.0


def oh_zeeman(night: Night) -> None:
    """OH 1665/1667 absorption against a continuum with a Zeeman signature in Stokes V.

    Sign convention (speccat.physics.zeeman): V = RCP - LCP (IEEE/IAU 1973), B_los > 0 pointing
    away from the observer, V(nu) = -(Z B_los / 2) dI/dnu with Z = 3.27 Hz/uG (1665) and
    1.96 Hz/uG (1667) (Troland & Heiles 1982, ApJ 252, 179).
    """
    band = grid(1666.38e6, 2048, 1953.125)
    split = {"OH1665": 3.27, "OH1667": 1.96}
    ow = night.overwrite
    for file, source, pos, b_ug, scale, layout in (
        ("cloud05_oh_zeeman.fits", "QRO-Cloud 5", (275.8, -4.1), 150.0, 1.0, "IV"),
        ("cloud08_oh_rrll.fits", "QRO-Cloud 8", (281.4, 3.3), -90.0, 0.8, "RRLL"),
        ("cloud05_oh_zeeman.csv", "QRO-Cloud 5", (275.8, -4.1), 150.0, 1.0, "csv"),
    ):
        lines = [Line("OH1665", 6.3, 2.5, -0.22 * scale), Line("OH1667", 6.3, 2.5, -0.40 * scale)]
        v_model = np.zeros_like(band)
        for line in lines:
            f0 = rest_hz(line.name)
            v = C_KMS * (f0 - band) / f0
            prof = line.peak * np.exp(-FOUR_LN2 * ((v - line.v_kms) / line.fwhm_kms) ** 2)
            di_df = prof * 2 * FOUR_LN2 * (v - line.v_kms) / line.fwhm_kms**2 * C_KMS / f0
            v_model += -(split[line.name] * b_ug / 2.0) * di_df
        rng = night.rng
        cont = 4.2 * scale
        i_model = cont + gaussian_lines(band, lines) + baseline(band.size, rng, 0.004)
        noise = 0.002
        stokes_i = i_model + rng.normal(0.0, noise, band.size)
        stokes_v = v_model + rng.normal(0.0, noise, band.size)
        if layout == "RRLL":  # I = (RR + LL)/2, V = (RR - LL)/2
            data = {"RR": stokes_i + stokes_v, "LL": stokes_i - stokes_v}
        else:
            data = {"I": stokes_i, "V": stokes_v}
        spec = spectrum(night, band, data, "Jy", source, pos, rest=rest_hz("OH1667"))
        truth = describe(lines, "Jy") + (
            f"; continuum {cont:g} Jy; rms {noise:g} Jy per product; Zeeman B_los = {b_ug:+g} uG "
            "(V = -(Z B/2) dI/dnu, Z = 3.27/1.96 Hz/uG)"
        )
        kinds = {
            "IV": "FITS image with a STOKES axis (I, V)",
            "RRLL": "FITS image with a STOKES axis (RR, LL)",
            "csv": "CSV with i and v columns",
        }
        path = night.add(file, source, kinds[layout], truth)
        if layout == "csv":
            write_csv(path, spec, axis="freq_mhz", digits=7, overwrite=ow)
        else:
            write_fits_image(path, spec, dtype="float32", sky_axes=True, overwrite=ow)


def masers(night: Night) -> None:
    ow = night.overwrite
    h2o = grid(rest_hz("H2O22") * (1 - 5.0 / C_KMS), 1024, 24414.0625)
    spikes = [
        Line("H2O22", -12.4, 0.8, 85.0),
        Line("H2O22", -8.9, 0.6, 12.0),
        Line("H2O22", 3.1, 1.1, 135.0),
        Line("H2O22", 6.6, 0.7, 22.0),
        Line("H2O22", 17.8, 0.9, 6.5),
        Line("H2O22", 24.3, 0.6, 4.2),
    ]
    simple(
        night,
        "maser02_h2o.fits",
        "QRO-Maser 2",
        (301.7, 33.2),
        h2o,
        spikes,
        unit="Jy",
        noise=0.7,
        kind="FITS image, legacy FREQ-LSR axis, descending",
        write=lambda p, s: write_fits_image(
            p,
            s,
            axis="FREQ-LSR",
            descending=True,
            dtype="float32",
            overwrite=ow,
            extra_cards={"SPECSYS": None, "VELREF": 1},
        ),
    )
    meth = grid(rest_hz("CH3OH6.7") * (1 + 48.0 / C_KMS), 2048, 1953.125)
    spikes = [
        Line("CH3OH6.7", -51.2, 0.35, 48.0),
        Line("CH3OH6.7", -49.7, 0.4, 21.0),
        Line("CH3OH6.7", -47.9, 0.3, 9.0),
        Line("CH3OH6.7", -44.1, 0.45, 3.2),
    ]
    simple(
        night,
        "maser09_ch3oh.fits",
        "QRO-Maser 9",
        (288.9, 11.4),
        meth,
        spikes,
        unit="Jy",
        noise=0.25,
        kind="FITS image, FREQ, LSRK",
    )
    spikes = [
        Line("H2O22", -0.5, 0.9, 9.5),
        Line("H2O22", 1.2, 0.7, 4.4),
        Line("H2O22", 9.8, 1.0, 2.1),
    ]
    simple(
        night,
        "maser12_h2o.fits.gz",
        "QRO-Maser 12",
        (317.3, 47.6),
        h2o,
        spikes,
        unit="Jy",
        noise=0.3,
        kind="gzipped FITS image, FREQ, LSRK",
    )


def ammonia(night: Night) -> None:
    """NH3 (1,1) and (2,2) with hyperfine satellites; optically thin LTE ratios of the
    satellite groups to the main group, (1,1): inner 0.28, outer 0.22; (2,2): about 0.05
    (value from memory: Ho & Townes 1983, ARA&A 21, 239)."""
    band = grid(23.7088e9, 4096, 12207.03125)
    for file, source, pos, v, t11, t22, noise in (
        ("core04_nh3.fits", "QRO-Core 4", (83.95, 27.3), 8.4, 1.6, 0.62, 0.035),
        ("core06_nh3.fits.gz", "QRO-Core 6", (92.1, 21.6), -3.1, 0.75, 0.18, 0.03),
    ):
        lines = [Line("NH3(1,1)", v, 0.9, t11), Line("NH3(2,2)", v, 0.9, t22)]
        for sat, ratio in (("s-1", 0.28), ("s+1", 0.28), ("s-2", 0.22), ("s+2", 0.22)):
            lines.append(Line(f"NH3(1,1){sat}", v, 0.9, round(t11 * ratio, 4)))
        for sat in ("s-1", "s+1", "s-2", "s+2"):
            lines.append(Line(f"NH3(2,2){sat}", v, 0.9, round(t22 * 0.05, 4)))
        simple(
            night,
            file,
            source,
            pos,
            band,
            lines,
            unit="K",
            noise=noise,
            kind="FITS image, FREQ, LSRK, 4096 channels",
            rest="NH3(1,1)",
        )


def molecular(night: Night) -> None:
    ow = night.overwrite
    co = grid(rest_hz("CO(1-0)") * (1 - 8.6 / C_KMS), 1024, 97656.25)
    simple(
        night,
        "core04_co.fits",
        "QRO-Core 4",
        (83.95, 27.3),
        co,
        [Line("CO(1-0)", 8.6, 3.2, 7.8), Line("CO(1-0)", 9.5, 12.0, 1.1)],
        unit="K",
        noise=0.18,
        kind="FITS image, FREQ, LSRK",
        extra="the broad component is an outflow wing",
    )
    hcop = grid(rest_hz("HCO+(1-0)") * (1 - 8.6 / C_KMS), 1024, 48828.125)
    simple(
        night,
        "core04_hcop.fits",
        "QRO-Core 4",
        (83.95, 27.3),
        hcop,
        [Line("HCO+(1-0)", 8.4, 2.4, 2.1)],
        unit="K",
        noise=0.06,
        kind="FITS image, FREQ, LSRK",
    )
    cs = grid(rest_hz("CS(2-1)") * (1 + 3.0 / C_KMS), 1024, 48828.125)
    simple(
        night,
        "core06_cs.csv",
        "QRO-Core 6",
        (92.1, 21.6),
        cs,
        [Line("CS(2-1)", -3.0, 1.8, 0.85)],
        unit="K",
        noise=0.05,
        kind="CSV, vrad_kms axis",
        write=lambda p, s: write_csv(
            p, s, axis="vrad_kms", intensity_column="tmb_k", digits=6, overwrite=ow
        ),
    )
    trip = [
        Line("H110a", -22.0, 26.0, 0.16),
        Line("He110a", -22.0, 20.0, 0.014),
        Line("C110a", -23.0, 6.5, 0.009),
    ]
    band = grid(rest_hz("H110a") * (1 + 22.0 / C_KMS) + 1.5e6, 2048, 6103.515625)
    simple(
        night,
        "nebula18_h110a.fit",
        "QRO-Nebula 18",
        (305.6, 38.8),
        band,
        trip,
        unit="K",
        noise=0.0019,
        continuum=0.95,
        kind="FITS image, .fit suffix, FREQ, LSRK",
    )


def broken(night: Night) -> None:
    """Two deliberately broken files."""
    import io

    from astropy.io import fits

    buf = io.BytesIO()
    data = night.rng.normal(0.0, 1.0, 2048).astype(np.float32)
    hdu = fits.PrimaryHDU(data=data)
    hdu.header.update(
        {
            "CTYPE1": "FREQ",
            "CRVAL1": 5.0e9,
            "CDELT1": 6103.515625,
            "CRPIX1": 1.0,
            "OBJECT": "QRO-Nebula 3",
        }
    )
    hdu.writeto(buf)
    _write_bytes(
        night,
        "broken_truncated.fits",
        buf.getvalue()[: 2880 + 3000],
        "QRO-Nebula 3",
        "BROKEN: FITS file cut off inside its data",
        "reading must fail with 'file truncated'",
    )
    text = "# OBJECT = 'QRO-Nebula 7'\nfreq_mhz,weight\n" + "".join(
        f"{5000.0 + 0.01 * k:.2f},1\n" for k in range(64)
    )
    _write_bytes(
        night,
        "broken_no_intensity.csv",
        text.encode(),
        "QRO-Nebula 7",
        "BROKEN: CSV without an intensity column",
        "reading must fail with 'no intensity column'",
    )


def _write_bytes(
    night: Night, file: str, content: bytes, source: str, kind: str, truth: str
) -> None:
    path = night.add(file, source, kind, truth)
    if path.exists() and not night.overwrite:
        raise SystemExit(f"{path}: exists (use --overwrite)")
    path.write_bytes(content)


README_HEAD = """# The sample night

One invented night, 2026-03-14/15 (UTC), at the invented **Quillmere Radio Observatory**: a
24 m dish (`TELESCOP = 'Quillmere 24m'`) at longitude {lon}°, latitude {lat}°, {h} m above
the WGS84 ellipsoid. Nothing here is real: the observatory, the site, the dish and every source
(`QRO-Nebula n`, `QRO-Galaxy n`, `QRO-Field n`, `QRO-Cloud n`, `QRO-Maser n`, `QRO-Core n`)
are made up. The observers spent the night on recombination lines of ionized nebulae, 21 cm
profiles of galaxies, Galactic HI, OH absorption with a Zeeman signature, water and methanol
masers, ammonia and a few molecular lines; one scan caught RFI, one a baseline ripple, and two
files came back broken.

The files are synthetic, generated with a fixed seed by `scripts/make_sample_archive.py`
(rest frequencies from speccat's built-in catalogue). Regenerate byte-identically with

    python scripts/make_sample_archive.py --out sample_archive --overwrite

Conventions: velocities are LSRK, radio convention, unless marked otherwise; galaxies' cz are
optical, barycentric. Lines are Gaussians in velocity (busy-function profiles for galaxies);
peaks are above the continuum (negative for absorption). Each file also carries a small random
polynomial baseline. Observation times step by 17 minutes from 18:57 UTC.

| file | source | format | truth |
|---|---|---|---|
"""


def write_readme(night: Night) -> None:
    head = README_HEAD.format(lon=SITE.lon_deg, lat=SITE.lat_deg, h=SITE.height_m)
    rows = [f"| `{e.file}` | {e.source} | {e.kind} | {e.truth} |" for e in night.entries]
    (night.out / "README.md").write_text(head + "\n".join(rows) + "\n", encoding="utf-8")


def main(argv: Sequence[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description="Generate the invented sample night.")
    parser.add_argument(
        "--out", default=str(Path(__file__).resolve().parent.parent / "sample_archive")
    )
    parser.add_argument("--overwrite", action="store_true", help="replace existing files")
    args = parser.parse_args(argv)
    out = Path(args.out)
    out.mkdir(parents=True, exist_ok=True)
    night = Night(out, args.overwrite)
    for part in (
        recombination,
        galaxies,
        galactic_hi,
        oh_zeeman,
        masers,
        ammonia,
        molecular,
        broken,
    ):
        part(night)
    write_readme(night)
    total = sum((out / e.file).stat().st_size for e in night.entries)
    print(f"{len(night.entries)} files, {total / 1e6:.2f} MB in {out}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
