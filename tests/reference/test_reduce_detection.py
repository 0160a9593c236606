"""Line finding and baseline removal of speccat.reduce on synthetic spectra.

"5 sigma" below means a line peak of 5 x the per-channel rms; the detection threshold itself
(ReduceSettings.detect_sigma) is in sigma of each matched-filtered spectrum.
"""

from __future__ import annotations

import numpy as np
import pytest

from speccat.reduce import ReduceSettings, measure

FWHM = 2.0 * np.sqrt(2.0 * np.log(2.0))
DF = 1.0e3


def _axis(n: int = 8192) -> tuple[np.ndarray, np.ndarray]:
    chan = np.arange(n, dtype=float)
    return chan, 1.6e9 + DF * chan


@pytest.mark.slow
def test_false_alarm_rate_on_pure_noise(rng: np.random.Generator) -> None:
    chan, freq = _axis()
    trials = 600
    false_lines = sum(
        len(measure(freq, rng.normal(0.0, 1.0, chan.size)).lines) for _ in range(trials)
    )
    # the bound stated in ReduceSettings' docstring (issue requirement): <= 0.01 per spectrum;
    # for Gaussian white noise the matched-filter tail is the normal one (common practice)
    assert false_lines / trials <= 0.01


@pytest.mark.slow
@pytest.mark.parametrize("fwhm_chan", [3, 5, 10, 20, 50, 100])
def test_completeness_for_five_sigma_peaks(rng: np.random.Generator, fwhm_chan: int) -> None:
    chan, freq = _axis()
    trials, found = 40, 0
    for _ in range(trials):
        centre = rng.uniform(400.0, chan.size - 400.0)
        y = rng.normal(0.0, 1.0, chan.size)
        y += 5.0 * np.exp(-0.5 * ((chan - centre) / (fwhm_chan / FWHM)) ** 2)
        lines = measure(freq, y).lines
        found += any(abs(ln.center_chan - centre) < max(fwhm_chan / 2, 2) for ln in lines)
    # matched-filter S/N of a Gaussian of peak A: (A/rms) (sqrt(pi) s)^(1/2) >= 7.5 for
    # FWHM >= 3 channels, so the default 5.3 threshold finds > 90 % (common practice)
    assert found / trials > 0.9


def _double_horn(
    chan: np.ndarray, centre: float, half: float, edge: float, peak: float, trough: float
) -> np.ndarray:
    """Horns of height `peak` at centre +/- half, parabolic trough `trough` between them,
    Gaussian edges of sigma `edge` outside: W_f = 2 (half + edge sqrt(2 ln(1/f))) while
    trough > f peak (analytic)."""
    u = np.abs(chan - centre)
    inner = trough + (peak - trough) * (u / half) ** 2
    outer = peak * np.exp(-0.5 * ((u - half) / edge) ** 2)
    return np.where(u <= half, inner, outer)


def test_w50_w20_of_double_horned_profile(rng: np.random.Generator) -> None:
    chan, freq = _axis(4096)
    half, edge = 60.0, 8.0
    y = 5.0 + rng.normal(0.0, 0.2, chan.size)
    y += _double_horn(chan, 2000.3, half, edge, peak=10.0, trough=6.0)
    m = measure(freq, y)
    assert m.lines
    w50 = {ln.w50_hz for ln in m.lines}
    w20 = {ln.w20_hz for ln in m.lines}
    assert len(w50) == 1 and len(w20) == 1  # one profile, one blend group
    w50_hz, w20_hz = w50.pop(), w20.pop()
    assert w50_hz is not None and w20_hz is not None
    # analytic widths of the profile above (peak-fraction definition, e.g. Haynes et al. 1999)
    true_w50 = 2 * (half + edge * np.sqrt(2 * np.log(2.0)))
    true_w20 = 2 * (half + edge * np.sqrt(2 * np.log(5.0)))
    assert abs(w50_hz / DF - true_w50) < 1.0
    assert abs(w20_hz / DF - true_w20) < 1.5
    total = sum(ln.integral_fit_hz for ln in m.lines) / DF
    exact = float(np.sum(_double_horn(chan, 2000.3, half, edge, 10.0, 6.0)))
    assert total == pytest.approx(exact, rel=0.02)


def test_polynomial_plus_ripple_baseline_removed(rng: np.random.Generator) -> None:
    chan, freq = _axis()
    x = 2 * chan / (chan.size - 1) - 1
    rms = 1.0
    truth = 10.0 + 2.0 * x - 3.0 * x**2 + 1.5 * x**3 + 1.2 * np.sin(2 * np.pi * chan / 350.0 + 1.0)
    lines = 8.0 * np.exp(-0.5 * ((chan - 2500.0) / 6.0) ** 2)
    lines -= 6.0 * np.exp(-0.5 * ((chan - 6000.0) / 15.0) ** 2)
    m = measure(freq, truth + lines + rng.normal(0.0, rms, chan.size))
    assert "baseline-ripple" in m.flags
    structure = m.baseline.evaluate() - truth
    # issue requirement: residual baseline structure below 0.2 sigma rms
    assert np.sqrt(np.mean(structure**2)) < 0.2 * rms
    centres = sorted(ln.center_chan for ln in m.lines)
    assert len(centres) == 2
    assert centres == pytest.approx([2500.0, 6000.0], abs=2.0)


def test_default_threshold_is_the_documented_one() -> None:
    doc = ReduceSettings.__doc__ or ""
    assert f"default {ReduceSettings().detect_sigma}" in doc
