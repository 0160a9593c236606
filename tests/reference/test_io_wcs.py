"""Reader axes and metadata against astropy (the reference library for FITS WCS and frames)."""

from __future__ import annotations

import warnings
from pathlib import Path

import astropy.units as u
import numpy as np
import pytest
from astropy.coordinates import FK4, FK5, EarthLocation, SkyCoord
from astropy.io import fits
from astropy.time import Time
from astropy.wcs import WCS

from speccat.io import read
from speccat.model import Convention

REST_HZ = 1_420_405_751.768
N = 257

# (CTYPE, CUNIT, CRVAL, CDELT, extra cards): every spectral form the readers accept.
AXES = [
    ("FREQ", "Hz", 1.4200e9, 2.0e4, {}),
    ("FREQ", "MHz", 1420.0, 0.02, {}),
    ("FREQ", "GHz", 22.235, -1.0e-5, {}),
    ("VRAD", "m/s", -5.0e4, 400.0, {}),
    ("VRAD", "km/s", 120.0, -0.5, {}),
    ("VOPT", "m/s", 3.0e6, 2.0e3, {}),
    ("VOPT", "km/s", -40.0, 0.3, {}),
    ("VELO", "m/s", 2.0e5, -1.5e3, {}),
    ("WAVE", "m", 0.2110, 1.0e-6, {}),
    ("WAVE", "mm", 211.06, -0.001, {}),
    ("ZOPT", "", 0.01, 1.0e-5, {}),
    ("VELO-LSR", "m/s", -1.0e5, 1.0e3, {"VELREF": 257}),
    ("VELO-LSR", "m/s", -1.0e5, 1.0e3, {"VELREF": 1}),
    ("VELO-HEL", "m/s", 1.0e6, -2.0e3, {}),
    ("VELO-OBS", "km/s", 10.0, 0.2, {"VELREF": 259}),
    ("VELO", "m/s", 5.0e5, 2.0e3, {"VELREF": 258}),
    ("FELO-HEL", "m/s", 3.0e6, 5.0e3, {}),
    ("FELO", "km/s", 2500.0, -6.0, {}),
    ("FREQ-LSR", "Hz", 1.4195e9, 1.0e4, {"VELREF": 1}),
    ("VOPT-F2W", "m/s", 1.5e6, 4.0e3, {}),
    ("VELO-F2V", "m/s", 1.0e6, -3.0e3, {}),
    ("WAVE-F2W", "m", 0.2110, 1.0e-6, {}),
    ("FREQ-W2F", "Hz", 1.42e9, -1.5e4, {}),
]


def _header(ctype: str, cunit: str, crval: float, cdelt: float, extra: dict) -> fits.Header:
    h = fits.Header()
    h["CTYPE1"] = ctype
    if cunit:
        h["CUNIT1"] = cunit
    h["CRVAL1"] = crval
    h["CDELT1"] = cdelt
    h["CRPIX1"] = 40.5
    h["RESTFRQ"] = REST_HZ
    for key, value in extra.items():
        h[key] = value
    return h


def _reference_hz(header: fits.Header, n: int) -> np.ndarray:
    """astropy.wcs's spectral world coordinate of every pixel, as a frequency in Hz."""
    h = header.copy()
    h["NAXIS"] = 1
    h["NAXIS1"] = n
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        w = WCS(h).spectral
        if h["CTYPE1"].startswith("ZOPT"):
            # pixel_to_world has no SpectralCoord for redshift axes: let wcslib translate the
            # axis to frequency (sptr) and evaluate it with wcs_pix2world instead.
            w.wcs.sptr("FREQ-???")
            return np.asarray(w.wcs_pix2world(np.arange(n, dtype=float), 0)[0])
        coord = w.pixel_to_world(np.arange(n))
        return np.asarray(coord.to_value(u.Hz))


@pytest.mark.parametrize("sign", [1.0, -1.0], ids=["as-listed", "reversed"])
@pytest.mark.parametrize(
    "ctype,cunit,crval,cdelt,extra", AXES, ids=[f"{a[0]}-{a[1]}" for a in AXES]
)
def test_axis_matches_astropy_wcs(tmp_path: Path, ctype, cunit, crval, cdelt, extra, sign) -> None:
    header = _header(ctype, cunit, crval, sign * cdelt, extra)
    data = np.linspace(0.0, 1.0, N)
    path = tmp_path / "axis.fits"
    fits.PrimaryHDU(data=data, header=header).writeto(path)
    spectrum = read(path)[0]
    expected = _reference_hz(header, N)
    ascending = expected[0] < expected[-1]
    # Reference: astropy.wcs WCS(header).spectral.pixel_to_world (wcslib), 1e-9 relative.
    np.testing.assert_allclose(
        spectrum.freq_hz, expected if ascending else expected[::-1], rtol=1e-9
    )
    # Data reversed together with the axis when the file's axis is descending.
    np.testing.assert_array_equal(spectrum.intensity["I"], data if ascending else data[::-1])
    assert np.all(np.diff(spectrum.freq_hz) > 0)


