"""Doppler conventions and LSRK corrections against astropy (reference library)."""

from __future__ import annotations

import warnings
from datetime import datetime, timedelta

import astropy.units as u
import numpy as np
import pytest
from astropy.coordinates import (
    GCRS,
    HCRS,
    ICRS,
    LSRD,
    CartesianDifferential,
    CartesianRepresentation,
    EarthLocation,
    SkyCoord,
    SpectralCoord,
)
from astropy.time import Time
from astropy.utils import iers

from speccat.model import Origin, Site, Spectrum
from speccat.physics.doppler import freq_from_velocity, lsrk_correction, velocity_from_freq

C_MS = 299_792_458.0
REST_HZ = 1.420405751768e9


@pytest.fixture(autouse=True)
def _offline_iers(monkeypatch: pytest.MonkeyPatch) -> None:
    """No downloads; the bundled IERS tables (astropy-iers-data) are used as they are."""
    monkeypatch.setattr(iers.conf, "auto_download", False)
    monkeypatch.setattr(iers.conf, "auto_max_age", None)


@pytest.mark.parametrize(
    ("convention", "equivalency"),
    [("radio", u.doppler_radio), ("optical", u.doppler_optical),
     ("relativistic", u.doppler_relativistic)],
)  # fmt: skip
def test_conventions_match_astropy_equivalencies(convention: str, equivalency: object) -> None:
    # Reference: astropy.units Doppler equivalencies (FITS WCS Paper III, Greisen et al. 2006).
    freq = np.linspace(0.9, 1.1, 41) * REST_HZ
    v_ref = (freq * u.Hz).to_value(u.km / u.s, equivalencies=equivalency(REST_HZ * u.Hz))
    v = velocity_from_freq(freq, REST_HZ, convention)
    np.testing.assert_allclose(v, v_ref, rtol=0, atol=1e-9)
    f_ref = (v_ref * u.km / u.s).to_value(u.Hz, equivalencies=equivalency(REST_HZ * u.Hz))
    np.testing.assert_allclose(freq_from_velocity(v_ref, REST_HZ, convention), f_ref, rtol=1e-14)
    assert velocity_from_freq(float(freq[3]), REST_HZ, convention) == pytest.approx(v_ref[3])


def _random_cases(n: int, seed: int) -> list[tuple[float, float, float, datetime, float, float]]:
    rng = np.random.default_rng(seed)
    cases = []
    for _ in range(n):
        lon = rng.uniform(-180, 180)
        lat = float(np.degrees(np.arcsin(rng.uniform(-1, 1))))
        height = rng.uniform(0, 5000)
        when = datetime(1995, 1, 1) + timedelta(seconds=float(rng.uniform(0, 30 * 3.15e7)))
        ra = rng.uniform(0, 360)
        dec = float(np.degrees(np.arcsin(rng.uniform(-1, 1))))
        cases.append((lon, lat, height, when, ra, dec))
    return cases


def _astropy_observer(frame: str, lon: float, lat: float, h: float, when: datetime) -> object:
    t = Time(when, scale="utc")
    if frame == "TOPOCENT":
        return EarthLocation.from_geodetic(lon * u.deg, lat * u.deg, h * u.m).get_itrs(t)
    empty = {"GEOCENTR": GCRS(obstime=t), "BARYCENT": ICRS(), "HELIOCEN": HCRS(obstime=t),
             "LSRD": LSRD()}[frame]  # fmt: skip
    at_rest = CartesianRepresentation(
        [0, 0, 0] * u.m, differentials=CartesianDifferential([0, 0, 0] * u.km / u.s)
    )
    return empty.realize_frame(at_rest)


def _spectrum(frame: str, case: tuple[float, float, float, datetime, float, float]) -> Spectrum:
    lon, lat, h, when, ra, dec = case
    return Spectrum(
        np.array([REST_HZ]), {"I": np.zeros(1)}, "K", "invented", Origin("mem"),
        ra_deg=ra, dec_deg=dec, obs_time=when, site=Site(lon, lat, h), specsys=frame,
    )  # fmt: skip


@pytest.mark.parametrize(
    "n_cases", [pytest.param(3, id="quick"), pytest.param(21, id="full", marks=pytest.mark.slow)]
)
def test_topocentric_lsrk_factor_matches_astropy_over_random_sites(n_cases: int) -> None:
    # Reference: astropy SpectralCoord.with_observer_stationary_relative_to("lsrk");
    # issue 5 asks for < 1 m/s over >= 20 random sites, times and directions (the "full" case;
    # ~0.2-0.6 s per case, since astropy cannot make an array of observers stationary).
    cases = _random_cases(n_cases, seed=5 + n_cases)
    ours, ref = [], []
    for case in cases:
        lon, lat, h, when, ra, dec = case
        ours.append(lsrk_correction(_spectrum("TOPOCENT", case)).factor)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # NoDistanceWarning/NoVelocityWarning: expected
            observer = _astropy_observer("TOPOCENT", lon, lat, h, when)
            target = SkyCoord(ra * u.deg, dec * u.deg, frame="icrs")
            sc = SpectralCoord(REST_HZ * u.Hz, observer=observer, target=target)
            ref.append(
                float((sc.with_observer_stationary_relative_to("lsrk") / sc).to_value(u.one))
            )
    err_ms = np.abs(np.array(ours) - np.array(ref)) * C_MS
    assert err_ms.max() < 1.0, f"worst disagreement {err_ms.max():.3f} m/s"
    # The corrections themselves span tens of km/s (Earth orbit + solar motion).
    if n_cases > 10:
        assert np.ptp((np.array(ours) - 1.0) * C_MS) > 20_000.0


@pytest.mark.parametrize(
    ("frame", "n"), [("GEOCENTR", 6), ("BARYCENT", 4), ("HELIOCEN", 6), ("LSRD", 4)]
)
def test_lsrk_factor_matches_astropy_for_other_frames(frame: str, n: int) -> None:
    # Reference: astropy SpectralCoord.with_observer_stationary_relative_to("lsrk"), with the
    # observer at rest at the origin of astropy's GCRS / ICRS / HCRS / LSRD frame.
    worst_ms = 0.0
    for case in _random_cases(n, seed=sum(map(ord, frame))):
        lon, lat, h, when, ra, dec = case
        corr = lsrk_correction(_spectrum(frame, case))
        assert corr.flag is None and corr.frame == frame
        target = SkyCoord(ra * u.deg, dec * u.deg, frame="icrs")
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # NoDistanceWarning/NoVelocityWarning: expected
            observer = _astropy_observer(frame, lon, lat, h, when)
            sc = SpectralCoord(REST_HZ * u.Hz, observer=observer, target=target)
            ref = (sc.with_observer_stationary_relative_to("lsrk") / sc).to_value(u.one)
        worst_ms = max(worst_ms, abs(corr.factor - float(ref)) * C_MS)
    assert worst_ms < 1.0, f"worst disagreement {worst_ms:.3f} m/s"
