"""A synthetic night of spectra with known truth, for identification tests and benchmarks.

Everything here is invented (sources, site, intensities); only the rest frequencies come from the
catalogue passed in, and the frame factor from the callable passed in. Pure numpy +
speccat.model, deterministic for a given seed.

Families (``Truth.family``): ``rrl-a`` (H/He and sometimes C α lines), ``rrl-b`` (H/He β),
``hi`` (Galactic 21 cm), ``galaxy`` (double-horned 21 cm profile at cz of thousands of km/s),
``oh`` (OH 1665/1667 pair), ``h2o`` / ``ch3oh`` (maser spikes), ``nh3`` ((1,1) with its four
satellites, sometimes (2,2)), ``thermal`` (single molecular lines), ``noise`` (no line) and
``absent`` (a line far from every catalogue line at every plausible velocity).
Declared frames cycle through LSRK, BARYCENT, TOPOCENT (with site, time and direction), LSRD,
HELIOCEN and none.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from datetime import UTC, datetime, timedelta
from typing import Any

import numpy as np

from speccat.model import C_KMS, BaselineModel, Kind, LineFit, Measurement, Origin, Site, Spectrum

#: The invented observatory of the synthetic night.
SITE = Site(lon_deg=-17.25, lat_deg=38.5, height_m=1_240.0)
NIGHT_START = datetime(2026, 3, 14, 19, 0, tzinfo=UTC)
FRAMES = ("LSRK", "BARYCENT", "TOPOCENT", "LSRD", "HELIOCEN", "")
FAMILIES = ("rrl-a", "rrl-b", "hi", "galaxy", "oh", "h2o", "ch3oh", "nh3", "thermal")
THERMAL_LINES = ("H2CO4.8", "HC3N(1-0)", "CCS(2_1-1_0)", "CS(1-0)")
NH3_SATELLITES = (("NH3(1,1)s-2", 0.22), ("NH3(1,1)s-1", 0.28), ("NH3(1,1)s+1", 0.28),
                  ("NH3(1,1)s+2", 0.22))  # fmt: skip


@dataclass(frozen=True)
class TrueLine:
    """One line put into a spectrum: catalogue name ("" if none), LSRK radio velocity, FWHM
    (km/s; W50 for galaxies), peak in units of the noise rms (negative for absorption)."""

    name: str
    rest_freq_hz: float
    v_lsr_kms: float
    fwhm_kms: float
    peak_snr: float
    galaxy: bool = False


@dataclass(frozen=True)
class Truth:
    """A synthetic spectrum and what is in it; ``lsrk_factor`` is f_lsrk / f_declared."""

    spectrum: Spectrum
    family: str
    lines: tuple[TrueLine, ...]
    lsrk_factor: float


def _rest(catalogue: Any, name: str) -> float:
    return float(catalogue.by_name(name).rest_freq_hz)


def _gauss(rng: np.random.Generator, lo: float, hi: float) -> float:
    return float(rng.uniform(lo, hi))


def _rrl(cat: Any, rng: np.random.Generator, dn: int) -> list[TrueLine]:
    letter = "ab"[dn - 1]
    n = int(rng.integers(90, 160)) if dn == 1 else int(rng.integers(115, 200))
    v = _gauss(rng, -60, 110)
    width = _gauss(rng, 18, 35)
    peak = _gauss(rng, 80, 250)
    lines = [
        TrueLine(f"H{n}{letter}", _rest(cat, f"H{n}{letter}"), v, width, peak),
        TrueLine(f"He{n}{letter}", _rest(cat, f"He{n}{letter}"), v + rng.normal(0, 1),
                 width * 0.8, peak * _gauss(rng, 0.07, 0.12)),
    ]  # fmt: skip
    if dn == 1 and rng.random() < 0.5:
        lines.append(TrueLine(f"C{n}a", _rest(cat, f"C{n}a"), v + rng.normal(0, 2),
                              _gauss(rng, 3, 8), peak * _gauss(rng, 0.06, 0.1)))  # fmt: skip
    return lines


def _hi(cat: Any, rng: np.random.Generator) -> list[TrueLine]:
    f0 = _rest(cat, "HI")
    v0 = _gauss(rng, -70, 70)
    out = [TrueLine("HI", f0, v0, _gauss(rng, 4, 25), _gauss(rng, 15, 120) * rng.choice([1, -1]))]
    if rng.random() < 0.4:
        out.append(TrueLine("HI", f0, v0 + rng.choice([-1, 1]) * _gauss(rng, 40, 90),
                            _gauss(rng, 4, 20), _gauss(rng, 10, 60)))  # fmt: skip
    return out


def _galaxy(cat: Any, rng: np.random.Generator) -> list[TrueLine]:
    return [TrueLine("HI", _rest(cat, "HI"), _gauss(rng, 800, 9000), _gauss(rng, 130, 450),
                     _gauss(rng, 8, 30), galaxy=True)]  # fmt: skip


def _oh(cat: Any, rng: np.random.Generator) -> list[TrueLine]:
    v, w = _gauss(rng, -40, 90), _gauss(rng, 1.0, 6.0)
    peak = _gauss(rng, 20, 120) * (-1 if rng.random() < 0.7 else 1)
    return [TrueLine("OH1665", _rest(cat, "OH1665"), v, w, peak * 5 / 9),
            TrueLine("OH1667", _rest(cat, "OH1667"), v, w, peak)]  # fmt: skip


def _masers(cat: Any, rng: np.random.Generator, name: str, width: tuple[float, float],
            n_max: int) -> list[TrueLine]:  # fmt: skip
    f0, v_sys = _rest(cat, name), _gauss(rng, -60, 60)
    n = int(rng.integers(1, n_max + 1))
    vs = v_sys + np.sort(rng.uniform(-25, 25, n))
    vs = vs[np.concatenate([[True], np.diff(vs) > 4.0])]  # keep spikes apart
    return [TrueLine(name, f0, float(v), _gauss(rng, *width), float(10 ** rng.uniform(1.2, 2.7)))
            for v in vs]  # fmt: skip


def _nh3(cat: Any, rng: np.random.Generator) -> list[TrueLine]:
    v, w, peak = _gauss(rng, -30, 80), _gauss(rng, 0.8, 2.5), _gauss(rng, 40, 150)
    out = [TrueLine("NH3(1,1)", _rest(cat, "NH3(1,1)"), v, w, peak)]
    out += [TrueLine(s, _rest(cat, s), v, w, peak * r) for s, r in NH3_SATELLITES]
    if rng.random() < 0.5:
        out.append(TrueLine("NH3(2,2)", _rest(cat, "NH3(2,2)"), v, w, peak * 0.5))
    return out


def _thermal(cat: Any, rng: np.random.Generator, index: int) -> list[TrueLine]:
    name = THERMAL_LINES[index % len(THERMAL_LINES)]
    sign = -1 if name.startswith("H2CO") else 1
    return [TrueLine(name, _rest(cat, name), _gauss(rng, -50, 90), _gauss(rng, 0.8, 5.0),
                     sign * _gauss(rng, 15, 80))]  # fmt: skip


def _absent(cat: Any, rng: np.random.Generator, window_kms: float) -> list[TrueLine]:
    """A line whose frequency is > window + 300 km/s from every catalogue line."""
    margin = (window_kms + 300.0) / C_KMS
    while True:
        f = float(10 ** rng.uniform(9.3, 10.6))
        if not cat.between(f * (1 - margin), f * (1 + margin)):
            return [TrueLine("", f, 0.0, _gauss(rng, 1.0, 20.0), _gauss(rng, 15, 60))]


def _lines(cat: Any, rng: np.random.Generator, family: str, index: int) -> list[TrueLine]:
    makers: dict[str, Callable[[], list[TrueLine]]] = {
        "rrl-a": lambda: _rrl(cat, rng, 1),
        "rrl-b": lambda: _rrl(cat, rng, 2),
        "hi": lambda: _hi(cat, rng),
        "galaxy": lambda: _galaxy(cat, rng),
        "oh": lambda: _oh(cat, rng),
        "h2o": lambda: _masers(cat, rng, "H2O22", (0.5, 1.5), 4),
        "ch3oh": lambda: _masers(cat, rng, "CH3OH6.7", (0.2, 0.8), 3),
        "nh3": lambda: _nh3(cat, rng),
        "thermal": lambda: _thermal(cat, rng, index),
        "noise": lambda: [],
        "absent": lambda: _absent(cat, rng, 400.0),
    }
    return makers[family]()


def _axis(lines: list[TrueLine], rng: np.random.Generator, factor: float,
          min_span_kms: float = 200.0) -> np.ndarray:  # fmt: skip
    """Declared-frame frequency axis covering every line with margin, >= 5 channels per FWHM."""
    if not lines:
        f0, span_kms, chan_kms = float(10 ** rng.uniform(9.2, 10.4)), 800.0, 1.0
    else:
        f_obs = [ln.rest_freq_hz * (1 - ln.v_lsr_kms / C_KMS) for ln in lines]
        lo, hi = min(f_obs), max(f_obs)
        f0 = 0.5 * (lo + hi)
        widest = max(ln.fwhm_kms for ln in lines)
        span_kms = (hi - lo) / f0 * C_KMS + max(8.0 * widest, min_span_kms)
        chan_kms = min(min(ln.fwhm_kms for ln in lines) / 5.0, 2.0)
    n = int(min(max(span_kms / chan_kms, 1024), 8192))
    half_hz = 0.5 * span_kms / C_KMS * f0
    freq = np.linspace(f0 - half_hz, f0 + half_hz, n) / factor
    return freq + rng.uniform(-0.5, 0.5) * (freq[1] - freq[0])


def _profile(v: np.ndarray, line: TrueLine) -> np.ndarray:
    """Gaussian, or for a galaxy a double-horned profile (horns 30 % above the centre)."""
    if not line.galaxy:
        return np.asarray(np.exp(-4 * math.log(2) * ((v - line.v_lsr_kms) / line.fwhm_kms) ** 2))
    x = (v - line.v_lsr_kms) / (0.5 * line.fwhm_kms)
    edge = 1.0 / (1.0 + np.exp((np.abs(x) - 1.0) * 0.5 * line.fwhm_kms / 6.0))
    return np.asarray(edge * (0.75 + 0.25 * np.minimum(x * x, 1.0)) / 1.0)


def make_truth(lines: list[TrueLine], *, frame: str, factor_of: Callable[[Spectrum], float],
               rng: np.random.Generator, index: int = 0, family: str = "custom",
               tuned: bool = True, direction: tuple[float, float] | None = None,
               when: datetime | None = None, min_span_kms: float = 200.0) -> Truth:  # fmt: skip
    """One synthetic spectrum holding ``lines`` in the declared ``frame``.

    ``tuned`` puts the first line's rest frequency in the header (RESTFRQ); the direction and
    time are random (in the night) unless given; the band spans at least ``min_span_kms``
    beyond the outermost lines.
    """
    ra, dec = direction or (float(rng.uniform(0, 360)),
                            float(np.degrees(np.arcsin(rng.uniform(-0.5, 1.0)))))  # fmt: skip
    when = when or NIGHT_START + timedelta(minutes=5 * index)
    header = Spectrum(
        freq_hz=np.array([1.0, 2.0]), intensity={"I": np.zeros(2)}, intensity_unit="K",
        source=f"SYN-{index:04d}", origin=Origin(f"synthetic/{index:04d}.fits"),
        ra_deg=ra, dec_deg=dec, obs_time=when, site=SITE, specsys=frame,
    )  # fmt: skip
    factor = float(factor_of(header)) if frame else 1.0
    freq = _axis(lines, rng, factor, min_span_kms)
    data = rng.normal(0.0, 1.0, freq.size) + 0.3 + 0.2 * np.linspace(-1, 1, freq.size)
    for ln in lines:
        v = C_KMS * (1.0 - freq * factor / ln.rest_freq_hz)  # radio velocity, LSRK
        data += ln.peak_snr * _profile(v, ln)
    restfrq = lines[0].rest_freq_hz if tuned and lines and lines[0].name else None
    spec = Spectrum(
        freq_hz=freq, intensity={"I": data}, intensity_unit="K", source=header.source,
        origin=header.origin, ra_deg=ra, dec_deg=dec, obs_time=when, site=SITE, specsys=frame,
        rest_freq_hz=restfrq,
    )  # fmt: skip
    return Truth(spec, family, tuple(lines), factor)


def night(catalogue: Any, factor_of: Callable[[Spectrum], float], *, n_lines: int = 216,
          n_empty: int = 60, seed: int = 2026) -> list[Truth]:  # fmt: skip
    """``n_lines`` spectra cycling through FAMILIES, then ``n_empty`` noise/absent ones.

    ``factor_of(spectrum)`` gives f_lsrk / f_declared for a header-only spectrum (the caller
    chooses the reference, e.g. speccat.physics.doppler or astropy).
    """
    rng = np.random.default_rng(seed)
    out: list[Truth] = []
    plan = [FAMILIES[i % len(FAMILIES)] for i in range(n_lines)]
    plan += ["noise" if i % 2 else "absent" for i in range(n_empty)]
    for index, family in enumerate(plan):
        frame = FRAMES[index % len(FRAMES)]
        lines = _lines(catalogue, rng, family, index)
        # two spectra in three carry the rest frequency of the line tuned to (RESTFRQ)
        out.append(make_truth(lines, frame=frame, factor_of=factor_of, rng=rng, index=index,
                              family=family, tuned=bool(index % 3)))  # fmt: skip
    return out


def ideal_measurement(truth: Truth, rng: np.random.Generator) -> Measurement:
    """The fits a perfect reducer would report: true centres and widths on the declared axis,
    scattered by their errors. The centre error is 0.7·sqrt(channel × FWHM)/SNR (the usual
    scaling for a Gaussian fit to white noise; common practice)."""
    freq = truth.spectrum.freq_hz
    chan_hz = float(freq[1] - freq[0])
    fits = []
    for ln in truth.lines:
        f = ln.rest_freq_hz * (1.0 - ln.v_lsr_kms / C_KMS) / truth.lsrk_factor
        fwhm_hz = ln.fwhm_kms * f / C_KMS
        snr = abs(ln.peak_snr)
        err = 0.7 * math.sqrt(chan_hz * fwhm_hz) / snr
        area = 1.0645 * ln.peak_snr * fwhm_hz
        fits.append(LineFit(
            center_hz=f + rng.normal(0, err), center_err_hz=err, peak=ln.peak_snr, peak_err=1.0,
            fwhm_hz=fwhm_hz * (1 + rng.normal(0, 1.4 * err / fwhm_hz)), fwhm_err_hz=1.4 * err,
            integral_fit_hz=area, integral_fit_err_hz=abs(area) / snr, integral_sum_hz=area,
            integral_sum_err_hz=abs(area) / snr, center_chan=float(np.searchsorted(freq, f)),
            fwhm_chan=fwhm_hz / chan_hz, snr=snr, chi2_red=1.0,
            kind=Kind.EMISSION if ln.peak_snr > 0 else Kind.ABSORPTION,
            w50_hz=fwhm_hz if ln.galaxy else None,
        ))  # fmt: skip
    fits.sort(key=lambda fit: fit.center_hz)
    return Measurement("I", 1.0, 0.3, BaselineModel(freq.size, (0.3, 0.2)), tuple(fits))


def match(truth: Truth, fits: tuple[LineFit, ...]) -> Iterator[tuple[TrueLine, int | None]]:
    """Each true line with the index of the fit nearest its centre (within half its FWHM)."""
    centres = np.array([f.center_hz for f in fits])
    for ln in truth.lines:
        f = ln.rest_freq_hz * (1.0 - ln.v_lsr_kms / C_KMS) / truth.lsrk_factor
        if centres.size == 0:
            yield ln, None
            continue
        i = int(np.argmin(np.abs(centres - f)))
        tol = 0.5 * ln.fwhm_kms * f / C_KMS
        yield ln, (i if abs(centres[i] - f) <= tol else None)
