"""Generate ``sample_archive/``: one invented night at an invented observatory.

Everything here is made up: the Quillmere Radio Observatory, its 24 m dish, its site, and every
source name and position. Rest frequencies come from speccat's built-in catalogue; lines are
Gaussians in radio velocity (busy-function profiles for the galaxies) on a continuum with a
small polynomial baseline and Gaussian noise, all from one fixed-seed generator, so the files
are byte-identical on every run. The topocentric file's frequencies come from astropy's
SpectralCoord.

    python scripts/make_sample_archive.py [--out DIR] [--overwrite]

Writes the data files and README.md (the truth: every file's lines and velocities).
"""

from __future__ import annotations

import argparse
import io
import math
import sys
import warnings
from collections.abc import Sequence
from dataclasses import dataclass, field, replace
from datetime import UTC, datetime, timedelta
from pathlib import Path
from typing import Any

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

#: Invented sources and their invented ICRS positions (deg).
SOURCES = {
    "QRO-Nebula 3": (271.3125, -17.8420),
    "QRO-Nebula 7": (283.9550, 1.2710),
    "QRO-Nebula 7 east": (284.0050, 1.2710),
    "QRO-Nebula 11": (296.4410, 22.6085),
    "QRO-Nebula 14": (312.0030, 41.9510),
    "QRO-Nebula 18": (305.6000, 38.8000),
    "QRO-Field 1": (84.5000, 31.0000),
    "QRO-Field 2": (97.2500, 18.5000),
    "QRO-Field 3": (101.0000, 45.7500),
    "QRO-Field 4": (66.1875, 26.2500),
    "QRO-Cloud 5": (275.8000, -4.1000),
    "QRO-Cloud 8": (281.4000, 3.3000),
    "QRO-Maser 2": (301.7000, 33.2000),
    "QRO-Maser 9": (288.9000, 11.4000),
    "QRO-Maser 12": (317.3000, 47.6000),
    "QRO-Core 4": (83.9500, 27.3000),
    "QRO-Core 6": (92.1000, 21.6000),
}


@dataclass(frozen=True)
class Line:
    """One synthetic line: catalogue name, LSRK radio velocity, FWHM (km/s), signed peak."""

    name: str
    v_kms: float
    fwhm_kms: float
    peak: float


@dataclass(frozen=True)
class Obs:
    """One single-product file of Gaussian lines: band = (line to centre on, velocity offset
    of the band centre km/s, channels, channel width Hz); ``fits``/``csv`` are writer options."""

    file: str
    source: str
    band: tuple[str, float, int, float]
    lines: tuple[Line, ...]
    unit: str
    noise: float
    continuum: float
    kind: str
    fits: dict[str, Any] = field(default_factory=dict)
    csv: dict[str, Any] | None = None
    note: str = ""


def nh3(v: float, t11: float, t22: float) -> tuple[Line, ...]:
    """NH3 (1,1) and (2,2) with hyperfine satellite groups at the optically thin LTE ratios to
    the main group, (1,1) inner 0.28, outer 0.22, (2,2) about 0.05 (value from memory: Ho &
    Townes 1983, ARA&A 21, 239)."""
    out = [Line("NH3(1,1)", v, 0.9, t11), Line("NH3(2,2)", v, 0.9, t22)]
    for sat, ratio in (("s-1", 0.28), ("s+1", 0.28), ("s-2", 0.22), ("s+2", 0.22)):
        out.append(Line(f"NH3(1,1){sat}", v, 0.9, round(t11 * ratio, 4)))
        out.append(Line(f"NH3(2,2){sat}", v, 0.9, round(t22 * 0.05, 4)))
    return tuple(out)


