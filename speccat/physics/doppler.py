"""Doppler conventions and the conversion of a spectrum's declared frame to LSRK.

Conventions (FITS WCS Paper III, Greisen et al. 2006, Table 4; same as astropy's
``u.doppler_radio/optical/relativistic``), with rest frequency f0 and c in km/s:

- radio:        v = c (f0 - f) / f0
- optical:      v = c (f0 - f) / f
- relativistic: v = c (f0² - f²) / (f0² + f²)

Frames: a spectrum's frequencies are those an observer at rest in its declared frame
(``SPECSYS``) would measure. ``lsrk_correction`` gives the factor that turns them into what an
observer at rest in the kinematic LSR would measure, the way astropy's
``SpectralCoord.with_observer_stationary_relative_to("lsrk")`` does: the observer's ICRS
velocity minus that of the LSRK origin, projected on the line of sight, through the
relativistic Doppler factor f_lsrk = f × sqrt((1 - β)/(1 + β)).

Solar motions, as astropy's frames define them: LSRK, 20 km/s towards RA 18h, Dec +30° (B1900)
(Gordon 1975, Methods of Experimental Physics 12C, §6.1.5); LSRD, (U, V, W) = (9, 12, 7) km/s
(Delhaye 1965). The Earth's barycentric velocity comes from ERFA's ``epv00`` (the model behind
astropy's built-in ephemeris) and the site's diurnal velocity from ERFA's ``pvtob`` rotated to
GCRS, so one spectrum costs ~0.1-0.4 ms instead of astropy's ~50-500 ms (bench_physics).
Approximations (each well below 1 m/s): UTC stands in for UT1 in the Earth rotation angle
(≤ 3 cm/s), polar motion is ignored (≤ 1 mm/s), TT stands in for TDB (≤ 1 mm/s).
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass
from datetime import UTC, datetime
from functools import lru_cache
from typing import TYPE_CHECKING, Any

import erfa
import numpy as np

from speccat.model import C_KMS, Convention

if TYPE_CHECKING:
    from speccat.model import Site, Spectrum

__all__ = [
    "FRAMES",
    "FrameCorrection",
    "freq_from_velocity",
    "lsrk_correction",
    "lsrk_factor",
    "normalise_frame",
    "velocity_from_freq",
]

#: Solar velocity relative to LSRK, ICRS Cartesian km/s: 20 km/s towards (18h, +30°) B1900
#: transformed to ICRS (the constant astropy's LSRK frame uses, astropy.coordinates lsr.py).
SUN_WRT_LSRK_ICRS_KMS = np.array([0.28999706839034606, -17.317264789717928, 10.00141199546947])
#: Solar velocity relative to LSRD, ICRS Cartesian km/s: Galactic (U, V, W) = (9, 12, 7) km/s.
SUN_WRT_LSRD_ICRS_KMS = np.array([-0.6382306360182073, -14.585424483191094, 7.8011572411006815])
_AU_PER_DAY_KMS = 149_597_870.7 / 86_400.0
_UNIX_EPOCH = datetime(1970, 1, 1)

#: Declared frames this module converts to LSRK.
FRAMES = ("TOPOCENT", "GEOCENTR", "BARYCENT", "HELIOCEN", "LSRK", "LSRD")
_ALIASES = {
    "TOPOCENT": "TOPOCENT", "TOPO": "TOPOCENT", "OBS": "TOPOCENT",
    "GEOCENTR": "GEOCENTR", "GEO": "GEOCENTR",
    "BARYCENT": "BARYCENT", "BARY": "BARYCENT",
    "HELIOCEN": "HELIOCEN", "HEL": "HELIOCEN", "HELIO": "HELIOCEN",
    "LSRK": "LSRK", "LSR": "LSRK", "LSRD": "LSRD",
    "SOURCE": "SOURCE", "GALACTOC": "GALACTOC", "LOCALGRP": "LOCALGRP", "CMBDIPOL": "CMBDIPOL",
}  # fmt: skip
#: Legacy VELREF codes (mod 256): 1 LSR, 2 heliocentric, 3 observer.
_VELREF = {1: "LSRK", 2: "HELIOCEN", 3: "TOPOCENT"}


def _as_float(*values: Any) -> list[Any]:
    return [np.asarray(v, dtype=float) if np.ndim(v) else float(v) for v in values]


def velocity_from_freq(freq_hz: Any, rest_hz: Any, convention: Convention | str = "radio") -> Any:
    """Velocity in km/s (positive = receding) of ``freq_hz`` relative to ``rest_hz``."""
    f, f0 = _as_float(freq_hz, rest_hz)
    conv = Convention(convention)
    if conv is Convention.RADIO:
        return C_KMS * (f0 - f) / f0
    if conv is Convention.OPTICAL:
        return C_KMS * (f0 - f) / f
    return C_KMS * (f0 * f0 - f * f) / (f0 * f0 + f * f)


def freq_from_velocity(v_kms: Any, rest_hz: Any, convention: Convention | str = "radio") -> Any:
    """Frequency in Hz at velocity ``v_kms`` (km/s, positive = receding) for ``rest_hz``."""
    v, f0 = _as_float(v_kms, rest_hz)
    beta = v / C_KMS
    conv = Convention(convention)
    if conv is Convention.RADIO:
        return f0 * (1.0 - beta)
    if conv is Convention.OPTICAL:
        return f0 / (1.0 + beta)
    return f0 * np.sqrt((1.0 - beta) / (1.0 + beta))


@dataclass(frozen=True)
class FrameCorrection:
    """``f_lsrk = f_declared * factor``.

    ``frame`` is the declared frame used (normalised SPECSYS name, "" when none). ``flag`` is
    set, and ``factor`` is 1.0, when the conversion cannot be established: ``frame-unknown``
    (no or unrecognised SPECSYS/VELREF), ``frame-source`` (SOURCE: the frame of the emitter),
    ``frame-unsupported`` (GALACTOC, LOCALGRP, CMBDIPOL), ``no-site``, ``no-time``,
    ``no-direction``.
    """

    factor: float
    frame: str
    flag: str | None = None


def normalise_frame(specsys: str, velref: str | int | None = None) -> str:
    """The FITS Paper III name of a declared frame; "" when neither keyword says anything.

    Accepts SPECSYS values and common short forms (``LSR`` is taken as LSRK), or else an
    legacy ``VELREF`` code (1 LSR, 2 heliocentric, 3 topocentric; +256 for radio). Unknown
    names come back upper-cased, so that the caller can report them.
    """
    name = (specsys or "").strip().upper()
    if name:
        return _ALIASES.get(name, name)
    if velref is None or str(velref).strip() == "":
        return ""
    try:
        code = int(float(str(velref).strip())) % 256
    except ValueError:
        return str(velref).strip().upper()
    return _VELREF.get(code, f"VELREF={code}")


@lru_cache(maxsize=4096)
def _jd_tt(when: datetime) -> tuple[float, float, float, float]:
    """(UTC jd1, jd2, TT jd1, jd2) for a datetime (naive ones are taken as UTC).

    jd1 is the Julian date of 0h that day, jd2 the fraction of the day (ERFA's two-part form);
    TT = UTC + (TAI − UTC from ERFA's leap-second table) + 32.184 s.
    """
    if when.tzinfo is not None:
        when = when.astimezone(UTC).replace(tzinfo=None)
    day = datetime(when.year, when.month, when.day)
    frac = (when - day).total_seconds() / 86_400.0
    jd0 = 2_440_587.5 + (day - _UNIX_EPOCH).days
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", erfa.ErfaWarning)  # "dubious year" for future dates
        tai_utc = float(erfa.dat(when.year, when.month, when.day, frac))
    return jd0, frac, jd0, frac + (tai_utc + 32.184) / 86_400.0


@lru_cache(maxsize=4096)
def _earth_and_sun_bary_kms(when: datetime) -> tuple[np.ndarray, np.ndarray]:
    """Barycentric ICRS velocities (km/s) of the geocentre and of the Sun (ERFA epv00)."""
    _, _, t1, t2 = _jd_tt(when)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", erfa.ErfaWarning)  # outside 1900-2100
        pvh, pvb = erfa.epv00(t1, t2)
    v_earth = np.asarray(pvb["v"], dtype=float) * _AU_PER_DAY_KMS
    v_sun = (np.asarray(pvb["v"], dtype=float) - np.asarray(pvh["v"], dtype=float)) * (
        _AU_PER_DAY_KMS
    )
    return v_earth, v_sun


@lru_cache(maxsize=4096)
def _site_gcrs_kms(site: Site, when: datetime) -> np.ndarray:
    """GCRS velocity (km/s) of a site from the Earth's rotation (ERFA pvtob + c2i00b).

    IAU 2000B nutation (1 mas) instead of 2006/2000A: the difference in a 0.46 km/s diurnal
    velocity is below 1e-8 km/s, at a twentieth of the cost.
    """
    u1, u2, t1, t2 = _jd_tt(when)
    theta = erfa.era00(u1, u2)
    pv = erfa.pvtob(math.radians(site.lon_deg), math.radians(site.lat_deg), site.height_m,
                    0.0, 0.0, 0.0, theta)  # fmt: skip
    c2i = erfa.c2i00b(t1, t2)
    return np.asarray(c2i.T @ np.asarray(pv["v"], dtype=float), dtype=float) / 1000.0


def _unit_vector(ra_deg: float, dec_deg: float) -> np.ndarray:
    ra, dec = math.radians(ra_deg), math.radians(dec_deg)
    return np.array([math.cos(dec) * math.cos(ra), math.cos(dec) * math.sin(ra), math.sin(dec)])


def lsrk_factor(v_observer_icrs_kms: np.ndarray, ra_deg: float, dec_deg: float) -> float:
    """Factor f_lsrk / f_obs for an observer with this ICRS velocity (km/s) and a direction.

    Relativistic Doppler factor of the radial part of (observer − LSRK origin) velocity, as
    astropy's SpectralCoord applies it.
    """
    v_rel = np.asarray(v_observer_icrs_kms, dtype=float) + SUN_WRT_LSRK_ICRS_KMS
    beta = float(v_rel @ _unit_vector(ra_deg, dec_deg)) / C_KMS
    return math.sqrt((1.0 - beta) / (1.0 + beta))


def _observer_velocity(frame: str, spectrum: Spectrum) -> np.ndarray | str:
    """ICRS velocity (km/s) of an observer at rest in ``frame``, or a flag string."""
    when = spectrum.obs_time
    if frame == "BARYCENT":
        return np.zeros(3)
    if frame == "LSRD":
        return -SUN_WRT_LSRD_ICRS_KMS
    if frame == "HELIOCEN":
        # With a time, the Sun's barycentric velocity (≤ 13 m/s); without, heliocentric is
        # taken as barycentric (an error of at most 0.013 km/s, documented).
        return np.zeros(3) if when is None else _earth_and_sun_bary_kms(when)[1]
    if when is None:
        return "no-time"
    v_earth = _earth_and_sun_bary_kms(when)[0]
    if frame == "GEOCENTR":
        return v_earth
    if spectrum.site is None:
        return "no-site"
    return v_earth + _site_gcrs_kms(spectrum.site, when)


def lsrk_correction(spectrum: Spectrum) -> FrameCorrection:
    """The factor turning the spectrum's declared-frame frequencies into LSRK ones.

    Uses ``spectrum.specsys`` (else ``meta["VELREF"]``), ``obs_time`` (UTC), ``site`` and
    ``ra_deg``/``dec_deg`` (taken as ICRS). LSRK needs nothing; BARYCENT, HELIOCEN and LSRD
    need the direction; GEOCENTR also the time; TOPOCENT also the site. When something is
    missing the factor is 1.0 and ``flag`` says what (never a silent guess).
    """
    frame = normalise_frame(spectrum.specsys, spectrum.meta.get("VELREF"))
    if frame == "LSRK":
        return FrameCorrection(1.0, frame)
    if frame not in FRAMES:
        flag = {"": "frame-unknown", "SOURCE": "frame-source"}.get(
            frame, "frame-unsupported" if frame in _ALIASES else "frame-unknown"
        )
        return FrameCorrection(1.0, frame, flag)
    if spectrum.ra_deg is None or spectrum.dec_deg is None:
        return FrameCorrection(1.0, frame, "no-direction")
    v_obs = _observer_velocity(frame, spectrum)
    if isinstance(v_obs, str):
        return FrameCorrection(1.0, frame, v_obs)
    return FrameCorrection(lsrk_factor(v_obs, spectrum.ra_deg, spectrum.dec_deg), frame)
