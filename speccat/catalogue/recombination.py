"""Radio recombination lines computed from the Rydberg formula, vectorised over n.

For an electron falling from level n + Δn to level n around a singly charged ion core of mass
M_core (Bohr model with the reduced-mass correction; see e.g. Gordon & Sorochenko 2009,
"Radio Recombination Lines", Springer)::

    ν = R_M c (1/n² − 1/(n + Δn)²),   R_M = R∞ / (1 + m_e / M_core)

M_core is the proton for hydrogen and the neutral atom minus one electron for helium-4,
carbon-12 and sulphur-32 (the outer electron sees a singly charged core). Constants are the
CODATA 2022 values of ``astropy.constants``; atomic masses from the Atomic Mass Evaluation AME2020
(Wang et al. 2021, Chinese Phys. C 45, 030003). Fine structure and QED corrections are below
1e-9 relative at the n of radio lines and are neglected.

Names follow the usual convention: ``H109a`` (H109α) is the transition n = 110 → 109, named by
its lower level n; Δn = 1, 2, 3, 4, 5 are α, β, γ, δ, ε, written ``a b g d e`` in ASCII.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

#: Δn -> ASCII letter used in line names (α β γ δ ε).
DN_LETTERS: dict[int, str] = {1: "a", 2: "b", 3: "g", 4: "d", 5: "e"}
#: Δn -> Greek letter, for labels meant for people.
DN_GREEK: dict[int, str] = {1: "α", 2: "β", 3: "γ", 4: "δ", 5: "ε"}

#: Atomic masses in unified atomic mass units (AME2020; ¹²C is 12 u by definition).
ATOMIC_MASS_U: dict[str, float] = {"He": 4.00260325413, "C": 12.0, "S": 31.9720711744}

#: Elements the built-in catalogue computes, in the order they are listed.
ELEMENTS: tuple[str, ...] = ("H", "He", "C", "S")

#: Default frequency range of the built-in series, Hz.
FMIN_HZ = 100e6
FMAX_HZ = 1e12

#: Velocity-width range (FWHM, km/s) typical of each element's lines in H II regions and
#: photodissociation regions (common practice).
WIDTH_KMS: dict[str, tuple[float, float]] = {
    "H": (10.0, 50.0),
    "He": (10.0, 40.0),
    "C": (1.0, 10.0),
    "S": (1.0, 10.0),
}

#: Where the numbers come from, by element (the ``reference`` of computed lines).
REFERENCE: dict[str, str] = {
    element: "computed: Rydberg formula with reduced mass, CODATA constants (astropy.constants)"
    + ("" if element == "H" else ", AME2020 atomic mass")
    for element in ELEMENTS
}

#: How commonly a line is detected, by element and Δn (common practice: H α strongest, then
#: H β, He α at ~8-10 % of H α, C α from photodissociation regions, heavier ions rarely).
_ELEMENT_PRIOR = {"H": 0.9, "He": 0.5, "C": 0.4, "S": 0.1}
_DN_PRIOR = {1: 1.0, 2: 0.6, 3: 0.35, 4: 0.2, 5: 0.12}


@dataclass(frozen=True)
class RRLSeries:
    """A computed series: parallel arrays for one element, all Δn, sorted by frequency."""

    element: str
    n: NDArray[np.int64]
    dn: NDArray[np.int64]
    freq_hz: NDArray[np.float64]


#: CODATA 2022 values, SI: those of ``astropy.constants`` (its default, ``codata2022``), which a
#: test checks them against. Written out because importing astropy.constants (and with it
#: astropy.units) costs about 1 s at the start of every command that builds the catalogue.
M_P_KG = 1.67262192595e-27  # proton mass
U_KG = 1.66053906892e-27  # atomic mass constant
M_E_KG = 9.1093837139e-31  # electron mass
RYD_PER_M = 10973731.568157  # Rydberg constant R∞
C_M_S = 299792458.0  # speed of light (exact)


def core_mass_kg(element: str) -> float:
    """Mass of the singly charged ion core (kg): the proton for H, atom minus one electron else."""
    if element == "H":
        return M_P_KG
    try:
        mass_u = ATOMIC_MASS_U[element]
    except KeyError:
        raise ValueError(f"no atomic mass for element {element!r}") from None
    return float(mass_u * U_KG - M_E_KG)


def rydberg_frequency_hz(element: str) -> float:
    """R_M c in Hz for the element's reduced mass (R∞ c / (1 + m_e/M_core))."""
    r_inf_c = RYD_PER_M * C_M_S
    return r_inf_c / (1.0 + M_E_KG / core_mass_kg(element))


def rrl_frequency_hz(
    element: str, n: int | NDArray[np.int64], dn: int | NDArray[np.int64]
) -> NDArray[np.float64]:
    """Rest frequency (Hz) of the transition n + dn → n; numpy-broadcasting over n and dn."""
    n_arr = np.asarray(n, dtype=np.float64)
    dn_arr = np.asarray(dn, dtype=np.float64)
    if np.any(n_arr < 1) or np.any(dn_arr < 1):
        raise ValueError("n and dn must be positive integers")
    return rydberg_frequency_hz(element) * (1.0 / n_arr**2 - 1.0 / (n_arr + dn_arr) ** 2)


def series(
    element: str,
    fmin_hz: float = FMIN_HZ,
    fmax_hz: float = FMAX_HZ,
    dn_max: int = 5,
) -> RRLSeries:
    """Every line of ``element`` with 1 ≤ Δn ≤ ``dn_max`` between ``fmin_hz`` and ``fmax_hz``."""
    rm_c = rydberg_frequency_hz(element)
    dns = np.arange(1, dn_max + 1)
    # ν ≈ 2 R c Δn / n³ brackets n; widen by a margin and cut exactly below.
    n_hi = int(np.ceil((2 * rm_c * dn_max / fmin_hz) ** (1 / 3))) + 2
    ns = np.arange(1, n_hi + 1)
    n_grid, dn_grid = np.meshgrid(ns, dns, indexing="ij")
    freq = rm_c * (1.0 / n_grid**2 - 1.0 / (n_grid + dn_grid) ** 2)
    keep = (freq >= fmin_hz) & (freq <= fmax_hz)
    n_sel, dn_sel, f_sel = n_grid[keep], dn_grid[keep], freq[keep]
    order = np.argsort(f_sel, kind="stable")
    return RRLSeries(element, n_sel[order], dn_sel[order], f_sel[order])


def line_name(element: str, n: int, dn: int) -> str:
    """ASCII name, e.g. ``H109a`` for H109α (n = 110 → 109)."""
    return f"{element}{n}{DN_LETTERS[dn]}"


def group_name(n: int, dn: int) -> str:
    """The group shared by H, He, C and S lines of the same n and Δn, e.g. ``RRL 109 a``."""
    return f"RRL {n} {DN_LETTERS[dn]}"


def prior(element: str, dn: int) -> float:
    """How commonly the line is detected (0–1), common practice (see ``_ELEMENT_PRIOR``)."""
    return _ELEMENT_PRIOR.get(element, 0.1) * _DN_PRIOR[dn]
