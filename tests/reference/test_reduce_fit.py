"""Fits of the reduction engine against astropy.modeling and against published error formulae."""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from astropy.modeling import fitting, models

from speccat.reduce import ReduceSettings, measure
from speccat.reduce.fit import FWHM_PER_SIGMA, components, fit_components

FWHM = FWHM_PER_SIGMA


def _astropy_fit(x: np.ndarray, y: np.ndarray, start: list[tuple[float, float, float]]):
    """Reference: astropy.modeling Gaussian1D (sum for blends) + TRFLSQFitter."""
    compound = None
    for amp, mean, sig in start:
        g = models.Gaussian1D(amplitude=amp, mean=mean, stddev=sig)
        compound = g if compound is None else compound + g
    fitter = fitting.TRFLSQFitter()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        result = fitter(compound, x, y, maxiter=2000, acc=1e-12)
    return np.asarray(result.parameters).reshape(-1, 3)


@pytest.mark.parametrize(
    "truth",
    [
        [(5.0, 120.3, 7.0)],
        [(-3.0, 60.8, 2.1)],
        [(8.0, 100.0, 9.0), (5.0, 121.0, 6.0)],
    ],
    ids=["emission", "narrow-absorption", "blend"],
)
def test_fit_matches_astropy_modeling(rng: np.random.Generator, truth) -> None:
    x = np.arange(0.0, 240.0)
    y = rng.normal(0.0, 0.4, x.size)
    for amp, mean, sig in truth:
        y += amp * np.exp(-0.5 * ((x - mean) / sig) ** 2)
    start = [(a * 0.8, m + 1.0, s * 1.2) for a, m, s in truth]
    p0 = np.array([[a, m, np.log(s)] for a, m, s in start])
    ours = fit_components(x, y, p0, "gaussian").params
    ours = np.column_stack((ours[:, 0], ours[:, 1], np.exp(ours[:, 2])))
    ref = _astropy_fit(x, y, start)
    # reference library: astropy.modeling Gaussian1D + TRFLSQFitter, same data, 1e-4 relative
    np.testing.assert_allclose(ours[:, 0], ref[:, 0], rtol=1e-4)
    np.testing.assert_allclose(ours[:, 1], ref[:, 1], rtol=1e-4)
    np.testing.assert_allclose(ours[:, 2], ref[:, 2], rtol=1e-4)


def test_measure_matches_astropy_on_its_residual(rng: np.random.Generator) -> None:
    """End to end: measure()'s line equals an astropy fit to (data - measure's baseline)."""
    n = 2048
    chan = np.arange(n, dtype=float)
    freq = 1.0e9 + 2.0e3 * chan
    y = 3.0 + rng.normal(0.0, 0.5, n) + 6.0 * np.exp(-0.5 * ((chan - 900.4) / 6.0) ** 2)
    m = measure(freq, y)
    assert len(m.lines) == 1
    line = m.lines[0]
    sig = line.fwhm_chan / FWHM
    lo, hi = int(line.center_chan - 4 * sig), int(line.center_chan + 4 * sig) + 1
    resid = (y - m.baseline.evaluate())[lo:hi]
    ref = _astropy_fit(chan[lo:hi], resid, [(line.peak, line.center_chan, sig)])[0]
    # the window differs from measure()'s own by at most a channel, so agreement is within
    # a small fraction of the 1-sigma errors rather than 1e-4 (astropy.modeling reference)
    assert abs(line.peak - ref[0]) < 0.2 * line.peak_err
    assert abs(line.center_chan - ref[1]) < 0.2 * line.center_err_hz / 2.0e3
    assert abs(line.fwhm_chan - FWHM * ref[2]) < 0.2 * line.fwhm_err_hz / 2.0e3
    assert line.center_hz == pytest.approx(1.0e9 + 2.0e3 * line.center_chan, rel=1e-12)


def _pulls(rng: np.random.Generator, trials: int):
    """Fit `trials` noise realisations of one Gaussian end to end with measure()."""
    n, amp, cen, fwhm, rms = 1024, 1.0, 500.3, 12.0, 0.06
    chan = np.arange(n, dtype=float)
    freq = 5.0e9 + 1.0e3 * chan
    clean = amp * np.exp(-0.5 * ((chan - cen) / (fwhm / FWHM)) ** 2)
    noise = rng.normal(0.0, rms, (trials, n))
    out = []
    settings = ReduceSettings(max_baseline_order=1, ripple=False)
    for row in noise:
        m = measure(freq, clean + row, settings)
        if len(m.lines) != 1:
            continue
        ln = m.lines[0]
        out.append(
            (
                (ln.peak - amp) / ln.peak_err,
                (ln.center_chan - cen) / (ln.center_err_hz / 1.0e3),
                (ln.fwhm_chan - fwhm) / (ln.fwhm_err_hz / 1.0e3),
                ln.center_chan - cen,
                ln.center_err_hz / 1.0e3,
            )
        )
    return np.array(out), (amp, fwhm, rms)


