"""Blends: components may not cancel each other; wide (double-horned) profiles are one line."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from speccat.io import read
from speccat.reduce import measure
from speccat.reduce.engine import Noise, _simplest
from speccat.reduce.fit import fit_components

SAMPLE = Path(__file__).resolve().parents[2] / "sample_archive"


def _gauss(chan: np.ndarray, amp: float, cen: float, sig: float) -> np.ndarray:
    return amp * np.exp(-0.5 * ((chan - cen) / sig) ** 2)


def _mixed_start() -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """One Gaussian line (peak 0.1, sigma 12) started as an emission + absorption + emission
    blend at nearly one centre: unconstrained, such starts grow into huge cancelling pairs."""
    rng = np.random.default_rng(3)
    x = np.arange(200.0)
    y = _gauss(x, 0.1, 100.0, 12.0) + rng.normal(0.0, 0.0015, x.size)
    p0 = np.array([[0.1, 100, np.log(12)], [-0.02, 101, np.log(10)], [0.01, 104, np.log(9)]])
    return x, y, p0


def _no_cancelling(peaks: np.ndarray, centres: np.ndarray, sigmas: np.ndarray, top: float):
    assert np.all(np.abs(peaks) <= 3.0 * top), peaks
    for i in range(peaks.size):
        for j in range(i + 1, peaks.size):
            if peaks[i] * peaks[j] < 0:
                assert abs(centres[i] - centres[j]) > 0.5 * min(sigmas[i], sigmas[j])


def test_fit_keeps_each_component_sign_and_size() -> None:
    x, y, p0 = _mixed_start()
    fit = fit_components(x, y, p0, "gaussian")
    assert np.all(np.sign(fit.params[:, 0]) == np.sign(p0[:, 0]))
    assert np.all(np.abs(fit.params[:, 0]) <= 3.0 * np.max(np.abs(y)))
    assert fit.params[0, 0] == pytest.approx(0.1, rel=0.05)


def test_pruned_blend_has_no_cancelling_pair() -> None:
    x, y, p0 = _mixed_start()
    fit = _simplest(x, y, p0, Noise(0.0015, np.zeros(0)), 5.3)
    p = fit.params
    _no_cancelling(p[:, 0], p[:, 1], np.exp(p[:, 2]), float(np.max(np.abs(y))))
    assert p.shape[0] == 1
    assert p[0, 1] == pytest.approx(100.0, abs=0.3)


@pytest.mark.parametrize("name", ["nebula07_h109a.fits.gz", "field02_hi_vrad.fits.gz"])
def test_sample_blends_do_not_cancel(name: str) -> None:
    spec = read(SAMPLE / name)[0]
    y = spec.intensity["I"]
    m = measure(spec.freq_hz, y)
    top = float(np.nanmax(np.abs(y - m.continuum)))
    peaks = np.array([line.peak for line in m.lines])
    cen = np.array([line.center_hz for line in m.lines])
    sig = np.array([line.fwhm_hz for line in m.lines]) / 2.3548
    _no_cancelling(peaks, cen, sig, top)
    assert 1 <= len(m.lines) <= 3  # nebula07: H109a + He109a; field02: two HI components


def _horned(chan: np.ndarray, cen: float, half: float, ramp: float, dip: float) -> np.ndarray:
    """Double-horned profile, horns of height 1 at |x| = half, a parabolic dip to ``dip`` at
    the centre, linear outer edges reaching 0 at |x| = half + ramp: the 50 % crossings are at
    |x| = half + ramp/2 exactly, so W50 = 2 half + ramp (analytic)."""
    x = np.abs(chan - cen)
    inner = 1.0 - (1.0 - dip) * (1.0 - (x / half) ** 2)
    return np.where(x <= half, inner, np.clip((half + ramp - x) / ramp, 0.0, 1.0))


@pytest.mark.parametrize("seed", [0, 1])
def test_double_horned_profile_is_one_w50_detection(seed: int) -> None:
    rng = np.random.default_rng(seed)
    chan = np.arange(2048, dtype=float)
    df = 2.0e3
    freq = 1.4e9 + df * chan
    cen, half, ramp = 1000.3, 60.0, 12.0
    y = 0.3 + _horned(chan, cen, half, ramp, 0.6) + rng.normal(0.0, 0.02, chan.size)
    m = measure(freq, y)
    assert len(m.lines) == 1
    line = m.lines[0]
    assert line.profile == "w50"
    w50 = 2.0 * half + ramp  # analytic, see _horned
    assert abs(line.fwhm_chan - w50) <= 1.0
    assert line.w50_hz == pytest.approx(line.fwhm_hz)
    assert abs(line.center_chan - cen) <= 1.0
    assert abs(line.center_hz - (1.4e9 + df * cen)) <= df
    assert line.w20_hz is not None and line.w20_hz > line.w50_hz
    assert line.peak == pytest.approx(1.0, abs=0.15)  # the highest horn
    assert line.snr == pytest.approx(line.peak / m.rms)
    # edge errors: rms / slope (1/ramp per channel) per edge, about 0.24 channel here
    assert 0.05 * df < line.center_err_hz < 1.0 * df
    # direct sum: area of the analytic profile, trapezoid edges + parabolic top
    area = (2 * half * (1.0 - (1.0 - 0.6) * 2.0 / 3.0) + ramp) * df
    assert line.integral_sum_hz == pytest.approx(area, abs=4 * line.integral_sum_err_hz)


# (file, row, cz optical km/s, W50 km/s) from sample_archive/README.md (the generator's truth)
GALAXIES = [
    ("galaxy21_hi.fits", 0, 3120.0, 280.0),
    ("galaxy28_hi_felo.fits", 0, 4475.0, 190.0),
    ("galaxy34_hi.csv", 0, 2260.0, 350.0),
    ("galaxy40_hi_vopt.fits", 0, 5810.0, 240.0),
    ("galaxy52_hi.fit", 0, 1870.0, 150.0),
    ("galaxies45-47_hi.fits.gz", 0, 3650.0, 210.0),
    ("galaxies45-47_hi.fits.gz", 1, 3710.0, 320.0),
    ("galaxies45-47_hi.fits.gz", 2, 3580.0, 120.0),
    ("galaxy21_hi_ripple.fits", 0, 3120.0, 280.0),
]


@pytest.mark.parametrize(("name", "row", "cz_kms", "w50_kms"), GALAXIES)
def test_sample_galaxy_is_one_w50_detection(name: str, row: int, cz_kms: float, w50_kms: float):
    spec = read(SAMPLE / name)[row]
    m = measure(spec.freq_hz, spec.intensity["I"])
    assert len(m.lines) == 1
    line = m.lines[0]
    assert line.profile == "w50" and line.kind.value == "emission"
    # optical convention: f = f0 / (1 + cz/c), df = f dv / (c (1 + z)) (common practice)
    c_kms, f0 = 299792.458, 1420.405751768e6
    z = cz_kms / c_kms
    f = f0 / (1.0 + z)
    w50_hz = f * w50_kms / (c_kms * (1.0 + z))
    assert line.center_hz == pytest.approx(f, abs=0.05 * w50_hz)
    assert line.fwhm_hz == pytest.approx(w50_hz, rel=0.05)


def test_ripple_must_span_the_band() -> None:
    from speccat.reduce.baseline import spans_band

    chan = np.arange(2048, dtype=float)
    good = np.ones(chan.size, dtype=bool)
    ripple = np.sin(2 * np.pi * chan / 230.0)
    assert spans_band(ripple, good, 230.0)
    lump = np.where(np.abs(chan - 500.0) < 170.0, 1.0, 0.0)  # one wide feature, one third
    assert not spans_band(lump - lump.mean(), good, 700.0)


@pytest.mark.parametrize("seed", [0, 1])
def test_narrow_self_absorption_stays_two_gaussian_lines(seed: int) -> None:
    """A narrow absorption dip on a broad emission line is a line of its own, not a W50
    profile; and no runaway component appears (seed 1 once gave a peak of 1e6)."""
    rng = np.random.default_rng(seed)
    chan = np.arange(2048, dtype=float)
    y = _gauss(chan, 1.0, 1000.0, 60.0 / 2.3548) + _gauss(chan, -0.4, 1001.0, 6.0 / 2.3548)
    m = measure(1.4e9 + 2.0e3 * chan, y + rng.normal(0.0, 0.02, chan.size))
    assert [line.profile for line in m.lines] == ["gaussian", "gaussian"]
    assert sorted(round(line.peak, 1) for line in m.lines) == [-0.4, 1.0]
    assert all(abs(line.center_chan - 1000.5) < 2.0 for line in m.lines)


def test_ripple_under_a_galaxy_profile_is_found() -> None:
    """README truth: ripple period 0.9 MHz (230.4 channels of 3.90625 kHz), 0.004 Jy."""
    spec = read(SAMPLE / "galaxy21_hi_ripple.fits")[0]
    m = measure(spec.freq_hz, spec.intensity["I"])
    assert "baseline-ripple" in m.flags
    period_hz = m.baseline.ripple_period_chan * float(np.median(np.diff(spec.freq_hz)))
    assert period_hz == pytest.approx(0.9e6, rel=0.03)
    assert m.baseline.ripple_amp == pytest.approx(0.004, abs=0.001)


def test_a_run_away_fit_gives_no_usable_errors_instead_of_crashing() -> None:
    """A Jacobian overflowed by a run-away amplitude must not reach an SVD that fails."""
    from speccat.reduce.fit import _inverse

    bad = np.array([[np.inf, 1.0], [1.0, np.nan]])
    assert np.all(np.isinf(_inverse(bad)))
    good = np.array([[4.0, 0.0], [0.0, 2.0]])
    np.testing.assert_allclose(_inverse(good), np.diag([0.25, 0.5]))
