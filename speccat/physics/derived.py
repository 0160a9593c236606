"""Physical quantities derived from one exported detection record (``export --with-derived``).

``derived_quantities(row)`` always returns the keys of ``DERIVED_COLUMNS``; a value is None
where the quantity does not apply to the line or an input is missing:

- ``gal_l_deg``, ``gal_b_deg``: Galactic coordinates from ``ra_deg``/``dec_deg`` (ICRS);
- ``te_k``: LTE electron temperature of an H α recombination line in emission from
  ``peak``/``continuum`` and ``fwhm_kms``, with y⁺ = 0.08 (``diagnostics.te_lte_k``);
- ``n_hi_cm2``: optically thin HI column from ``integral`` when the unit is K;
- ``tau_peak``: peak optical depth of an absorption line against ``continuum``,
  τ = −ln(1 + peak/continuum) (common practice);
- ``dist_near_kpc``, ``dist_far_kpc``, ``dist_tangent_kpc``, ``r_gal_kpc``: kinematic
  distance (default curve, no error) for |v_LSR| ≤ 400 km/s;
- ``dist_hubble_mpc``, ``m_hi_msun``: Hubble-flow distance (H₀ = 70) and HI mass of a 21 cm
  line in Jy beyond 1000 km/s.
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping
from typing import Any

from speccat.errors import PhysicsError
from speccat.physics import diagnostics, kinematic

DERIVED_COLUMNS: tuple[str, ...] = (
    "gal_l_deg",
    "gal_b_deg",
    "te_k",
    "n_hi_cm2",
    "tau_peak",
    "dist_near_kpc",
    "dist_far_kpc",
    "dist_tangent_kpc",
    "r_gal_kpc",
    "dist_hubble_mpc",
    "m_hi_msun",
)
_H_ALPHA = re.compile(r"^H(\d+)(a|alpha|α)$", re.IGNORECASE)
_GALACTIC_VMAX_KMS = 400.0
_HUBBLE_VMIN_KMS = 1000.0


def _num(row: Mapping[str, Any], key: str) -> float | None:
    value = row.get(key)
    if value is None or value == "":
        return None
    try:
        out = float(value)
    except (TypeError, ValueError):
        return None
    return out if math.isfinite(out) else None


def _te(row: Mapping[str, Any], line: str) -> float | None:
    peak, cont, fwhm = _num(row, "peak"), _num(row, "continuum"), _num(row, "fwhm_kms")
    rest = _num(row, "rest_freq_mhz")
    if not _H_ALPHA.match(line) or str(row.get("kind", "")) != "emission":
        return None
    if peak is None or cont is None or fwhm is None or rest is None or cont == 0:
        return None
    try:
        return diagnostics.te_lte_k(rest / 1e3, peak / cont, fwhm)
    except PhysicsError:
        return None


def _tau(row: Mapping[str, Any]) -> float | None:
    peak, cont = _num(row, "peak"), _num(row, "continuum")
    if str(row.get("kind", "")) != "absorption" or peak is None or cont is None or cont <= 0:
        return None
    depth = 1.0 + peak / cont
    return -math.log(depth) if 0 < depth < 1 else None


def _kinematic(out: dict[str, float | None], v: float | None) -> None:
    l_deg, b_deg = out["gal_l_deg"], out["gal_b_deg"]
    if l_deg is None or b_deg is None or v is None or abs(v) > _GALACTIC_VMAX_KMS:
        return
    try:
        sol = kinematic.kinematic_distance(l_deg, b_deg, v, 0.0, streaming_kms=0.0)
    except PhysicsError:
        return
    out["dist_tangent_kpc"] = sol.tangent_kpc
    if sol.status in ("ok", "unique"):
        out["dist_near_kpc"], out["dist_far_kpc"] = sol.near_kpc, sol.far_kpc
        out["r_gal_kpc"] = sol.r_gal_kpc


def derived_quantities(row: Mapping[str, Any]) -> dict[str, float | None]:
    """The ``DERIVED_COLUMNS`` for one detection record (None where not applicable)."""
    out: dict[str, float | None] = dict.fromkeys(DERIVED_COLUMNS)
    line = str(row.get("line") or "")
    unit = str(row.get("intensity_unit") or "").strip()
    ra, dec, v = _num(row, "ra_deg"), _num(row, "dec_deg"), _num(row, "v_lsr_kms")
    if ra is not None and dec is not None and -90 <= dec <= 90:
        out["gal_l_deg"], out["gal_b_deg"] = kinematic.galactic_from_icrs(ra, dec)
    out["te_k"] = _te(row, line)
    out["tau_peak"] = _tau(row)
    integral = _num(row, "integral")
    is_hi = line.upper() == "HI"
    if is_hi and unit == "K" and row.get("kind") == "emission" and integral and integral > 0:
        out["n_hi_cm2"] = diagnostics.n_hi_cm2(integral)
    if is_hi and unit.lower() == "jy" and v is not None and v >= _HUBBLE_VMIN_KMS:
        dist_mpc = diagnostics.hubble_distance_mpc(v)
        out["dist_hubble_mpc"] = dist_mpc
        if integral is not None and integral > 0:
            out["m_hi_msun"] = diagnostics.hi_mass_msun(integral, dist_mpc)
    _kinematic(out, v)
    return out