L = Line
C5 = ("H109a", 25.0, 2048, 6103.515625)  # 5002.3-5014.7 MHz: H/He/C 109α and H137β
HI = ("HI", 0.0, 1024, 2441.40625)
# fmt: off
GAUSSIAN_FILES = [
    Obs("nebula03_h109a.fits", "QRO-Nebula 3", C5,
        (L("H109a", 42.0, 24.0, 0.210), L("He109a", 42.0, 19.0, 0.019),
         L("C109a", 41.0, 6.0, 0.016), L("H137b", 42.0, 25.0, 0.058)),
        "K", 0.0022, 1.35, "FITS image, FREQ axis, LSRK"),
    Obs("nebula07_h109a.fits.gz", "QRO-Nebula 7", C5,
        (L("H109a", -15.5, 28.0, 0.095), L("He109a", -15.5, 22.0, 0.0085)),
        "K", 0.0015, 0.62, "gzipped FITS, image extension, descending FREQ axis",
        fits={"extension": True, "descending": True}),
    Obs("nebula11_h91a_vrad.fits", "QRO-Nebula 11", ("H91a", -150.0, 2048, 12207.03125),
        (L("H91a", 63.0, 22.0, 0.33), L("He91a", 63.0, 18.0, 0.031), L("C91a", 62.0, 5.0, 0.020)),
        "K", 0.004, 2.1, "FITS image, VRAD axis (km/s), LSRK", fits={"axis": "VRAD"}),
    Obs("nebula14_h109a_velolsr.fits", "QRO-Nebula 14", C5,
        (L("H109a", -58.0, 31.0, 0.072), L("He109a", -58.0, 24.0, 0.0068),
         L("C109a", -59.0, 7.0, 0.0055)),
        "K", 0.0011, 0.44, "FITS image, legacy VELO-LSR axis (VELREF=257), degenerate RA/DEC axes",
        fits={"axis": "VELO-LSR", "sky_axes": True, "extra_cards": {"SPECSYS": None}}),
    Obs("nebula07_h109a_night2.csv", "QRO-Nebula 7 east", C5,
        (L("H109a", 8.5, 21.0, 0.140), L("He109a", 8.5, 17.0, 0.0125)),
        "K", 0.0025, 0.61, "CSV (freq_mhz, ta_k) with # metadata",
        csv={"intensity_column": "ta_k", "digits": 7},
        note="a second pointing 3 arcmin east of Nebula 7's centre, where the gas moves at +8.5"),
    Obs("nebula18_h110a.fit", "QRO-Nebula 18", ("H110a", -90.0, 2048, 6103.515625),
        (L("H110a", -22.0, 26.0, 0.16), L("He110a", -22.0, 20.0, 0.014),
         L("C110a", -23.0, 6.5, 0.009)),
        "K", 0.0019, 0.95, "FITS image, .fit suffix, FREQ, LSRK"),
    Obs("field01_hi.fits", "QRO-Field 1", HI,
        (L("HI", -3.2, 8.5, 38.0), L("HI", 7.5, 22.0, 14.0), L("HI", -41.0, 12.0, 6.5)),
        "K", 0.12, 0.0, "FITS image, FREQ, LSRK, Galactic HI (three components)"),
    Obs("field02_hi_vrad.fits.gz", "QRO-Field 2", HI,
        (L("HI", 1.5, 6.0, 52.0), L("HI", 12.0, 30.0, 9.0)),
        "K", 0.15, 0.0, "gzipped FITS, VRAD axis in m/s, descending",
        fits={"axis": "VRAD", "descending": True}),
    Obs("field03_hi.csv.gz", "QRO-Field 3", HI,
        (L("HI", -8.0, 11.0, 27.0), L("HI", -62.0, 16.0, 4.2)),
        "K", 0.11, 0.0, "gzipped CSV, vel_kms axis (radio, RESTFREQ in the metadata)",
        csv={"axis": "vel_kms", "intensity_column": "tb_k", "digits": 6}),
    Obs("field04_hi_fk5.fts", "QRO-Field 4", HI, (L("HI", 4.0, 9.0, 31.0),),
        "K", 0.13, 0.0, "FITS image, .fts suffix, sexagesimal FK5 RA/DEC, MJD-OBS (no DATE-OBS)",
        fits={"extra_cards": {"RA": "04:24:45.0", "DEC": "+26:15:00", "RADESYS": "FK5",
                              "EQUINOX": 2000.0, "DATE-OBS": None, "TIMESYS": None}},
        note="position written as RA '04:24:45.0' DEC '+26:15:00' FK5 J2000"),
    Obs("maser02_h2o.fits", "QRO-Maser 2", ("H2O22", 5.0, 1024, 24414.0625),
        (L("H2O22", -12.4, 0.8, 85.0), L("H2O22", -8.9, 0.6, 12.0), L("H2O22", 3.1, 1.1, 135.0),
         L("H2O22", 6.6, 0.7, 22.0), L("H2O22", 17.8, 0.9, 6.5), L("H2O22", 24.3, 0.6, 4.2)),
        "Jy", 0.7, 0.0, "FITS image, legacy FREQ-LSR axis (VELREF=1), descending",
        fits={"axis": "FREQ-LSR", "descending": True,
              "extra_cards": {"SPECSYS": None, "VELREF": 1}}),
    Obs("maser09_ch3oh.fits", "QRO-Maser 9", ("CH3OH6.7", -48.0, 2048, 1953.125),
        (L("CH3OH6.7", -51.2, 0.35, 48.0), L("CH3OH6.7", -49.7, 0.4, 21.0),
         L("CH3OH6.7", -47.9, 0.3, 9.0), L("CH3OH6.7", -44.1, 0.45, 3.2)),
        "Jy", 0.25, 0.0, "FITS image, FREQ, LSRK"),
    Obs("maser12_h2o.fits.gz", "QRO-Maser 12", ("H2O22", 5.0, 1024, 24414.0625),
        (L("H2O22", -0.5, 0.9, 9.5), L("H2O22", 1.2, 0.7, 4.4), L("H2O22", 9.8, 1.0, 2.1)),
        "Jy", 0.3, 0.0, "gzipped FITS image, FREQ, LSRK"),
    Obs("core04_nh3.fits", "QRO-Core 4", ("NH3(1,1)", -180.0, 4096, 12207.03125),
        nh3(8.4, 1.6, 0.62), "K", 0.035, 0.0, "FITS image, FREQ, LSRK, 4096 channels"),
    Obs("core06_nh3.fits.gz", "QRO-Core 6", ("NH3(1,1)", -180.0, 4096, 12207.03125),
        nh3(-3.1, 0.75, 0.18), "K", 0.03, 0.0, "gzipped FITS image, FREQ, LSRK, 4096 channels"),
    Obs("core04_co.fits", "QRO-Core 4", ("CO(1-0)", 8.6, 1024, 97656.25),
        (L("CO(1-0)", 8.6, 3.2, 7.8), L("CO(1-0)", 9.5, 12.0, 1.1)),
        "K", 0.18, 0.0, "FITS image, FREQ, LSRK", note="the broad CO component is an outflow wing"),
    Obs("core04_hcop.fits", "QRO-Core 4", ("HCO+(1-0)", 8.6, 1024, 48828.125),
        (L("HCO+(1-0)", 8.4, 2.4, 2.1),), "K", 0.06, 0.0, "FITS image, FREQ, LSRK"),
    Obs("core06_cs.csv", "QRO-Core 6", ("CS(2-1)", -3.0, 1024, 48828.125),
        (L("CS(2-1)", -3.0, 1.8, 0.85),), "K", 0.05, 0.0, "CSV, vrad_kms axis",
        csv={"axis": "vrad_kms", "intensity_column": "tmb_k", "digits": 6}),
]
# (file, galaxy number, cz km/s, W50 km/s, horn peak Jy, kind, writer options)
GALAXIES = [
    ("galaxy21_hi.fits", 21, 3120.0, 280.0, 0.045, "FITS image, FREQ, BARYCENT", {}),
    ("galaxy21_hi_ripple.fits", 21, 3120.0, 280.0, 0.045, "FITS image with a baseline ripple",
     {"ripple": 0.004}),
    ("galaxy28_hi_felo.fits", 28, 4475.0, 190.0, 0.031,
     "FITS image, legacy FELO-HEL axis (optical velocity, linear in frequency)",
     {"axis": "FELO-HEL"}),
    ("galaxy34_hi.csv", 34, 2260.0, 350.0, 0.062, "CSV (freq_mhz, flux_jy)", {"csv": True}),
    ("galaxy40_hi_vopt.fits", 40, 5810.0, 240.0, 0.022,
     "FITS image, VOPT axis (channels even in optical velocity)", {"axis": "VOPT"}),
    ("galaxy52_hi.fit", 52, 1870.0, 150.0, 0.085, "FITS image, .fit suffix", {}),
]
# fmt: on


