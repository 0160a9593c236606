"""Doppler conventions and frame handling: round trips and the flags for missing information."""

from __future__ import annotations

from datetime import UTC, datetime, timedelta, timezone

import numpy as np
import pytest

from speccat.model import C_KMS, Origin, Site, Spectrum
from speccat.physics.doppler import (
    freq_from_velocity,
    lsrk_correction,
    normalise_frame,
    velocity_from_freq,
)

SITE = Site(lon_deg=-20.0, lat_deg=35.0, height_m=1200.0)  # invented site
WHEN = datetime(2024, 3, 5, 22, 15, 0)


def _spectrum(**kw: object) -> Spectrum:
    base: dict[str, object] = dict(
        freq_hz=np.array([5.0e9, 5.0001e9]), intensity={"I": np.zeros(2)},
        intensity_unit="K", source="invented", origin=Origin("mem"),
        ra_deg=120.0, dec_deg=-15.0, obs_time=WHEN, site=SITE, specsys="TOPOCENT",
    )  # fmt: skip
    base.update(kw)
    return Spectrum(**base)  # type: ignore[arg-type]


@pytest.mark.parametrize("convention", ["radio", "optical", "relativistic"])
def test_round_trip_and_sign(convention: str) -> None:
    v = np.linspace(-3000.0, 3000.0, 61)
    f = freq_from_velocity(v, 1.0e9, convention)
    np.testing.assert_allclose(velocity_from_freq(f, 1.0e9, convention), v, atol=1e-8)
    # Receding (v > 0) means a lower frequency in every convention (definition).
    assert np.all(np.diff(f) < 0)


def test_radio_convention_published_form() -> None:
    # FITS WCS Paper III (Greisen et al. 2006), Table 4: V_radio = c (f0 - f) / f0.
    assert velocity_from_freq(0.999e9, 1.0e9, "radio") == pytest.approx(C_KMS * 1e-3)
    assert velocity_from_freq(0.999e9, 1.0e9, "optical") == pytest.approx(C_KMS * 1e-3 / 0.999)


def test_unknown_convention_is_rejected() -> None:
    with pytest.raises(ValueError):
        velocity_from_freq(1.0, 1.0, "sideways")


@pytest.mark.parametrize(
    ("specsys", "velref", "expected"),
    [("topocent", None, "TOPOCENT"), ("LSR", None, "LSRK"), ("", "257", "LSRK"),
     ("", 2, "HELIOCEN"), ("", "3", "TOPOCENT"), ("", None, ""), ("BARY", None, "BARYCENT")],
)  # fmt: skip
def test_normalise_frame(specsys: str, velref: object, expected: str) -> None:
    # Legacy VELREF codes: 1 LSR, 2 heliocentric, 3 observer, +256 radio (common practice).
    assert normalise_frame(specsys, velref) == expected  # type: ignore[arg-type]


@pytest.mark.parametrize(
    ("changes", "flag"),
    [({"specsys": ""}, "frame-unknown"), ({"specsys": "SOURCE"}, "frame-source"),
     ({"specsys": "GALACTOC"}, "frame-unsupported"), ({"specsys": "WIBBLE"}, "frame-unknown"),
     ({"site": None}, "no-site"), ({"obs_time": None}, "no-time"),
     ({"ra_deg": None}, "no-direction"), ({"specsys": "GEOCENTR", "obs_time": None}, "no-time"),
     ({"specsys": "BARYCENT", "dec_deg": None}, "no-direction")],
)  # fmt: skip
def test_missing_information_is_flagged_never_guessed(changes: dict, flag: str) -> None:
    corr = lsrk_correction(_spectrum(**changes))
    assert corr.flag == flag
    assert corr.factor == 1.0


def test_frames_that_need_less_do_not_ask_for_more() -> None:
    assert lsrk_correction(_spectrum(specsys="LSRK", ra_deg=None)).flag is None
    bary = lsrk_correction(_spectrum(specsys="BARYCENT", site=None, obs_time=None))
    assert bary.flag is None and bary.factor != 1.0
    helio = lsrk_correction(_spectrum(specsys="HELIOCEN", site=None, obs_time=None))
    # Without a time, heliocentric is taken as barycentric (documented approximation).
    assert helio.factor == bary.factor
    lsrd = lsrk_correction(_spectrum(specsys="LSRD", site=None, obs_time=None))
    assert lsrd.flag is None
    geo = lsrk_correction(_spectrum(specsys="GEOCENTR", site=None))
    assert geo.flag is None


def test_topocentric_correction_size_and_aware_times() -> None:
    corr = lsrk_correction(_spectrum())
    dv_kms = (1.0 - corr.factor) * C_KMS
    # Earth orbit (<= 30.3 km/s) + rotation (<= 0.47 km/s) + solar motion (20 km/s).
    assert 0.0 < abs(dv_kms) < 51.0
    aware = WHEN.replace(tzinfo=UTC).astimezone(timezone(timedelta(hours=5)))
    assert lsrk_correction(_spectrum(obs_time=aware)).factor == corr.factor
    later = lsrk_correction(_spectrum(obs_time=WHEN + timedelta(hours=6))).factor
    # Six hours of Earth rotation change the diurnal term, by at most ~0.9 km/s.
    assert 0.0 < abs(later - corr.factor) * C_KMS < 1.0
