"""Header keywords -> Spectrum metadata, shared by every reader.

A reader gathers its keywords (a FITS header, a table row's columns merged over the table
header, or a CSV file's ``# KEY = value`` lines) into a :class:`Keys` mapping and asks this module
for the source, time, site, position and declared frame. Keyword meanings follow the FITS
standard 4.0 (Pence et al. 2010, A&A 524, A42, §4.4.2 and §8.4) and FITS WCS Paper III
(Greisen et al. 2006, A&A 446, 747, §4 and Table 9; the legacy ``VELREF`` convention in §7.1).
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping
from datetime import UTC, datetime, timedelta
from functools import lru_cache
from typing import Any

import numpy as np

from speccat.model import Site


#: Raised inside a reader with a short reason; the entry point adds the path.
class ReadProblem(Exception):
    """A reason why a file cannot be read (the caller wraps it into SpectrumReadError)."""


_MJD0 = datetime(1858, 11, 17, tzinfo=UTC)
#: Legacy VELREF frame codes (Paper III §7.1; the values wcslib uses).
VELREF_FRAMES = {
    1: "LSRK",
    2: "BARYCENT",
    3: "TOPOCENT",
    4: "LSRD",
    5: "GEOCENTR",
    6: "SOURCE",
    7: "GALACTOC",
}
#: Legacy frame suffixes of CTYPE ('VELO-LSR', 'FREQ-HEL', ...) and what they declare.
SUFFIX_FRAMES = {
    "LSR": "LSRK",
    "LSRK": "LSRK",
    "LSRD": "LSRD",
    "HEL": "BARYCENT",
    "BAR": "BARYCENT",
    "OBS": "TOPOCENT",
    "TOP": "TOPOCENT",
    "GEO": "GEOCENTR",
}
#: SPECSYS values of Paper III Table 9 (plus common spellings mapped onto them).
SPECSYS_VALUES = {
    "TOPOCENT": "TOPOCENT",
    "GEOCENTR": "GEOCENTR",
    "BARYCENT": "BARYCENT",
    "HELIOCEN": "HELIOCEN",
    "LSRK": "LSRK",
    "LSRD": "LSRD",
    "GALACTOC": "GALACTOC",
    "LOCALGRP": "LOCALGRP",
    "CMBDIPOL": "CMBDIPOL",
    "SOURCE": "SOURCE",
    "LSR": "LSRK",
}


class Keys:
    """Case-insensitive keyword lookup over a plain dict, with typed getters.

    Values may be str, int, float, bool or numpy scalars. Missing, blank or NaN values give
    None; a present value of the wrong type raises ReadProblem naming the keyword.
    """

    __slots__ = ("_d",)

    def __init__(self, values: Mapping[str, Any]) -> None:
        self._d = {str(k).upper(): v for k, v in values.items()}

    @classmethod
    def upper(cls, values: dict[str, Any]) -> Keys:
        """Wrap a dict whose keys are already upper case (no copy)."""
        out = cls({})
        out._d = values
        return out

    def __contains__(self, key: str) -> bool:
        return key in self._d

    def raw(self, key: str) -> Any:
        return self._d.get(key)

    def merged(self, extra: Mapping[str, Any]) -> Keys:
        out = Keys({})
        out._d = {**self._d, **{str(k).upper(): v for k, v in extra.items()}}
        return out

    def text(self, key: str) -> str | None:
        value = self._d.get(key)
        if value is None or isinstance(value, bool):
            return None
        if isinstance(value, bytes):
            value = value.decode("ascii", "replace")
        s = str(value).strip()
        return s or None

    def number(self, key: str) -> float | None:
        value = self._d.get(key)
        if value is None or isinstance(value, bool | np.bool_):
            return None
        if isinstance(value, bytes):
            value = value.decode("ascii", "replace")
        if isinstance(value, str):
            if not value.strip():
                return None
            text = value.strip()
            try:
                value = float(text.replace("D", "E").replace("d", "e"))
            except ValueError:
                raise ReadProblem(f"{key} is not a number ({text[:20]!r})") from None
        try:
            out = float(value)
        except (TypeError, ValueError):
            raise ReadProblem(f"{key} is not a number") from None
        return out if math.isfinite(out) else None  # NaN (e.g. a table's empty cell): unknown


def rest_frequency_hz(keys: Keys) -> float | None:
    """RESTFRQ (Paper III), else the older RESTFREQ, else c / RESTWAV; Hz."""
    for key in ("RESTFRQ", "RESTFREQ"):
        f = keys.number(key)
        if f is not None:
            if f <= 0:
                raise ReadProblem(f"{key} is not positive ({f:g})")
            return f
    wav = keys.number("RESTWAV")
    if wav is not None:
        if wav <= 0:
            raise ReadProblem(f"RESTWAV is not positive ({wav:g})")
        return 299_792_458.0 / wav
    return None


def declared_frame(keys: Keys, ctype: str) -> str:
    """SPECSYS; else Legacy VELREF (modulo 256); else a legacy CTYPE suffix; else "" (unknown).

    The precedence VELREF over suffix is the one wcslib applies.
    """
    specsys = keys.text("SPECSYS")
    if specsys:
        return SPECSYS_VALUES.get(specsys.upper(), "")
    velref = keys.number("VELREF")
    if velref is not None and int(velref) % 256 in VELREF_FRAMES:
        return VELREF_FRAMES[int(velref) % 256]
    suffix = ctype[5:].strip().upper() if len(ctype) > 5 and ctype[4] == "-" else ""
    return SUFFIX_FRAMES.get(suffix, "")


_SEXAGESIMAL = re.compile(r"^\s*([+-]?)(\d+)[:\s hd]+(\d+)[:\s m']+(\d+(?:\.\d*)?)\s*[s\"]?\s*$")


def _angle_deg(keys: Keys, key: str, hours: bool) -> float | None:
    value = keys.raw(key)
    if isinstance(value, str | bytes) and not isinstance(value, bool):
        text = keys.text(key)
        if text is None:
            return None
        m = _SEXAGESIMAL.match(text)
        if m:
            sign = -1.0 if m.group(1) == "-" else 1.0
            deg = float(m.group(2)) + float(m.group(3)) / 60 + float(m.group(4)) / 3600
            return sign * deg * (15.0 if hours else 1.0)
    return keys.number(key)


def celestial_position(keys: Keys, axes: Mapping[str, float]) -> tuple[float | None, float | None]:
    """ICRS (ra_deg, dec_deg) from celestial axis CRVALs (``axes`` keyed by CTYPE prefix
    'RA', 'DEC', 'GLON', 'GLAT') or the RA/DEC (or OBSRA/OBSDEC) keywords, converted from
    FK5/FK4 with EQUINOX/RADESYS when they say so (FITS standard 4.0 §8.3 defaults).
    """
    if "GLON" in axes and "GLAT" in axes:
        return _galactic_to_icrs(axes["GLON"], axes["GLAT"])
    ra, dec = axes.get("RA"), axes.get("DEC")
    if ra is None or dec is None:
        for rk, dk in (("RA", "DEC"), ("OBSRA", "OBSDEC"), ("CRVAL2", "CRVAL3")):
            if rk == "CRVAL2" and not (keys.text("CTYPE2") or "").upper().startswith("RA"):
                continue
            ra, dec = _angle_deg(keys, rk, hours=True), _angle_deg(keys, dk, hours=False)
            if ra is not None and dec is not None:
                break
    if ra is None or dec is None:
        return None, None
    if not (-90.0 <= dec <= 90.0):
        raise ReadProblem(f"declination {dec:g} deg is outside [-90, 90]")
    ra = ra % 360.0
    radesys = (keys.text("RADESYS") or keys.text("RADECSYS") or "").upper()
    equinox = keys.number("EQUINOX") or keys.number("EPOCH")
    if not radesys:
        radesys = "ICRS" if equinox is None else ("FK4" if equinox < 1984.0 else "FK5")
    if radesys == "FK5":
        return _rotate(ra, dec, _fk5_matrix(equinox or 2000.0))
    if radesys == "FK4":
        return _fk4_to_icrs(ra, dec, equinox or 1950.0)
    return ra, dec


def _axis_rotation(angle_deg: float, axis: int) -> np.ndarray:
    """Rotation of the coordinate frame about x (0), y (1) or z (2), astropy's convention."""
    c, s = math.cos(math.radians(angle_deg)), math.sin(math.radians(angle_deg))
    i, j = [(1, 2), (2, 0), (0, 1)][axis]
    m = np.eye(3)
    m[i, i], m[i, j], m[j, i], m[j, j] = c, s, -s, c
    return m