@dataclass
class Night:
    """The generator's state: output folder, the one random generator, the clock, the log."""

    out: Path
    overwrite: bool
    rng: np.random.Generator = field(default_factory=lambda: np.random.default_rng(SEED))
    entries: list[tuple[str, str, str, str]] = field(default_factory=list)
    clock: datetime = NIGHT_START

    def path(self, file: str, source: str, kind: str, truth: str) -> Path:
        self.entries.append((file, source.removesuffix(" east"), kind, truth))
        return self.out / file

    def spectrum(
        self, freq: np.ndarray, data: dict[str, np.ndarray], unit: str, source: str, **kw: Any
    ) -> Spectrum:
        """A Spectrum at the next slot of the night (data rounded to float32 as written)."""
        self.clock += STEP
        ra, dec = SOURCES.get(source, kw.pop("pos", (0.0, 0.0)))
        return Spectrum(
            freq_hz=freq,
            intensity={k: v.astype(np.float32).astype(np.float64) for k, v in data.items()},
            intensity_unit=unit,
            source=source.removesuffix(" east"),
            origin=Origin("generated"),
            ra_deg=ra,
            dec_deg=dec,
            obs_time=self.clock,
            site=SITE,
            telescope=TELESCOPE,
            specsys=kw.get("specsys", "LSRK"),
            rest_freq_hz=kw.get("rest"),
        )