@pytest.mark.slow
def test_error_calibration_and_landman_centre_error(rng: np.random.Generator) -> None:
    pulls, (amp, fwhm, rms) = _pulls(rng, 600)
    assert pulls.shape[0] >= 590  # a 17-sigma line is found every time
    std = pulls[:, :3].std(axis=0, ddof=1)
    # (fit - truth)/error must have unit spread if the errors are calibrated: common practice
    # (covariance scaled by reduced chi^2, Numerical Recipes 3rd ed. sec. 15.5); 0.9-1.1
    assert np.all((std > 0.9) & (std < 1.1)), std
    assert np.all(np.abs(pulls[:, :3].mean(axis=0)) < 0.15)
    # Landman, Roussel-Dupre & Tanigawa (1982, ApJ 261, 732): centroid error of a Gaussian in
    # white noise, sigma_x0 = (sigma/A) sqrt(2 s delta / sqrt(pi)) = 0.69 (sigma/A) sqrt(W delta)
    # (form from memory; re-derived here from the Fisher information of a sampled Gaussian)
    expected = (rms / amp) * np.sqrt(2.0 * (fwhm / FWHM) * 1.0 / np.sqrt(np.pi))
    assert expected == pytest.approx(0.69 * (rms / amp) * np.sqrt(fwhm), rel=0.01)
    scatter = pulls[:, 3].std(ddof=1)
    assert scatter == pytest.approx(expected, rel=0.10)
    assert np.median(pulls[:, 4]) == pytest.approx(expected, rel=0.05)


@pytest.mark.parametrize(("sigma_g", "gamma"), [(8.0, 6.0), (5.0, 2.0), (3.0, 8.0)])
def test_voigt_recovers_lorentzian_width(
    rng: np.random.Generator, sigma_g: float, gamma: float
) -> None:
    """Voigt option: scipy.special.voigt_profile (reference implementation) as the truth."""
    from scipy.special import voigt_profile

    n = 4096
    chan = np.arange(n, dtype=float)
    freq = 8.0e9 + 500.0 * chan
    y = 40.0 * voigt_profile(chan - 2000.0, sigma_g, gamma) + rng.normal(0.0, 0.01, n)
    m = measure(freq, y, ReduceSettings(profile="voigt"))
    assert len(m.lines) == 1
    line = m.lines[0]
    assert line.profile == "voigt" and line.lorentz_fwhm_hz is not None
    assert line.lorentz_fwhm_err_hz is not None
    lorentz_chan = line.lorentz_fwhm_hz / 500.0
    assert abs(lorentz_chan - 2 * gamma) < 4 * line.lorentz_fwhm_err_hz / 500.0
    assert abs(lorentz_chan - 2 * gamma) < 0.05 * 2 * gamma
    # Olivero & Longbothum (1977, JQSRT 17, 233): f_V = 0.5346 f_L + sqrt(0.2166 f_L^2 + f_G^2)
    fv = 0.5346 * 2 * gamma + np.sqrt(0.2166 * (2 * gamma) ** 2 + (FWHM * sigma_g) ** 2)
    assert line.fwhm_chan == pytest.approx(fv, rel=0.02)
    assert line.peak == pytest.approx(40.0 * voigt_profile(0.0, sigma_g, gamma), rel=0.01)
    assert line.integral_fit_hz == pytest.approx(40.0 * 500.0, rel=0.01)


def test_component_errors_propagate_to_integral(rng: np.random.Generator) -> None:
    """Integral = sqrt(2 pi) A s (Gaussian area, common practice) with propagated error."""
    x = np.arange(200.0)
    y = 4.0 * np.exp(-0.5 * ((x - 100.0) / 5.0) ** 2) + rng.normal(0, 0.2, x.size)
    fit = fit_components(x, y, np.array([[3.0, 99.0, np.log(4.0)]]), "gaussian")
    comp = components(fit)[0]
    s = np.exp(fit.params[0, 2])
    assert comp.area == pytest.approx(np.sqrt(2 * np.pi) * fit.params[0, 0] * s, rel=1e-9)
    j = np.array([np.sqrt(2 * np.pi) * s, 0.0, np.sqrt(2 * np.pi) * fit.params[0, 0] * s])
    assert comp.area_err == pytest.approx(float(np.sqrt(j @ fit.cov @ j)), rel=1e-4)


@pytest.mark.slow
def test_errors_stay_calibrated_in_hanning_smoothed_noise(rng: np.random.Generator) -> None:
    """Correlated noise (Hanning: rho(1) = 2/3, rho(2) = 1/6): the fit errors are inflated by
    the measured correlation factor 1 + 2 sum rho(l) exp(-l^2/4s^2), so the pulls keep unit
    spread (common practice: noise of correlated sums, sum_ij k_i k_j rho(i-j))."""
    n, amp, cen, fwhm = 1024, 1.0, 500.3, 14.0
    chan = np.arange(n, dtype=float)
    freq = 5.0e9 + 1.0e3 * chan
    clean = amp * np.exp(-0.5 * ((chan - cen) / (fwhm / FWHM)) ** 2)
    settings = ReduceSettings(max_baseline_order=1, ripple=False)
    pulls = []
    for _ in range(300):
        white = rng.normal(0.0, 0.12, n + 2)
        noise = 0.25 * white[:-2] + 0.5 * white[1:-1] + 0.25 * white[2:]
        m = measure(freq, clean + noise, settings)
        if len(m.lines) != 1:
            continue
        ln = m.lines[0]
        pulls.append(
            ((ln.peak - amp) / ln.peak_err, (ln.center_chan - cen) / (ln.center_err_hz / 1.0e3))
        )
    arr = np.array(pulls)
    assert arr.shape[0] >= 290
    std = arr.std(axis=0, ddof=1)
    assert np.all((std > 0.85) & (std < 1.15)), std
