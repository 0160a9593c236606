"""Hard identification cases, each its own test, against the built-in catalogue.

Line data are invented (tests/synthetic_night.py); rest frequencies come from the catalogue, the
topocentric-to-LSRK factor of the topocentric case from astropy's SpectralCoord (the reference
library), so that the identification is checked against an independent frame conversion.
"""

from __future__ import annotations

import warnings
from datetime import UTC, datetime

import astropy.units as u
import numpy as np
import pytest
import synthetic_night as sn
from astropy.coordinates import EarthLocation, SkyCoord, SpectralCoord
from astropy.time import Time
from astropy.utils import iers

from speccat.catalogue import Catalogue, builtin
from speccat.identify import identify
from speccat.model import C_KMS, Spectrum, SpectrumResult
from speccat.physics.doppler import lsrk_correction


@pytest.fixture(scope="module")
def cat() -> Catalogue:
    return builtin()


@pytest.fixture
def rng() -> np.random.Generator:
    return np.random.default_rng(99)


def _factor(spectrum: Spectrum) -> float:
    return lsrk_correction(spectrum).factor


def _line(cat: Catalogue, name: str, v: float, fwhm: float, snr: float, galaxy: bool = False):  # type: ignore[no-untyped-def]
    return sn.TrueLine(name, cat.by_name(name).rest_freq_hz, v, fwhm, snr, galaxy)


def _run(cat: Catalogue, truth: sn.Truth, rng: np.random.Generator, **kw: object) -> SpectrumResult:
    return identify(truth.spectrum, sn.ideal_measurement(truth, rng), cat, **kw)  # type: ignore[arg-type]


def _names(result: SpectrumResult) -> list[str | None]:
    return [d.line.name if d.line else None for d in result.detections]


def test_galaxy_profile_thousands_of_km_s_away_near_an_rrl(
    cat: Catalogue, rng: np.random.Generator
) -> None:
    """A 21 cm galaxy profile whose frequency is that of H167α at +30 km/s: a wide, double-horned
    HI profile at cz ≈ 4 400 km/s, not a recombination line."""
    rrl = cat.by_name("H167a").rest_freq_hz
    f_lsrk = rrl * (1 - 30.0 / C_KMS)
    cz = C_KMS * (1 - f_lsrk / cat.by_name("HI").rest_freq_hz)
    assert 3000 < cz < 6000
    galaxy = sn.TrueLine("HI", cat.by_name("HI").rest_freq_hz, cz, 280.0, 12.0, galaxy=True)
    truth = sn.make_truth([galaxy], frame="BARYCENT", factor_of=_factor, rng=rng, tuned=False)
    det = _run(cat, truth, rng).detections[0]
    assert det.line is not None and det.line.name == "HI"
    assert det.v_lsr_kms is not None and abs(det.v_lsr_kms - cz) < 0.1 * 280.0
    assert "H167a" in [c.name for c in det.candidates]  # ranked, but below


def test_h_and_he_lines_in_one_window(cat: Catalogue, rng: np.random.Generator) -> None:
    lines = [_line(cat, "H110a", -12.0, 26.0, 150.0), _line(cat, "He110a", -12.0, 21.0, 13.0)]
    truth = sn.make_truth(lines, frame="LSRK", factor_of=_factor, rng=rng, tuned=False)
    res = _run(cat, truth, rng)
    assert _names(res) == ["H110a", "He110a"]  # He is 122 km/s higher in frequency
    for det in res.detections:
        assert det.v_lsr_kms is not None and abs(det.v_lsr_kms + 12.0) < 1.0


def test_h_line_without_he_is_not_called_helium(cat: Catalogue, rng: np.random.Generator) -> None:
    """A lone H line in a 600 km/s band: its He reading (122 km/s off) would need an H line
    inside the band, and there is none."""
    truth = sn.make_truth([_line(cat, "H110a", 40.0, 26.0, 60.0)], frame="LSRK",
                          factor_of=_factor, rng=rng, tuned=False, min_span_kms=600.0)  # fmt: skip
    det = _run(cat, truth, rng).detections[0]
    assert det.line is not None and det.line.name == "H110a"
    he = [c for c in det.candidates if c.name == "He110a"]
    assert he and he[0].score < 0.05


def test_lone_narrow_maser_line(cat: Catalogue, rng: np.random.Generator) -> None:
    truth = sn.make_truth([_line(cat, "CH3OH6.7", -35.0, 0.3, 400.0)], frame="LSRK",
                          factor_of=_factor, rng=rng, tuned=False)  # fmt: skip
    det = _run(cat, truth, rng).detections[0]
    assert det.line is not None and det.line.name == "CH3OH6.7"
    assert det.line.score > 0.5
    assert det.v_lsr_kms is not None and abs(det.v_lsr_kms + 35.0) < 0.03


