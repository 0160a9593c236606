"""Physics fed by the reduction: N_e from a Voigt fit, and a stacked spectrum measured as any other."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.special import voigt_profile

from speccat.physics import diagnostics, stacking
from speccat.physics.doppler import freq_from_velocity, velocity_from_freq
from speccat.reduce import ReduceSettings, measure

FWHM_PER_SIGMA = 2.0 * np.sqrt(2.0 * np.log(2.0))


@pytest.mark.slow  # a 2048-channel Voigt fit: several seconds on a loaded machine
def test_electron_density_from_a_voigt_fit_to_a_high_n_line() -> None:
    # Pressure broadening (Brocklehurst & Seaton 1972 form, value from memory): an invented
    # H166α line with a Lorentzian of the impact width for N_e = 500 cm^-3, T_e = 8000 K and a
    # 20 km/s Gaussian core; the Voigt fit's Lorentzian FWHM must give N_e back.
    rest = 1424.734e6
    ne_true, te = 500.0, 8000.0
    lorentz = diagnostics.impact_width_hz(166, ne_true, te)
    doppler = diagnostics.width_hz_from_kms(20.0, rest)
    freq = rest + (np.arange(2048) - 1024) * 2.0e3
    rng = np.random.default_rng(11)
    prof = voigt_profile(freq - rest, doppler / FWHM_PER_SIGMA, lorentz / 2.0)
    data = prof / prof.max() + rng.normal(0, 0.002, freq.size)
    m = measure(freq, data, ReduceSettings(profile="voigt"))
    assert m.lines, "the line was not found"
    line = max(m.lines, key=lambda fit: fit.peak)
    assert line.lorentz_fwhm_hz is not None and line.lorentz_fwhm_err_hz is not None
    ne = diagnostics.ne_from_lorentz_cm3(line.lorentz_fwhm_hz, 166, te)
    ne_err = ne * line.lorentz_fwhm_err_hz / line.lorentz_fwhm_hz
    # 10 % floor: the baseline polynomial absorbs part of the Lorentzian wings (~2 % here).
    assert abs(ne - ne_true) < max(3 * ne_err, 0.1 * ne_true)


def test_stacked_spectrum_is_measured_at_the_right_velocity() -> None:
    # Stacking (inverse-variance mean, common practice): 8 invented α lines of one nebula at
    # +40 km/s, each too weak to trust alone, stacked, converted to a Spectrum and measured.
    rng = np.random.default_rng(12)
    vs, ys = [], []
    for _ in range(8):
        v = -250.0 + rng.uniform(0, 1) + 0.8 * np.arange(640)
        vs.append(v)
        ys.append(0.1 * np.exp(-4 * np.log(2) * ((v - 40.0) / 24.0) ** 2)
                  + rng.normal(0, 0.05, v.size))  # fmt: skip
    result = stacking.stack(vs, ys, [0.05] * 8)
    rest = 5.0e9
    spec = stacking.to_spectrum(result, rest, "invented nebula", "K")
    m = measure(spec.freq_hz, spec.intensity["I"])
    assert m.lines, "the stacked line was not found"
    line = max(m.lines, key=lambda fit: fit.snr)
    v = velocity_from_freq(line.center_hz, rest, "radio")
    v_err = line.center_err_hz / rest * 299_792.458
    assert abs(v - 40.0) < max(3 * v_err, 1.0)
    assert line.fwhm_hz == pytest.approx(
        freq_from_velocity(28.0, rest) - freq_from_velocity(52.0, rest), rel=0.25
    )
