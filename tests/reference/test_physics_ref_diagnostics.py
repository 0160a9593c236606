"""Line diagnostics against their published forms and first-principles derivations."""

from __future__ import annotations

import math

import astropy.constants as const
import astropy.units as u
import numpy as np
import pytest

from speccat.errors import PhysicsError
from speccat.physics import diagnostics as dg

#: HI spontaneous emission coefficient as used in Wilson, Rohlfs & Hüttemeister, Tools of
#: Radio Astronomy (value from memory: 2.86888e-15 s^-1); the 1.823e18 and 2.356e5 constants
#: follow from it.
A10_TOOLS = 2.86888e-15 / u.s
NU_HI = 1420.405751768 * u.MHz  # hyperfine frequency of H (common practice)


def _lte_line_to_continuum(n: int, te_k: float, fwhm_kms: float) -> tuple[float, float]:
    """(ν GHz, T_L/T_C) of Hnα in LTE, optically thin, from first principles.

    Line: ∫κ dν = (π e²/m_e c) f N_n (1 − e^{−hν/kT}) with N_n from the Saha–Boltzmann
    equation (cgs), Menzel 1968 oscillator strength f ≈ 0.190775 n (1 + 1.5/n) (value from
    memory), Gaussian profile of FWHM Δν. Continuum: Altenhoff et al. 1960 free-free
    approximation τ_C = 8.235e-2 T^-1.35 ν_GHz^-2.1 EM (value from memory), a(ν,T) = 1.
    """
    e, me = const.e.esu.value, const.m_e.cgs.value
    c, h, k = const.c.cgs.value, const.h.cgs.value, const.k_B.cgs.value
    ryd_h = (const.Ryd * const.c).to_value(u.Hz) / (1 + const.m_e.value / const.m_p.value)
    nu = ryd_h * (1 / n**2 - 1 / (n + 1) ** 2)
    f = 0.190775 * n * (1 + 1.5 / n)
    em = 1.0  # pc cm^-6, cancels
    pop = (
        n**2
        * (h**2 / (2 * math.pi * me * k * te_k)) ** 1.5
        * math.exp(h * ryd_h / n**2 / (k * te_k))
    )
    int_tau = math.pi * e**2 / (me * c) * f * pop * (1 - math.exp(-h * nu / (k * te_k)))
    int_tau *= em * u.pc.to(u.cm)
    dnu = nu * fwhm_kms / const.c.to_value(u.km / u.s)
    tau_l = int_tau * 2 * math.sqrt(math.log(2) / math.pi) / dnu
    tau_c = 8.235e-2 * te_k**-1.35 * (nu / 1e9) ** -2.1 * em
    return nu / 1e9, tau_l / tau_c


@pytest.mark.parametrize("n", [76, 91, 109, 137, 166])
@pytest.mark.parametrize("te_k", [5000.0, 8000.0, 12000.0])
def test_te_formula_inverts_lte_physics(n: int, te_k: float) -> None:
    # Tools of Radio Astronomy (value from memory) T_e* = [7103.3 ν^1.1 (T_C/T_L) ΔV^-1]^0.87
    # must return the temperature used in the first-principles LTE line-to-continuum ratio.
    nu_ghz, ratio = _lte_line_to_continuum(n, te_k, 25.0)
    assert dg.te_lte_k(nu_ghz, ratio, 25.0, y_plus=0.0) == pytest.approx(te_k, rel=0.03)


def test_te_published_form_and_helium_correction() -> None:
    # Published form (Tools of Radio Astronomy): helium enters as (1 + y+)^-1 inside the bracket.
    expected = (7103.3 * 8.5**1.1 / 0.12 / 22.0 / 1.08) ** 0.87
    assert dg.te_lte_k(8.5, 0.12, 22.0, 0.08) == pytest.approx(expected, rel=1e-12)
    ratio = dg.te_lte_k(8.5, 0.12, 22.0, 0.1) / dg.te_lte_k(8.5, 0.12, 22.0, 0.0)
    assert ratio == pytest.approx(1.1**-0.87)
    # Exponent consistency: 0.87 ≈ 1/1.15 (T_L/T_C ∝ T_e^-1.15), to 0.05 %.
    assert pytest.approx(1 / 1.15, rel=5e-4) == 0.87