def test_nh3_satellites_are_not_mistaken_for_other_species(
    cat: Catalogue, rng: np.random.Generator
) -> None:
    main = _line(cat, "NH3(1,1)", 8.0, 1.2, 120.0)
    sats = [_line(cat, name, 8.0, 1.2, 120.0 * r) for name, r in sn.NH3_SATELLITES]
    truth = sn.make_truth([main, *sats], frame="LSRK", factor_of=_factor, rng=rng, tuned=False)
    res = _run(cat, truth, rng)
    by_freq = sorted([main, *sats], key=lambda ln: ln.rest_freq_hz, reverse=True)  # v>0: f order
    expected = [ln.name for ln in sorted(by_freq, key=lambda ln: ln.rest_freq_hz)]
    assert _names(res) == expected
    assert all(d.line is not None and d.line.species == "NH3" for d in res.detections)
    for det in res.detections:
        assert det.v_lsr_kms is not None and abs(det.v_lsr_kms - 8.0) < 0.1


def _astropy_topo_factor(spectrum: Spectrum) -> float:
    """f_lsrk / f_topo from astropy SpectralCoord.with_observer_stationary_relative_to("lsrk")
    (the reference library); site, time and direction from the spectrum."""
    assert spectrum.site is not None and spectrum.obs_time is not None
    site = spectrum.site
    t = Time(spectrum.obs_time, scale="utc")
    loc = EarthLocation.from_geodetic(site.lon_deg * u.deg, site.lat_deg * u.deg,
                                      site.height_m * u.m)  # fmt: skip
    target = SkyCoord(spectrum.ra_deg * u.deg, spectrum.dec_deg * u.deg, frame="icrs")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        sc = SpectralCoord(1e9 * u.Hz, observer=loc.get_itrs(t), target=target)
        return float((sc.with_observer_stationary_relative_to("lsrk") / sc).to_value(u.one))


@pytest.mark.slow  # astropy's SpectralCoord and IERS set-up take a few seconds
def test_topocentric_header_where_lsrk_moves_the_line_tens_of_km_s(
    cat: Catalogue, rng: np.random.Generator, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setattr(iers.conf, "auto_download", False)
    monkeypatch.setattr(iers.conf, "auto_max_age", None)
    when = datetime(2026, 3, 20, 23, 0, tzinfo=UTC)  # Earth moving towards RA 18h, as the Sun
    # the direction (of twelve on the equator) where the correction is largest
    probe = [sn.make_truth([], frame="TOPOCENT", factor_of=_factor, rng=rng,
                           direction=(ra, 0.0), when=when) for ra in range(0, 360, 30)]  # fmt: skip
    best = max(probe, key=lambda t: abs(t.lsrk_factor - 1.0))
    direction = (best.spectrum.ra_deg or 0.0, best.spectrum.dec_deg or 0.0)
    line = _line(cat, "H2CO4.8", 12.0, 2.5, -40.0)
    truth = sn.make_truth([line], frame="TOPOCENT", factor_of=_astropy_topo_factor, rng=rng,
                          direction=direction, when=when, tuned=False)  # fmt: skip
    shift_kms = abs(truth.lsrk_factor - 1.0) * C_KMS
    assert shift_kms > 20.0  # the correction moves the line by tens of km/s
    res = _run(cat, truth, rng)
    det = res.detections[0]
    assert det.line is not None and det.line.name == "H2CO4.8"
    assert res.frame_flag is None
    assert det.v_lsr_kms is not None and abs(det.v_lsr_kms - 12.0) < 0.1 * 2.5
    # without the correction the velocity would be off by the shift
    naive = C_KMS * (1 - det.fit.center_hz / det.line.rest_freq_hz)
    assert abs(naive - 12.0) > 20.0


def test_known_velocity_flips_an_ambiguous_identification(
    cat: Catalogue, rng: np.random.Generator
) -> None:
    """H171β at -48 km/s coincides with H136α at about +49 km/s: a lone broad line there is read
    as the commoner α line, unless earlier nights put the source at -48 km/s."""
    line = _line(cat, "H171b", -48.0, 25.0, 80.0)
    truth = sn.make_truth([line], frame="LSRK", factor_of=_factor, rng=rng, tuned=False)
    meas = sn.ideal_measurement(truth, rng)
    plain = identify(truth.spectrum, meas, cat).detections[0]
    assert plain.line is not None and plain.line.name == "H136a"
    assert plain.v_lsr_kms is not None and 40 < plain.v_lsr_kms < 60
    known = {truth.spectrum.source: -48.0}
    learned = identify(truth.spectrum, meas, cat, known_velocities=known).detections[0]
    assert learned.line is not None and learned.line.name == "H171b"
    assert learned.v_lsr_kms is not None and abs(learned.v_lsr_kms + 48.0) < 0.5
