"""Line diagnostics: electron temperature, helium abundance, HI column and mass, electron density.

Every function takes and returns plain floats in the units named in its arguments, checks its
domain and raises PhysicsError (a SpeccatError) with a one-line message outside it.
"""

from __future__ import annotations

import math
import numbers

from speccat.errors import PhysicsError
from speccat.model import C_KMS

#: N_HI per unit ∫T_B dv, cm⁻² (K km/s)⁻¹, optically thin 21 cm emission
#: (Wilson, Rohlfs & Hüttemeister, Tools of Radio Astronomy; Dickey & Lockman 1990, ARA&A 28).
N_HI_PER_K_KMS = 1.823e18
#: M_HI per D² ∫S dv, M☉ Mpc⁻² (Jy km/s)⁻¹ (e.g. Roberts 1962; common practice).
M_HI_PER_MPC2_JY_KMS = 2.356e5
#: Default Hubble constant for Hubble-flow distances, km/s/Mpc.
H0_DEFAULT = 70.0
#: Singly ionised helium abundance assumed when none is measured (common practice, ~0.08).
Y_PLUS_DEFAULT = 0.08


def _positive(name: str, value: float) -> float:
    if not (isinstance(value, numbers.Real) and math.isfinite(value) and value > 0):
        raise PhysicsError(f"{name} must be a positive number, got {value}")
    return float(value)


def _non_negative(name: str, value: float) -> float:
    if not (isinstance(value, numbers.Real) and math.isfinite(value) and value >= 0):
        raise PhysicsError(f"{name} must be zero or positive, got {value}")
    return float(value)


def te_lte_k(freq_ghz: float, line_to_continuum: float, fwhm_kms: float,
             y_plus: float = Y_PLUS_DEFAULT) -> float:  # fmt: skip
    """LTE electron temperature T_e* (K) from a recombination line's T_L/T_C and FWHM.

    T_e* = [7103.3 (ν/GHz)^1.1 (T_C/T_L) (ΔV/km s⁻¹)⁻¹ (1 + y⁺)⁻¹]^0.87 K
    (Wilson, Rohlfs & Hüttemeister, Tools of Radio Astronomy, recombination-line chapter —
    value from memory). It inverts T_L ΔV/T_C = 6985/a(ν,T_e) ν^1.1 T_e^-1.15 (1+y⁺)^-1 with
    a ≈ 0.9833, hence the exponent 0.87 ≈ 1/1.15 and 7103.3 ≈ 6985/a.
    """
    _positive("frequency", freq_ghz)
    ratio = _positive("line-to-continuum ratio", line_to_continuum)
    width = _positive("FWHM", fwhm_kms)
    y = _non_negative("y+", y_plus)
    return float((7103.3 * freq_ghz**1.1 / ratio / width / (1.0 + y)) ** 0.87)


def y_plus(he_integral: float, h_integral: float) -> float:
    """Singly ionised helium abundance y⁺ = N(He⁺)/N(H⁺) from He and H lines of the same n.

    The ratio of integrated intensities (or of peak × FWHM) of the He and H recombination
    lines; for the same n and Δn the line strengths per ion are equal (Wilson, Rohlfs &
    Hüttemeister, Tools of Radio Astronomy; common practice).
    """
    he = _non_negative("He integral", he_integral)
    return he / _positive("H integral", h_integral)


def n_hi_cm2(integral_k_kms: float) -> float:
    """HI column density (cm⁻²), optically thin: N = 1.823×10¹⁸ ∫T_B dv (K km/s)."""
    return N_HI_PER_K_KMS * _non_negative("integral", integral_k_kms)


def hubble_distance_mpc(v_sys_kms: float, h0: float = H0_DEFAULT) -> float:
    """Hubble-flow distance D = v/H₀ (Mpc); v in km/s, H₀ in km/s/Mpc (low-z, cz ≪ c)."""
    return _positive("systemic velocity", v_sys_kms) / _positive("H0", h0)


def hi_mass_msun(flux_jy_kms: float, dist_mpc: float) -> float:
    """HI mass (M☉) of an optically thin source: M = 2.356×10⁵ D² ∫S dv, D Mpc, ∫S dv Jy km/s."""
    return (
        M_HI_PER_MPC2_JY_KMS
        * _positive("distance", dist_mpc) ** 2
        * _non_negative("flux integral", flux_jy_kms)
    )


def impact_width_hz(n: int, ne_cm3: float, te_k: float) -> float:
    """Impact (pressure) broadening FWHM of an α recombination line (Hz).

    Δν_L = 8.2 Hz × (T_e/K)^-0.1 × (N_e/cm⁻³) × (n/100)^7.4 — the fit to Brocklehurst &
    Seaton 1972 (after Griem 1967) as given in Gordon & Sorochenko 2009, Radio Recombination
    Lines, chapter 2 (value from memory). Valid for Δn = 1 only.
    """
    if not (isinstance(n, numbers.Integral) and n >= 20):
        raise PhysicsError(f"principal quantum number must be an integer >= 20, got {n}")
    te = _positive("T_e", te_k)
    return 8.2 * te**-0.1 * _non_negative("N_e", ne_cm3) * (int(n) / 100) ** 7.4


def ne_from_lorentz_cm3(lorentz_fwhm_hz: float, n: int, te_k: float = 1.0e4) -> float:
    """Electron density (cm⁻³) from the Lorentzian FWHM (Hz) of a Voigt fit to an α line.

    Inverts ``impact_width_hz`` (Brocklehurst & Seaton 1972 / Griem 1967, as given in Gordon &
    Sorochenko 2009 — value from memory); weakly dependent on T_e (T_e^-0.1).
    """
    width = _non_negative("Lorentzian FWHM", lorentz_fwhm_hz)
    return width / impact_width_hz(n, 1.0, te_k)


def width_hz_from_kms(width_kms: float, freq_hz: float) -> float:
    """A width in km/s at ``freq_hz`` as a width in Hz (radio convention: Δν = ν Δv / c)."""
    return _non_negative("width", width_kms) * _positive("frequency", freq_hz) / C_KMS
