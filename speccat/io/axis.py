"""Spectral and Stokes axes of a FITS-style WCS description -> frequencies in Hz, product labels.

Spectral types and their relation to frequency follow FITS WCS Paper III (Greisen et al. 2006,
A&A 446, 747, Table 1 and §3): FREQ (f), WAVE (vacuum wavelength, f = c/λ), VRAD
(f = f0 (1 - v/c)), VOPT (f = f0 / (1 + v/c)), ZOPT (f = f0 / (1 + z)), VELO (apparent radial
velocity, f = f0 sqrt((c - v)/(c + v))). The legacy forms of §7.1 are read the way wcslib's legacy-axis
translation reads them: ``VELO-xxx`` (and plain ``VELO`` when VELREF is given) is VOPT, or
VRAD when VELREF >= 256; ``FELO`` is an optical velocity axis linear in frequency (VOPT-F2W).
Linear axes are computed with numpy (about a microsecond); axes with a non-linear algorithm
code (``-F2W``, ``-V2F``, ``-LOG``...) go through astropy.wcs (``sptr`` to frequency, then
``wcs_pix2world``), never the slow ``pixel_to_world``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from speccat.io.keywords import SUFFIX_FRAMES, Keys, ReadProblem, rest_frequency_hz
from speccat.model import Convention

C_MS = 299_792_458.0

#: FITS STOKES axis codes (FITS WCS Paper I, Greisen & Calabretta 2002, Table 7).
STOKES_CODES = {
    1: "I",
    2: "Q",
    3: "U",
    4: "V",
    -1: "RR",
    -2: "LL",
    -3: "RL",
    -4: "LR",
    -5: "XX",
    -6: "YY",
    -7: "XY",
    -8: "YX",
}
STOKES_NUMBERS = {v: k for k, v in STOKES_CODES.items()}

SPECTRAL_TYPES = ("FREQ", "WAVE", "VRAD", "VOPT", "ZOPT", "VELO", "FELO", "AWAV", "WAVN", "ENER")
#: wcslib's spectral algorithm codes (Paper III Table 2) besides the linear default.
ALGORITHMS: tuple[str, ...] = (
    "F2W",
    "F2V",
    "F2A",
    "W2F",
    "W2V",
    "W2A",
    "V2F",
    "V2W",
    "V2A",
    "A2F",
    "A2W",
    "A2V",
)
ALGORITHMS += ("LOG", "GRI", "GRA", "TAB")
CELESTIAL_PREFIXES = {"RA--": "RA", "DEC-": "DEC", "GLON": "GLON", "GLAT": "GLAT"}
_CONVENTIONS = {"VRAD": Convention.RADIO, "VOPT": Convention.OPTICAL, "ZOPT": Convention.OPTICAL}
_CONVENTIONS |= {"VELO": Convention.RELATIVISTIC, "FELO": Convention.OPTICAL}

_UNIT_SCALE = {
    "": 1.0,
    "HZ": 1.0,
    "KHZ": 1e3,
    "MHZ": 1e6,
    "GHZ": 1e9,
    "M/S": 1.0,
    "M S-1": 1.0,
    "M.S-1": 1.0,
    "KM/S": 1e3,
    "KM S-1": 1e3,
    "KM.S-1": 1e3,
    "M": 1.0,
    "CM": 1e-2,
    "MM": 1e-3,
    "UM": 1e-6,
    "NM": 1e-9,
    "ANGSTROM": 1e-10,
}
_SI = {"FREQ": "Hz", "WAVE": "m", "VRAD": "m/s", "VOPT": "m/s", "VELO": "m/s", "FELO": "m/s"}


def classify(ctype: str) -> str:
    """'spectral', 'stokes', 'celestial', or 'other' for one CTYPE value."""
    up = ctype.strip().upper()
    if up == "STOKES":
        return "stokes"
    if up[:4] in CELESTIAL_PREFIXES or up[:4] in ("ELON", "ELAT", "SLON", "SLAT"):
        return "celestial"
    if up[:4] in SPECTRAL_TYPES and (len(up) == 4 or up[4] == "-"):
        return "spectral"
    return "other"


@dataclass(frozen=True)
class SpectralAxis:
    """Frequencies of one spectral axis (Hz, in file order) and what the axis was."""

    freq_hz: np.ndarray
    ctype: str
    convention: Convention | None
    rest_freq_hz: float | None


def _kind(ctype: str, keys: Keys) -> tuple[str, str]:
    """Effective (type, algorithm) after the legacy-axis translation; algorithm '' means linear."""
    up = ctype.strip().upper()
    base, tail = up[:4], up[5:].strip() if len(up) > 5 else ""
    if len(up) > 4 and up[4] != "-":
        raise ReadProblem(f"unknown spectral CTYPE {ctype.strip()!r}")
    velref = keys.number("VELREF")
    legacy_suffix = tail in SUFFIX_FRAMES and base in ("FREQ", "VELO", "FELO")
    if base == "FELO" and (tail == "" or legacy_suffix):
        return "VOPT", "F2W"
    if base == "VELO" and (legacy_suffix or (tail == "" and velref)):
        radio = velref is not None and int(velref) >= 256
        return ("VRAD" if radio else "VOPT"), ""
    if base == "FREQ" and legacy_suffix:
        return "FREQ", ""
    if tail and tail not in ALGORITHMS:
        raise ReadProblem(f"unknown spectral CTYPE {ctype.strip()!r}")
    return base, tail


@lru_cache(maxsize=64)
def unit_scale(cunit: str, base: str) -> float:
    """Factor from CUNIT to the SI unit of the axis type (Hz, m, m/s)."""
    key = cunit.strip().upper()
    if key in _UNIT_SCALE:
        return _UNIT_SCALE[key]
    import astropy.units as u

    try:
        return float(u.Unit(cunit.strip(), format="fits").to(u.Unit(_SI.get(base, "m"))))
    except (ValueError, TypeError, u.UnitsError):
        raise ReadProblem(f"unknown unit {cunit.strip()!r} for a {base} axis") from None


def spectral_axis(keys: Keys, i: int, n: int) -> SpectralAxis:
    """Frequencies (Hz) of the n pixels of axis ``i`` (1-based), from CTYPEi/CRVALi/CDELTi
    (or CDi_i, or CDELTi x PCi_i)/CRPIXi/CUNITi and the rest frequency; file order."""
    ctype = keys.text(f"CTYPE{i}") or ""
    base, algo = _kind(ctype, keys)
    crval = keys.number(f"CRVAL{i}")
    if crval is None:
        raise ReadProblem(f"no CRVAL{i} for the {ctype.strip()} axis")
    cdelt = keys.number(f"CD{i}_{i}")
    if cdelt is None:
        cdelt = keys.number(f"CDELT{i}")
        if cdelt is None:
            raise ReadProblem(f"no CDELT{i} (channel width) for the {ctype.strip()} axis")
        cdelt *= keys.number(f"PC{i}_{i}") or (1.0 if f"PC{i}_{i}" not in keys else 0.0)
    if cdelt == 0.0:
        raise ReadProblem(f"CDELT{i} is zero")
    crpix = keys.number(f"CRPIX{i}") or 0.0
    rest = rest_frequency_hz(keys)
    convention = _CONVENTIONS.get(base)
    if base in ("VRAD", "VOPT", "VELO", "ZOPT") and rest is None:
        raise ReadProblem(f"velocity axis {ctype.strip()!r} without RESTFRQ/RESTFREQ")
    if algo in ("", "F2W") and base in ("FREQ", "WAVE", "VRAD", "VOPT", "VELO", "ZOPT"):
        if algo == "F2W" and base != "VOPT":
            freq = _via_wcs(keys, i, n, ctype)
        else:
            scale = 1.0 if base == "ZOPT" else unit_scale(keys.text(f"CUNIT{i}") or "", base)
            pix = np.arange(1.0, n + 1.0)
            freq = _linear(base, algo, crval * scale, cdelt * scale, crpix, pix, rest)
    else:
        freq = _via_wcs(keys, i, n, ctype)
    return SpectralAxis(freq, ctype.strip(), convention, rest)


def _linear(
    base: str,
    algo: str,
    crval: float,
    cdelt: float,
    crpix: float,
    pix: np.ndarray,
    rest: float | None,
) -> np.ndarray:
    """Paper III Table 1 relations for an axis linear in its own type (or VOPT-F2W)."""
    if algo == "F2W":  # optical velocity axis, linear in frequency (Paper III §5.3)
        assert rest is not None
        f_ref = rest / (1.0 + crval / C_MS)
        df = -cdelt * f_ref * f_ref / (rest * C_MS)
        return f_ref + (pix - crpix) * df
    world = crval + (pix - crpix) * cdelt
    with np.errstate(all="ignore"):
        if base == "FREQ":
            return world
        if base == "WAVE":
            return C_MS / world
        assert rest is not None
        if base == "VRAD":
            return rest * (1.0 - world / C_MS)
        if base == "VOPT":
            return rest / (1.0 + world / C_MS)
        if base == "ZOPT":
            return rest / (1.0 + world)
        return rest * np.sqrt((C_MS - world) / (C_MS + world))  # VELO


def _via_wcs(keys: Keys, i: int, n: int, ctype: str) -> np.ndarray:
    """Any other spectral axis wcslib understands: translate it to frequency with ``sptr``."""
    from astropy.io import fits
    from astropy.wcs import WCS

    h = fits.Header()
    h["NAXIS"] = 1
    h["NAXIS1"] = n
    h["CTYPE1"] = ctype.strip()
    for src, dst in ((f"CRVAL{i}", "CRVAL1"), (f"CRPIX{i}", "CRPIX1"), (f"CUNIT{i}", "CUNIT1")):
        if keys.raw(src) is not None:
            h[dst] = keys.raw(src)
    cd = keys.number(f"CD{i}_{i}")
    h["CDELT1"] = (
        cd
        if cd is not None
        else (keys.number(f"CDELT{i}") or 1.0) * (keys.number(f"PC{i}_{i}") or 1.0)
    )
    for key in ("RESTFRQ", "RESTFREQ", "RESTWAV", "VELREF", "SPECSYS"):
        if keys.raw(key) is not None:
            h[key] = keys.raw(key)
    try:
        w = WCS(h)
        w.wcs.sptr("FREQ-???")
        freq = w.wcs_pix2world(np.arange(n, dtype=float), 0)[0]
    except Exception as exc:  # wcslib's errors are several classes; the reason is what matters
        text = str(exc).strip().splitlines()
        detail = text[-1] if text else type(exc).__name__
        raise ReadProblem(f"spectral CTYPE {ctype.strip()!r} not usable ({detail[:80]})") from None
    return np.asarray(freq, dtype=float)


def stokes_labels(keys: Keys, i: int, n: int) -> list[str]:
    """Product labels along a STOKES axis (codes CRVAL + (p - CRPIX) CDELT, p = 1..n)."""
    crval = keys.number(f"CRVAL{i}")
    cdelt = keys.number(f"CDELT{i}")
    crpix = keys.number(f"CRPIX{i}")
    if crval is None:
        raise ReadProblem(f"STOKES axis {i} has no CRVAL{i}")
    if cdelt == 0.0:
        raise ReadProblem(f"CDELT{i} is zero")
    cdelt = 1.0 if cdelt is None else cdelt
    crpix = 1.0 if crpix is None else crpix
    labels = []
    for p in range(1, n + 1):
        value = crval + (p - crpix) * cdelt
        code = round(value)
        if abs(value - code) > 1e-6 or code not in STOKES_CODES:
            raise ReadProblem(f"unknown STOKES code {value:g}")
        labels.append(STOKES_CODES[code])
    if len(set(labels)) != len(labels):
        raise ReadProblem("STOKES axis repeats a product")
    return labels


def check_frequencies(freq_hz: np.ndarray) -> None:
    """Every frequency finite, positive, below 10 THz, and strictly monotonic."""
    if freq_hz.size < 2:
        raise ReadProblem(f"spectral axis has {freq_hz.size} channel(s); need at least 2")
    if not np.all(np.isfinite(freq_hz)):
        raise ReadProblem("frequency axis is not finite (velocity beyond c?)")
    lo, hi = float(freq_hz.min()), float(freq_hz.max())
    if lo <= 0.0:
        raise ReadProblem(f"frequency axis reaches {lo:.6g} Hz (not positive)")
    if hi > 1e13:
        raise ReadProblem(f"frequency axis reaches {hi:.6g} Hz (above 10 THz)")
    d = np.diff(freq_hz)
    if not (np.all(d > 0) or np.all(d < 0)):
        raise ReadProblem("frequency axis is not strictly monotonic")


def angle_axis_value(keys: Keys, i: int) -> float | None:
    value = keys.number(f"CRVAL{i}")
    return None if value is None or not math.isfinite(value) else value