@pytest.mark.parametrize(
    "ctype,convention,equivalency",
    [
        ("VRAD", Convention.RADIO, u.doppler_radio),
        ("VOPT", Convention.OPTICAL, u.doppler_optical),
        ("VELO", Convention.RELATIVISTIC, u.doppler_relativistic),
    ],
)
def test_velocity_axis_agrees_with_astropy_doppler(tmp_path: Path, ctype, convention, equivalency):
    v_kms = np.linspace(-3000.0, 9000.0, 301)
    header = _header(ctype, "km/s", float(v_kms[0]), float(v_kms[1] - v_kms[0]), {})
    header["CRPIX1"] = 1.0
    fits.PrimaryHDU(data=np.ones(v_kms.size), header=header).writeto(tmp_path / "v.fits")
    spectrum = read(tmp_path / "v.fits")[0]
    # Reference: astropy.units doppler_radio / doppler_optical / doppler_relativistic.
    expected = (v_kms * u.km / u.s).to_value(u.Hz, equivalencies=equivalency(REST_HZ * u.Hz))
    np.testing.assert_allclose(spectrum.freq_hz, np.sort(expected), rtol=1e-12)
    assert spectrum.velocity_convention is convention
    assert spectrum.rest_freq_hz == REST_HZ

    column = {"VRAD": "vrad_kms", "VOPT": "vopt_kms", "VELO": "vrel_kms"}[ctype]
    lines = [f"# RESTFREQ = {REST_HZ!r}", f"{column},flux_jy"]
    lines += [f"{float(v)!r},1.0" for v in v_kms]
    (tmp_path / "v.csv").write_text("\n".join(lines) + "\n")
    from_csv = read(tmp_path / "v.csv")[0]
    # Same reference for the CSV velocity columns.
    np.testing.assert_allclose(from_csv.freq_hz, np.sort(expected), rtol=1e-12)


@pytest.mark.parametrize(
    "radesys,equinox,frame",
    [
        ("FK5", 2000.0, FK5(equinox=Time(2000.0, format="jyear"))),
        ("FK5", 1975.0, FK5(equinox=Time(1975.0, format="jyear"))),
        ("FK4", 1950.0, FK4(equinox=Time(1950.0, format="byear"))),
        (None, 1950.0, FK4(equinox=Time(1950.0, format="byear"))),
    ],
)
def test_position_converted_to_icrs_like_astropy(tmp_path: Path, radesys, equinox, frame) -> None:
    header = _header("FREQ", "Hz", 1.42e9, 1.0e4, {})
    header["RA"] = 201.25
    header["DEC"] = -33.5
    header["EQUINOX"] = equinox
    if radesys:
        header["RADESYS"] = radesys
    fits.PrimaryHDU(data=np.ones(16), header=header).writeto(tmp_path / "p.fits")
    spectrum = read(tmp_path / "p.fits")[0]
    ref = SkyCoord(201.25 * u.deg, -33.5 * u.deg, frame=frame).icrs
    got = SkyCoord(spectrum.ra_deg * u.deg, spectrum.dec_deg * u.deg, frame="icrs")
    # Reference: astropy.coordinates FK5/FK4 -> ICRS (FITS standard 4.0 §8.3 for the defaults).
    assert got.separation(ref).to_value(u.arcsec) < 1e-3


def test_galactic_axes_give_icrs_position(tmp_path: Path) -> None:
    h = _header("FREQ", "Hz", 1.42e9, 1.0e4, {})
    h["CTYPE2"], h["CRVAL2"], h["CDELT2"], h["CRPIX2"] = "GLON-CAR", 30.0, 0.1, 1.0
    h["CTYPE3"], h["CRVAL3"], h["CDELT3"], h["CRPIX3"] = "GLAT-CAR", 0.5, 0.1, 1.0
    fits.PrimaryHDU(data=np.ones((1, 1, 32)), header=h).writeto(tmp_path / "g.fits")
    spectrum = read(tmp_path / "g.fits")[0]
    ref = SkyCoord(l=30.0 * u.deg, b=0.5 * u.deg, frame="galactic").icrs
    # Reference: astropy.coordinates Galactic -> ICRS.
    assert abs(spectrum.ra_deg - ref.ra.deg) < 1e-9
    assert abs(spectrum.dec_deg - ref.dec.deg) < 1e-9


def test_obsgeo_site_matches_astropy_earthlocation(tmp_path: Path) -> None:
    loc = EarthLocation.from_geodetic(-4.75 * u.deg, 53.25 * u.deg, 142.0 * u.m)
    h = _header("FREQ", "Hz", 1.42e9, 1.0e4, {})
    h["OBSGEO-X"], h["OBSGEO-Y"], h["OBSGEO-Z"] = (float(c.to_value(u.m)) for c in loc.geocentric)
    fits.PrimaryHDU(data=np.ones(16), header=h).writeto(tmp_path / "s.fits")
    site = read(tmp_path / "s.fits")[0].site
    assert site is not None
    # Reference: astropy EarthLocation (WGS84) geodetic <-> geocentric.
    assert site.lon_deg == pytest.approx(-4.75, abs=1e-9)
    assert site.lat_deg == pytest.approx(53.25, abs=1e-9)
    assert site.height_m == pytest.approx(142.0, abs=1e-6)


def test_mjd_obs_matches_astropy_time(tmp_path: Path) -> None:
    h = _header("FREQ", "Hz", 1.42e9, 1.0e4, {})
    h["MJD-OBS"] = 61113.9375
    fits.PrimaryHDU(data=np.ones(16), header=h).writeto(tmp_path / "t.fits")
    when = read(tmp_path / "t.fits")[0].obs_time
    ref = Time(61113.9375, format="mjd", scale="utc").to_datetime()
    # Reference: astropy.time MJD -> UTC calendar date.
    assert when is not None and when.tzinfo is not None
    assert abs((when.replace(tzinfo=None) - ref).total_seconds()) < 1e-3
