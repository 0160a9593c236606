"""Derived quantities for one exported detection record (export --with-derived, TUI detail)."""

from __future__ import annotations

import math

import pytest

from speccat.physics import diagnostics, kinematic
from speccat.physics.derived import DERIVED_COLUMNS, derived_quantities


def _row(**kw: object) -> dict[str, object]:
    base: dict[str, object] = {
        "line": "H109a", "species": "H", "rest_freq_mhz": 5008.922, "v_lsr_kms": 45.0,
        "v_lsr_err_kms": 0.3, "peak": 0.12, "fwhm_kms": 24.0, "fwhm_err_kms": 0.5,
        "integral": 3.07, "integral_err": 0.05, "intensity_unit": "K", "kind": "emission",
        "ra_deg": 280.0, "dec_deg": -5.0, "continuum": 1.5,
    }  # fmt: skip
    base.update(kw)
    return base


def test_fixed_keys_for_every_kind_of_row() -> None:
    rows = [_row(), _row(line="HI", kind="absorption", peak=-0.4), _row(line=None, v_lsr_kms=None),
            {}, _row(ra_deg="", dec_deg=None, continuum="nan")]  # fmt: skip
    for row in rows:
        out = derived_quantities(row)
        assert tuple(out) == DERIVED_COLUMNS
        assert all(v is None or (isinstance(v, float) and math.isfinite(v)) for v in out.values())
    assert all(v is None for v in derived_quantities({}).values())


def test_recombination_line_gives_te_and_kinematic_distance() -> None:
    out = derived_quantities(_row())
    # T_e* with the default y+ = 0.08 (Tools of Radio Astronomy form, diagnostics.te_lte_k).
    assert out["te_k"] == pytest.approx(diagnostics.te_lte_k(5.008922, 0.12 / 1.5, 24.0, 0.08))
    l_deg, b_deg = kinematic.galactic_from_icrs(280.0, -5.0)
    assert out["gal_l_deg"] == pytest.approx(l_deg) and out["gal_b_deg"] == pytest.approx(b_deg)
    sol = kinematic.kinematic_distance(l_deg, b_deg, 45.0, streaming_kms=0.0)
    assert sol.status == "ok"
    assert out["dist_near_kpc"] == pytest.approx(sol.near_kpc)
    assert out["dist_far_kpc"] == pytest.approx(sol.far_kpc)
    assert out["r_gal_kpc"] == pytest.approx(sol.r_gal_kpc)
    assert out["n_hi_cm2"] is None and out["m_hi_msun"] is None and out["tau_peak"] is None


def test_not_applicable_quantities_stay_none() -> None:
    assert derived_quantities(_row(line="H109b"))["te_k"] is None  # β line: formula is for α
    assert derived_quantities(_row(continuum=0.0))["te_k"] is None
    assert derived_quantities(_row(kind="absorption"))["te_k"] is None
    far = derived_quantities(_row(v_lsr_kms=300.0))  # beyond the tangent velocity
    assert far["dist_near_kpc"] is None and far["dist_tangent_kpc"] is not None


def test_hi_rows() -> None:
    emission = derived_quantities(_row(line="HI", integral="250.0"))  # CSV strings accepted
    assert emission["n_hi_cm2"] == pytest.approx(1.823e18 * 250.0)  # Dickey & Lockman 1990
    galaxy = derived_quantities(_row(line="HI", intensity_unit="Jy", v_lsr_kms=3500.0,
                                     integral=10.0))  # fmt: skip
    assert galaxy["dist_hubble_mpc"] == pytest.approx(50.0)  # H0 = 70 km/s/Mpc
    assert galaxy["m_hi_msun"] == pytest.approx(2.356e5 * 50.0**2 * 10.0)
    assert galaxy["dist_near_kpc"] is None  # not Galactic


def test_absorption_optical_depth() -> None:
    # τ = −ln(1 + T_L/T_C) for a line against a continuum (common practice).
    out = derived_quantities(_row(line="OH1667", kind="absorption", peak=-0.5, continuum=2.0))
    assert out["tau_peak"] == pytest.approx(-math.log(0.75))
    saturated = derived_quantities(_row(line="OH1667", kind="absorption", peak=-2.5, continuum=2.0))
    assert saturated["tau_peak"] is None