@lru_cache(maxsize=16)
def _fk5_matrix(equinox: float) -> np.ndarray:
    """FK5(equinox) -> ICRS: IAU 2006 precession to J2000 (ERFA ``bp06``, as astropy's
    ``precession_matrix_Capitaine``) then the inverse ICRS -> FK5 J2000 frame bias of USNO
    Circular 179 (the constants astropy.coordinates uses). ERFA directly, so that reading a
    header does not import astropy.coordinates (seconds)."""
    import erfa

    bias = (
        _axis_rotation(19.9 / 3.6e6, 0)  # -eta0, eta0 = -19.9 mas
        @ _axis_rotation(9.1 / 3.6e6, 1)  # xi0 = 9.1 mas
        @ _axis_rotation(-22.9 / 3.6e6, 2)  # da0 = -22.9 mas
    )
    jd_tt = 2451545.0 + (equinox - 2000.0) * 365.25  # Julian epoch -> JD (TT)
    to_epoch = erfa.bp06(jd_tt, 0.0)[1]
    to_j2000 = erfa.bp06(2451545.0, 0.0)[1]
    precession = to_j2000 @ to_epoch.T
    return np.asarray(bias.T @ precession)


def _rotate(ra: float, dec: float, matrix: np.ndarray) -> tuple[float, float]:
    r, d = math.radians(ra), math.radians(dec)
    v = matrix @ np.array([math.cos(d) * math.cos(r), math.cos(d) * math.sin(r), math.sin(d)])
    return math.degrees(math.atan2(v[1], v[0])) % 360.0, math.degrees(math.asin(min(1.0, v[2])))