def test_hi_column_constant_from_physical_constants() -> None:
    # N = 32π k ν² / (3 h c³ A10) ∫T_B dv, optically thin, T_s ≫ hν/k (e.g. Tools of Radio
    # Astronomy, 21 cm chapter; Dickey & Lockman 1990, ARA&A 28, 215, eq. 3).
    coeff = 32 * math.pi * const.k_B * NU_HI**2 / (3 * const.h * const.c**3 * A10_TOOLS)
    per = coeff.to_value(u.cm**-2 / (u.K * u.km / u.s))
    assert pytest.approx(per, rel=1e-3) == dg.N_HI_PER_K_KMS
    assert dg.n_hi_cm2(250.0) == pytest.approx(250.0 * 1.823e18)


def test_hi_mass_constant_from_physical_constants() -> None:
    # M = m_H 16π D² ∫S dv / (3 h c A10): 3/4 of the atoms in the upper level each emit
    # A10 photons of hν per second (common practice; e.g. Roberts 1962). m_H = 1.00784 u.
    coeff = 16 * math.pi * 1.00784 * u.u / (3 * const.h * const.c * A10_TOOLS)
    per = coeff.to_value(u.Msun / (u.Mpc**2 * u.Jy * u.km / u.s))
    assert pytest.approx(per, rel=1e-3) == dg.M_HI_PER_MPC2_JY_KMS
    # Worked example: 10 Jy km/s at 50 Mpc (= 3500 km/s / 70 km/s/Mpc).
    dist = dg.hubble_distance_mpc(3500.0)
    assert dist == pytest.approx(50.0)
    assert dg.hi_mass_msun(10.0, dist) == pytest.approx(2.356e5 * 2500 * 10)


def test_pressure_broadening_published_form_and_inverse() -> None:
    # Δν_L = 8.2 Hz T_e^-0.1 N_e (n/100)^7.4 (Brocklehurst & Seaton 1972 via Gordon &
    # Sorochenko 2009, value from memory).
    width = dg.impact_width_hz(166, 1.0e3, 8000.0)
    assert width == pytest.approx(8.2 * 8000.0**-0.1 * 1.0e3 * 1.66**7.4)
    assert dg.ne_from_lorentz_cm3(width, 166, 8000.0) == pytest.approx(1.0e3)
    # Steep n dependence: the same width means (n2/n1)^7.4 lower density at higher n.
    ratio = dg.ne_from_lorentz_cm3(5e4, 100) / dg.ne_from_lorentz_cm3(5e4, 200)
    assert ratio == pytest.approx(2.0**7.4)
    # At H166α (1.42 GHz), N_e = 1e3 cm^-3: Lorentzian ~ the 25 km/s Doppler width, which is
    # why low-frequency RRLs of compact HII regions are pressure broadened (common practice).
    doppler_hz = dg.width_hz_from_kms(25.0, 1.4249e9)
    assert 0.3 < width / doppler_hz < 3.0


def test_helium_abundance_is_the_intensity_ratio() -> None:
    # y+ = ∫T_L(He) dv / ∫T_L(H) dv for lines of the same n (Tools of Radio Astronomy).
    assert dg.y_plus(0.8, 10.0) == pytest.approx(0.08)


@pytest.mark.parametrize(
    "call",
    [lambda: dg.te_lte_k(-1.0, 0.1, 20.0), lambda: dg.te_lte_k(5.0, 0.0, 20.0),
     lambda: dg.te_lte_k(5.0, 0.1, math.nan), lambda: dg.y_plus(1.0, 0.0),
     lambda: dg.n_hi_cm2(-3.0), lambda: dg.hi_mass_msun(1.0, 0.0),
     lambda: dg.hubble_distance_mpc(-10.0), lambda: dg.impact_width_hz(3, 1.0, 1e4),
     lambda: dg.ne_from_lorentz_cm3(-1.0, 100)],
)  # fmt: skip
def test_outside_the_domain_is_a_clear_error(call: object) -> None:
    with pytest.raises(PhysicsError):
        call()  # type: ignore[operator]


def test_vectorised_inputs_are_not_silently_accepted() -> None:
    with pytest.raises(PhysicsError):
        dg.n_hi_cm2(np.array([1.0, 2.0]))  # type: ignore[arg-type]