def rest_hz(name: str) -> float:
    return builtin().by_name(name).rest_freq_hz


def grid(center_hz: float, n: int, df_hz: float) -> np.ndarray:
    """n channels of width df_hz, centred (to a whole Hz) on center_hz."""
    return round(center_hz - df_hz * (n // 2)) + np.arange(n) * df_hz


def band_of(band: tuple[str, float, int, float]) -> np.ndarray:
    name, v_kms, n, df = band
    return grid(rest_hz(name) * (1.0 - v_kms / C_KMS), n, df)


def gaussians(freq_hz: np.ndarray, lines: Sequence[Line]) -> np.ndarray:
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
    w, b, x = w50 / 2.0, 0.35, v_kms - vsys
    shape = (erf(b * (w + x)) + 1.0) * (erf(b * (w - x)) + 1.0) / 4.0 * (1.0 + horn * (x / w) ** 2)
    return peak * shape / (1.0 + horn)


def baseline(n: int, rng: np.random.Generator, scale: float) -> np.ndarray:
    x = np.linspace(-1.0, 1.0, n)
    c = rng.normal(0.0, scale, 3)
    return c[0] * x + c[1] * (x**2 - 1.0 / 3.0) + c[2] * x**3


def describe(lines: Sequence[Line], unit: str) -> str:
    return "; ".join(
        f"{ln.name} v={ln.v_kms:+.1f} km/s FWHM {ln.fwhm_kms:g} km/s peak {ln.peak:g} {unit}"
        for ln in lines
    )


def gaussian_file(night: Night, obs: Obs) -> None:
    freq = band_of(obs.band)
    model = obs.continuum + gaussians(freq, obs.lines)
    model += baseline(freq.size, night.rng, obs.noise * 2.0)
    data = {"I": model + night.rng.normal(0.0, obs.noise, freq.size)}
    spec = night.spectrum(freq, data, obs.unit, obs.source, rest=rest_hz(obs.lines[0].name))
    truth = describe(obs.lines, obs.unit)
    truth += f"; continuum {obs.continuum:g} {obs.unit}" if obs.continuum else ""
    truth += f"; rms {obs.noise:g} {obs.unit}" + (f"; {obs.note}" if obs.note else "")
    path = night.path(obs.file, obs.source, obs.kind, truth)
    if obs.csv is not None:
        write_csv(path, spec, overwrite=night.overwrite, **obs.csv)
        return
    options = dict(obs.fits)
    cards = dict(options.pop("extra_cards", {}))
    if "RA" in cards:  # MJD-OBS instead of DATE-OBS in the file with the old-style metadata
        assert spec.obs_time is not None
        cards["MJD-OBS"] = (spec.obs_time - datetime(1858, 11, 17, tzinfo=UTC)) / timedelta(1)
    write_fits_image(
        path, spec, dtype="float32", extra_cards=cards, overwrite=night.overwrite, **options
    )


def topocentric(night: Night) -> None:
    """QRO-Nebula 3 again, on a topocentric axis: the LSRK correction matters here."""
    import astropy.units as u
    from astropy.coordinates import EarthLocation, SkyCoord, SpectralCoord
    from astropy.time import Time

    freq = band_of(C5)
    lines = (L("H109a", 42.0, 24.0, 0.205), L("He109a", 42.0, 19.0, 0.018))
    lines += (L("C109a", 41.0, 6.0, 0.016),)
    ra, dec = SOURCES["QRO-Nebula 3"]
    loc = EarthLocation.from_geodetic(SITE.lon_deg, SITE.lat_deg, SITE.height_m * u.m)
    spec = night.spectrum(freq, {"I": freq}, "K", "QRO-Nebula 3", specsys="TOPOCENT")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # no distance / velocity for the target: not needed
        observer = loc.get_itrs(obstime=Time(spec.obs_time))
        target = SkyCoord(ra * u.deg, dec * u.deg, frame="icrs")
        topo = SpectralCoord(freq * u.Hz, observer=observer, target=target)
        lsrk = topo.with_observer_stationary_relative_to("lsrk").to_value(u.Hz)
    model = 1.33 + gaussians(lsrk, lines) + baseline(freq.size, night.rng, 0.004)
    data = {"I": (model + night.rng.normal(0.0, 0.0021, freq.size)).astype(np.float32)}
    spec = replace(spec, intensity={"I": data["I"].astype(float)}, rest_freq_hz=rest_hz("H109a"))
    factor = float(np.median(lsrk / freq))
    truth = describe(lines, "K") + (
        f"; continuum 1.33 K; rms 0.0021 K; frequencies TOPOCENTRIC: f_lsrk = f_topo x "
        f"{factor:.9f} (astropy SpectralCoord), so a line at v_LSR appears near "
        f"v_LSR {-C_KMS * (1.0 - factor):+.2f} km/s on the file's own (topocentric) axis"
    )
    kind = "FITS image, topocentric FREQ axis, OBSGEO-X/Y/Z, DATE-OBS, RA/DEC"
    path = night.path("nebula03_h109a_topo.fits", "QRO-Nebula 3", kind, truth)
    xyz = [float(c.to_value(u.m)) for c in loc.geocentric]
    cards = {"OBSGEO-X": xyz[0], "OBSGEO-Y": xyz[1], "OBSGEO-Z": xyz[2]}
    cards |= {"SITELONG": None, "SITELAT": None, "SITEELEV": None}
    write_fits_image(path, spec, dtype="float32", extra_cards=cards, overwrite=night.overwrite)


def scan_table(night: Night) -> None:
    """Four pointings across QRO-Nebula 11 as rows of one binary table."""
    freq, rows, truths = band_of(C5), [], []
    ra, dec = SOURCES["QRO-Nebula 11"]
    for k, (dv, peak) in enumerate([(0.0, 0.19), (3.5, 0.15), (-4.0, 0.11), (7.0, 0.06)]):
        lines = (L("H109a", 60.0 + dv, 23.0, peak), L("He109a", 60.0 + dv, 18.0, peak * 0.09))
        model = 1.8 - 0.3 * k + gaussians(freq, lines) + baseline(freq.size, night.rng, 0.004)
        data = {"I": model + night.rng.normal(0.0, 0.0024, freq.size)}
        spec = night.spectrum(freq, data, "K", "QRO-Nebula 11", rest=rest_hz("H109a"))
        rows.append(replace(spec, ra_deg=ra + 0.02 * k, dec_deg=dec - 0.015 * k))
        truths.append(f"row {k}: " + describe(lines, "K"))
    kind = "FITS binary table, 4 rows, per-row CRVAL1/CDELT1/OBJECT/RA/DEC"
    path = night.path("nebula11_h109a_scan.fits", "QRO-Nebula 11", kind, " | ".join(truths))
    write_fits_table(path, rows, dtype="float32", overwrite=night.overwrite)


def rfi(night: Night) -> None:
    freq = band_of(C5)
    lines = (L("H109a", 61.0, 23.0, 0.125), L("He109a", 61.0, 18.0, 0.011))
    model = 1.9 + gaussians(freq, lines) + baseline(freq.size, night.rng, 0.004)
    spikes = [(211, 0.9), (212, 0.35), (1090, 0.55), (1641, 1.4), (1800, 0.25)]
    for chan, amp in spikes:
        model[chan] += amp
    data = {"I": model + night.rng.normal(0.0, 0.0024, freq.size)}
    spec = night.spectrum(freq, data, "K", "QRO-Nebula 11", rest=rest_hz("H109a"))
    where = ", ".join(f"{freq[c] / 1e6:.4f} MHz (+{a:g} K)" for c, a in spikes)
    truth = describe(lines, "K") + f"; continuum 1.9 K; rms 0.0024 K; RFI spikes at {where}"
    path = night.path("nebula11_h109a_rfi.fits", "QRO-Nebula 11", "FITS image with RFI", truth)
    write_fits_image(path, spec, dtype="float32", overwrite=night.overwrite)


def galaxy_spectrum(
    night: Night, n: int, cz: float, w50: float, peak: float, **kw: Any
) -> Spectrum:
    """A galaxy's double-horned HI profile; velocities optical, barycentric (cz), Jy."""
    f0 = rest_hz("HI")
    centre = f0 / (1.0 + cz / C_KMS)
    chans, df = kw.get("chans", 2048), kw.get("df", 3906.25)
    if kw.get("axis") == "VOPT":  # channels evenly spaced in optical velocity
        v = cz + (np.arange(chans) - chans // 2) * (C_KMS * df / f0)
        freq = np.sort(f0 / (1.0 + v / C_KMS))
    else:
        freq = grid(centre, chans, df)
    model = busy(C_KMS * (f0 - freq) / freq, cz, w50, peak, 0.45)
    model += baseline(freq.size, night.rng, 0.003)
    if kw.get("ripple"):  # a standing wave in the receiver path, period 0.9 MHz
        model += kw["ripple"] * np.sin(2 * np.pi * (freq - freq[0]) / 0.9e6 + 0.7)
    data = {"I": model + night.rng.normal(0.0, kw.get("noise", 0.0025), freq.size)}
    pos = (140.0 + (7.31 * n) % 97, 12.0 + (n * 3.7) % 40)
    return night.spectrum(freq, data, "Jy", f"QRO-Galaxy {n}", specsys="BARYCENT", rest=f0, pos=pos)


def galaxies(night: Night) -> None:
    for file, n, cz, w50, peak, kind, opts in GALAXIES:
        spec = galaxy_spectrum(night, n, cz, w50, peak, **opts)
        truth = f"HI cz={cz:.0f} km/s (optical, barycentric) W50 {w50:g} km/s horn peak {peak:g} Jy"
        truth += "; rms 0.0025 Jy"
        if opts.get("ripple"):
            truth += f"; baseline ripple {opts['ripple']:g} Jy amplitude, period 0.9 MHz"
        path = night.path(file, f"QRO-Galaxy {n}", kind, truth)
        if opts.get("csv"):
            write_csv(path, spec, intensity_column="flux_jy", digits=6, overwrite=night.overwrite)
        else:
            axis = opts.get("axis", "FREQ")
            write_fits_image(path, spec, axis=axis, dtype="float32", overwrite=night.overwrite)
    rows, truths = [], []
    for n, cz, w50, peak in ((45, 3650.0, 210.0, 0.028), (46, 3710.0, 320.0, 0.051),
                             (47, 3580.0, 120.0, 0.019)):  # fmt: skip
        rows.append(galaxy_spectrum(night, n, cz, w50, peak, chans=1024, df=7812.5, noise=0.003))
        truths.append(
            f"row {len(rows) - 1} QRO-Galaxy {n}: HI cz={cz:.0f} km/s W50 {w50:g} km/s "
            f"horn peak {peak:g} Jy; rms 0.003 Jy"
        )
    kind = "gzipped FITS binary table, 3 rows, each its own axis"
    path = night.path("galaxies45-47_hi.fits.gz", "QRO-Galaxy 45/46/47", kind, " | ".join(truths))
    write_fits_table(path, rows, dtype="float32", overwrite=night.overwrite)


def oh_zeeman(night: Night) -> None:
    """OH 1665/1667 absorption against a continuum with a Zeeman signature in Stokes V.

    Sign convention (speccat.physics.zeeman): V = RCP - LCP (IEEE/IAU 1973), B_los > 0 pointing
    away from the observer, V(nu) = -(Z B_los / 2) dI/dnu with Z = 3.27 Hz/uG (1665) and
    1.96 Hz/uG (1667) (Troland & Heiles 1982, ApJ 252, 179).
    """
    freq = grid(1666.38e6, 2048, 1953.125)
    split = {"OH1665": 3.27, "OH1667": 1.96}
    for file, source, b_ug, scale, layout in (
        ("cloud05_oh_zeeman.fits", "QRO-Cloud 5", 150.0, 1.0, "I,V"),
        ("cloud08_oh_rrll.fits", "QRO-Cloud 8", -90.0, 0.8, "RR,LL"),
        ("cloud05_oh_zeeman.csv", "QRO-Cloud 5", 150.0, 1.0, "csv"),
    ):
        lines = (L("OH1665", 6.3, 2.5, -0.22 * scale), L("OH1667", 6.3, 2.5, -0.40 * scale))
        stokes_v = np.zeros_like(freq)
        for line in lines:  # analytic dI/dnu of a Gaussian in radio velocity
            f0 = rest_hz(line.name)
            x = C_KMS * (f0 - freq) / f0 - line.v_kms
            di_df = gaussians(freq, [line]) * 2 * FOUR_LN2 * x / line.fwhm_kms**2 * C_KMS / f0
            stokes_v += -(split[line.name] * b_ug / 2.0) * di_df
        rng = night.rng
        stokes_i = 4.2 * scale + gaussians(freq, lines) + baseline(freq.size, rng, 0.004)
        stokes_i += rng.normal(0.0, 0.002, freq.size)
        stokes_v += rng.normal(0.0, 0.002, freq.size)
        if layout == "RR,LL":  # I = (RR + LL)/2, V = (RR - LL)/2
            data = {"RR": stokes_i + stokes_v, "LL": stokes_i - stokes_v}
        else:
            data = {"I": stokes_i, "V": stokes_v}
        spec = night.spectrum(freq, data, "Jy", source, rest=rest_hz("OH1667"))
        truth = describe(lines, "Jy") + (
            f"; continuum {4.2 * scale:g} Jy; rms 0.002 Jy per product; Zeeman B_los = "
            f"{b_ug:+g} uG (V = -(Z B/2) dI/dnu, Z = 3.27/1.96 Hz/uG)"
        )
        kind = (
            "CSV with i and v columns" if layout == "csv" else f"FITS image, STOKES axis ({layout})"
        )
        path = night.path(file, source, kind, truth)
        if layout == "csv":
            write_csv(path, spec, axis="freq_mhz", digits=7, overwrite=night.overwrite)
        else:
            write_fits_image(path, spec, dtype="float32", sky_axes=True, overwrite=night.overwrite)


def broken(night: Night) -> None:
    """Two deliberately broken files."""
    from astropy.io import fits

    buf = io.BytesIO()
    hdu = fits.PrimaryHDU(data=night.rng.normal(0.0, 1.0, 2048).astype(np.float32))
    hdu.header.update({"CTYPE1": "FREQ", "CRVAL1": 5.0e9, "CDELT1": 6103.515625, "CRPIX1": 1.0})
    hdu.header["OBJECT"] = "QRO-Nebula 3"
    hdu.writeto(buf)
    truncated = buf.getvalue()[: 2880 + 3000]
    text = "# OBJECT = 'QRO-Nebula 7'\nfreq_mhz,weight\n"
    text += "".join(f"{5000.0 + 0.01 * k:.2f},1\n" for k in range(64))
    for file, source, kind, truth, content in (
        ("broken_truncated.fits", "QRO-Nebula 3", "BROKEN: FITS file cut off inside its data",
         "reading must fail with 'file truncated'", truncated),
        ("broken_no_intensity.csv", "QRO-Nebula 7", "BROKEN: CSV without an intensity column",
         "reading must fail with 'no intensity column'", text.encode()),
    ):  # fmt: skip
        path = night.path(file, source, kind, truth)
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


def main(argv: Sequence[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description="Generate the invented sample night.")
    default = Path(__file__).resolve().parent.parent / "sample_archive"
    parser.add_argument("--out", default=str(default), help="output folder")
    parser.add_argument("--overwrite", action="store_true", help="replace existing files")
    args = parser.parse_args(argv)
    night = Night(Path(args.out), args.overwrite)
    night.out.mkdir(parents=True, exist_ok=True)
    for obs in GAUSSIAN_FILES[:5]:
        gaussian_file(night, obs)
    topocentric(night)
    scan_table(night)
    rfi(night)
    galaxies(night)
    for obs in GAUSSIAN_FILES[5:]:
        gaussian_file(night, obs)
    oh_zeeman(night)
    broken(night)
    head = README_HEAD.format(lon=SITE.lon_deg, lat=SITE.lat_deg, h=SITE.height_m)
    rows = [f"| `{f}` | {s} | {k} | {t} |" for f, s, k, t in night.entries]
    (night.out / "README.md").write_text(head + "\n".join(rows) + "\n", encoding="utf-8")
    total = sum((night.out / e[0]).stat().st_size for e in night.entries)
    print(f"{len(night.entries)} files, {total / 1e6:.2f} MB in {night.out}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