@lru_cache(maxsize=256)
def _fk4_to_icrs(ra: float, dec: float, equinox: float) -> tuple[float, float]:
    from astropy.coordinates import FK4, ICRS
    from astropy.time import Time

    c = FK4(ra=ra * _deg(), dec=dec * _deg(), equinox=Time(equinox, format="byear"))
    icrs = c.transform_to(ICRS())
    return float(icrs.ra.deg), float(icrs.dec.deg)


@lru_cache(maxsize=256)
def _galactic_to_icrs(glon: float, glat: float) -> tuple[float, float]:
    from astropy.coordinates import ICRS, Galactic

    icrs = Galactic(l=glon * _deg(), b=glat * _deg()).transform_to(ICRS())
    return float(icrs.ra.deg), float(icrs.dec.deg)


def _deg() -> Any:
    import astropy.units as u

    return u.deg


def observing_site(keys: Keys) -> Site | None:
    """OBSGEO-X/Y/Z (ITRS metres), else OBSGEO-L/B/H, else SITELONG/SITELAT/SITEELEV.

    Longitudes are east-positive degrees (Paper III's OBSGEO-L convention, also assumed for
    SITELONG, which has no standard definition); heights metres above the WGS84 ellipsoid."""
    xyz = [keys.number(f"OBSGEO-{a}") for a in "XYZ"]
    if all(v is not None for v in xyz):
        x, y, z = (float(v) for v in xyz if v is not None)
        if math.hypot(x, y, z) < 6.0e6:
            raise ReadProblem("OBSGEO-X/Y/Z is not on the Earth's surface")
        return _geodetic(x, y, z)
    for lk, bk, hk in (("OBSGEO-L", "OBSGEO-B", "OBSGEO-H"), ("SITELONG", "SITELAT", "SITEELEV")):
        lon, lat = _angle_deg(keys, lk, hours=False), _angle_deg(keys, bk, hours=False)
        if lon is not None and lat is not None:
            if not -90.0 <= lat <= 90.0:
                raise ReadProblem(f"{bk} {lat:g} is outside [-90, 90]")
            lon = lon - 360.0 if lon > 180.0 else lon
            return Site(lon, lat, keys.number(hk) or 0.0)
    return None


@lru_cache(maxsize=64)
def _geodetic(x: float, y: float, z: float) -> Site:
    """ITRS geocentric metres -> WGS84 geodetic (ERFA ``gc2gd``, what astropy's EarthLocation
    uses)."""
    import erfa

    lon, lat, height = erfa.gc2gd(1, np.array([x, y, z]))
    return Site(math.degrees(float(lon)), math.degrees(float(lat)), float(height))


_OLD_DATE = re.compile(r"^(\d\d)/(\d\d)/(\d\d)$")


def observation_time(keys: Keys) -> datetime | None:
    """Start of the observation, UTC, tz-aware: DATE-OBS (ISO 8601, or the old dd/mm/yy form
    with TIME-OBS/UT), else MJD-OBS. TIMESYS other than UTC is converted with astropy."""
    text = keys.text("DATE-OBS")
    when: datetime | None = None
    if text:
        m = _OLD_DATE.match(text)
        if m:
            text = f"19{m.group(3)}-{m.group(2)}-{m.group(1)}"
        try:
            when = datetime.fromisoformat(text)
        except ValueError:
            raise ReadProblem(f"DATE-OBS {text[:30]!r} is not an ISO 8601 date") from None
        if len(text) <= 10:
            tod = keys.text("TIME-OBS") or keys.text("UT") or keys.text("UTC-OBS")
            if tod:
                try:
                    when = datetime.fromisoformat(f"{text}T{tod}")
                except ValueError:
                    raise ReadProblem(f"TIME-OBS {tod[:20]!r} is not a time") from None
            elif keys.number("MJD-OBS") is not None:
                when = None
    if when is None:
        mjd = keys.number("MJD-OBS")
        if mjd is None:
            return None
        if not 0.0 < mjd < 200_000.0:
            raise ReadProblem(f"MJD-OBS {mjd:g} is not a plausible date")
        when = _MJD0 + timedelta(days=mjd)
    if when.tzinfo is None:
        when = when.replace(tzinfo=UTC)
    timesys = (keys.text("TIMESYS") or "UTC").upper()
    if timesys not in ("UTC", "UT", "UT1", "GMT"):
        when = _to_utc(when, timesys)
    return when.astimezone(UTC)


def _to_utc(when: datetime, scale: str) -> datetime:
    from astropy.time import Time

    if scale.lower() not in ("tai", "tt", "tdb", "tcb", "tcg", "gps"):
        raise ReadProblem(f"TIMESYS {scale!r} is not a time scale speccat knows")
    t = Time(when.replace(tzinfo=None), scale="tai" if scale == "GPS" else scale.lower())
    if scale == "GPS":
        t = Time(t.tai.mjd + 19.0 / 86400.0, format="mjd", scale="tai")
    out: datetime = t.utc.to_datetime(timezone=UTC)
    return out
