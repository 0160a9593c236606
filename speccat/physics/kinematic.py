"""Galactic rotation curves and kinematic distances from (l, b, v_LSR).

Circular rotation about the Galactic centre, seen from the LSR (the Sun at R₀ on the LSR's
circular orbit, no peculiar motion beyond the standard solar motion already removed by v_LSR):

    v_LSR = (Θ(R) R₀ / R − Θ₀) sin l cos b,
    R² = R₀² + D² cos² b − 2 R₀ D cos b cos l

(e.g. Wilson, Rohlfs & Hüttemeister, Tools of Radio Astronomy, Galactic rotation chapter;
common practice). Curves:

- ``iau1985``: flat, Θ = Θ₀ = 220 km/s, R₀ = 8.5 kpc (IAU 1985 standards, Kerr & Lynden-Bell
  1986);
- ``reid2014``: Reid et al. 2014, ApJ 783, 130, their model A5 linear curve:
  R₀ = 8.34 kpc, Θ₀ = 240 km/s, dΘ/dR = −0.2 km/s/kpc (applied here to standard-LSR velocities,
  without their revised solar motion);
- ``brand1993``: Brand & Blitz 1993, A&A 275, 67, eq. 5: Θ/Θ₀ = a₁ (R/R₀)^a₂ + a₃,
  a₁ = 1.00767, a₂ = 0.0394, a₃ = 0.00712, R₀ = 8.5 kpc, Θ₀ = 220 km/s (as published,
  Θ(R₀) = 1.0148 Θ₀, so gas near the Sun has |v_LSR| ≤ 3.3 km/s rather than 0).

Every curve here has Θ(R)/R decreasing with R, so v_LSR fixes R uniquely.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass
from typing import Any

import numpy as np

from speccat.errors import PhysicsError

#: Default streaming-motion allowance added in quadrature to the velocity error (km/s).
STREAMING_KMS = 7.0
_N_MC = 4000


@dataclass(frozen=True)
class RotationCurve:
    """Θ(R) = Θ₀ [a₁ (R/R₀)^a₂ + a₃] + slope (R − R₀); flat, linear and power law in one."""

    name: str
    r0_kpc: float
    theta0_kms: float
    slope_kms_per_kpc: float = 0.0
    a1: float = 1.0
    a2: float = 0.0
    a3: float = 0.0
    reference: str = ""

    def theta_kms(self, r_kpc: Any) -> Any:
        """Circular velocity (km/s) at Galactocentric radius ``r_kpc``."""
        r = np.asarray(r_kpc, dtype=float)
        return self.theta0_kms * (self.a1 * (r / self.r0_kpc) ** self.a2 + self.a3) + (
            self.slope_kms_per_kpc * (r - self.r0_kpc)
        )

    def radius_for_omega(self, omega: np.ndarray) -> np.ndarray:
        """R (kpc) where Θ(R)/R = ``omega`` (km/s/kpc); NaN where no R in (0.01, 200) kpc."""
        omega = np.asarray(omega, dtype=float)
        if self.a2 == 0.0:  # flat or linear: Θ/R = (Θ₀(a1+a3) − s R₀)/R + s, closed form
            top = self.theta0_kms * (self.a1 + self.a3) - self.slope_kms_per_kpc * self.r0_kpc
            with np.errstate(divide="ignore", invalid="ignore"):
                r = top / (omega - self.slope_kms_per_kpc)
        else:  # monotonic: bisection in log R, vectorised
            lo = np.full(omega.shape, math.log(0.01))
            hi = np.full(omega.shape, math.log(200.0))
            for _ in range(45):  # log-R bracket of ~10 → 3e-13 relative
                mid = 0.5 * (lo + hi)
                rm = np.exp(mid)
                above = self.theta_kms(rm) / rm > omega
                lo = np.where(above, mid, lo)
                hi = np.where(above, hi, mid)
            r = np.exp(0.5 * (lo + hi))
        ok = np.isfinite(r) & (r > 0.01) & (r < 200.0)
        return np.where(ok, r, np.nan)


CURVES: dict[str, RotationCurve] = {
    "iau1985": RotationCurve("iau1985", 8.5, 220.0, reference="IAU 1985 (Kerr & Lynden-Bell 1986)"),
    "reid2014": RotationCurve(
        "reid2014", 8.34, 240.0, slope_kms_per_kpc=-0.2,
        reference="Reid et al. 2014, ApJ 783, 130 (model A5)",
    ),
    "brand1993": RotationCurve(
        "brand1993", 8.5, 220.0, a1=1.00767, a2=0.0394, a3=0.00712,
        reference="Brand & Blitz 1993, A&A 275, 67",
    ),
}  # fmt: skip
DEFAULT_CURVE = "reid2014"


def curve(name: str) -> RotationCurve:
    """The rotation curve called ``name`` (raises PhysicsError naming the known ones)."""
    try:
        return CURVES[name.strip().lower()]
    except KeyError:
        raise PhysicsError(
            f"unknown rotation curve {name!r} (known: {', '.join(CURVES)})"
        ) from None


def vlsr_kms(l_deg: Any, b_deg: Any, dist_kpc: Any, rc: RotationCurve) -> Any:
    """Forward model: v_LSR (km/s) of gas on a circular orbit at distance ``dist_kpc``."""
    l_rad, b_rad = np.radians(l_deg), np.radians(b_deg)
    d_plane = np.asarray(dist_kpc, dtype=float) * np.cos(b_rad)
    r = np.sqrt(rc.r0_kpc**2 + d_plane**2 - 2.0 * rc.r0_kpc * d_plane * np.cos(l_rad))
    return (rc.theta_kms(r) * rc.r0_kpc / r - rc.theta0_kms) * np.sin(l_rad) * np.cos(b_rad)


def _solve(l_deg: float, b_deg: float, v_kms: np.ndarray, rc: RotationCurve) -> dict[str, Any]:
    """Vectorised over ``v_kms``: R, near and far distances (NaN where none)."""
    sl, cl = math.sin(math.radians(l_deg)), math.cos(math.radians(l_deg))
    cb = math.cos(math.radians(b_deg))
    omega = (rc.theta0_kms + v_kms / (sl * cb)) / rc.r0_kpc
    r = rc.radius_for_omega(np.where(omega > 0, omega, np.nan))
    with np.errstate(invalid="ignore"):
        root = np.sqrt(r**2 - (rc.r0_kpc * sl) ** 2)
    near = (rc.r0_kpc * cl - root) / cb
    far = (rc.r0_kpc * cl + root) / cb
    near = np.where(near > 0, near, np.nan)
    far = np.where(far > 0, far, np.nan)
    return {"r": r, "near": near, "far": far}


@dataclass(frozen=True)
class KinematicDistance:
    """Kinematic distance solution; distances in kpc, None where there is none.

    ``status``: ``ok`` (near and far), ``unique`` (outside the solar circle: one distance,
    given as both near and far), ``beyond-tangent`` (|v| exceeds the tangent-point velocity),
    ``wrong-sign`` (no circular orbit on this line of sight has this velocity),
    ``undefined`` (towards the Galactic centre or anticentre, sin l cos b = 0).
    Errors are the standard deviations of a Monte Carlo over the velocity error plus the
    streaming allowance, over the draws that have a solution.
    """

    curve: str
    status: str
    note: str
    near_kpc: float | None
    far_kpc: float | None
    r_gal_kpc: float | None
    tangent_kpc: float | None
    tangent_vlsr_kms: float | None
    near_err_kpc: float | None = None
    far_err_kpc: float | None = None
    r_gal_err_kpc: float | None = None

    def as_dict(self) -> dict[str, Any]:
        return asdict(self)


def _tangent(l_deg: float, b_deg: float, rc: RotationCurve) -> tuple[float | None, float | None]:
    sl, cl = math.sin(math.radians(l_deg)), math.cos(math.radians(l_deg))
    if cl <= 0:
        return None, None
    cb = math.cos(math.radians(b_deg))
    r_t = rc.r0_kpc * abs(sl)
    v_t = float(rc.theta_kms(r_t) - rc.theta0_kms * abs(sl)) * math.copysign(1.0, sl) * cb
    return rc.r0_kpc * cl / cb, v_t


def _opt(x: Any) -> float | None:
    value = float(x)
    return value if math.isfinite(value) else None


def _mc_std(values: np.ndarray) -> float | None:
    good = values[np.isfinite(values)]
    return float(np.std(good)) if good.size >= 10 else None


def kinematic_distance(
    l_deg: float,
    b_deg: float,
    v_lsr_kms: float,
    v_err_kms: float = 0.0,
    curve_name: str = DEFAULT_CURVE,
    streaming_kms: float = STREAMING_KMS,
    seed: int = 0,
) -> KinematicDistance:
    """Kinematic distance of gas at (l, b) (degrees) moving at ``v_lsr_kms`` (LSRK, radio)."""
    rc = curve(curve_name)
    for name, value in (("l", l_deg), ("b", b_deg), ("v_lsr", v_lsr_kms), ("v_err", v_err_kms)):
        if not math.isfinite(value):
            raise PhysicsError(f"{name} must be a finite number, got {value}")
    if not -90.0 < b_deg < 90.0:
        raise PhysicsError(f"b must lie between -90 and 90 degrees, got {b_deg}")
    if v_err_kms < 0 or streaming_kms < 0:
        raise PhysicsError("velocity error and streaming allowance must not be negative")
    tan_d, tan_v = _tangent(l_deg, b_deg, rc)
    if abs(math.sin(math.radians(l_deg)) * math.cos(math.radians(b_deg))) < 1e-9:
        return KinematicDistance(rc.name, "undefined", "towards the Galactic centre or "
                                 "anticentre the velocity does not fix a distance",
                                 None, None, None, None, None)  # fmt: skip
    sol = _solve(l_deg, b_deg, np.array([float(v_lsr_kms)]), rc)
    near, far, r = (float(sol[k][0]) for k in ("near", "far", "r"))
    if math.isnan(near) and math.isnan(far):
        beyond = tan_v is not None and v_lsr_kms * tan_v > 0 and abs(v_lsr_kms) > abs(tan_v)
        status = "beyond-tangent" if beyond else "wrong-sign"
        note = (f"|v_LSR| exceeds the tangent-point velocity {tan_v:+.1f} km/s" if beyond
                else "no circular orbit on this line of sight has this velocity")  # fmt: skip
        return KinematicDistance(rc.name, status, note, None, None, None, tan_d, tan_v)
    sigma = math.hypot(v_err_kms, streaming_kms)
    draws = np.random.default_rng(seed).normal(float(v_lsr_kms), sigma, _N_MC)
    mc = _solve(l_deg, b_deg, draws, rc) if sigma > 0 else None
    if math.isnan(near) or math.isnan(far):
        d = near if math.isfinite(near) else far
        key = "near" if math.isfinite(near) else "far"
        d_err = _mc_std(mc[key]) if mc else None
        return KinematicDistance(
            rc.name, "unique", "outside the solar circle: one distance", d, d, r, tan_d, tan_v,
            d_err, d_err, _mc_std(mc["r"]) if mc else None,
        )  # fmt: skip
    return KinematicDistance(
        rc.name, "ok", "inside the solar circle: near and far distances", near, far, r,
        tan_d, tan_v, _mc_std(mc["near"]) if mc else None, _mc_std(mc["far"]) if mc else None,
        _mc_std(mc["r"]) if mc else None,
    )  # fmt: skip


def galactic_from_icrs(ra_deg: float, dec_deg: float) -> tuple[float, float]:
    """Galactic (l, b) in degrees from ICRS RA/Dec (astropy's rotation matrix, cached)."""
    v = np.array(
        [
            math.cos(math.radians(dec_deg)) * math.cos(math.radians(ra_deg)),
            math.cos(math.radians(dec_deg)) * math.sin(math.radians(ra_deg)),
            math.sin(math.radians(dec_deg)),
        ]
    )
    g = _icrs_to_galactic_matrix() @ v
    l_deg = math.degrees(math.atan2(g[1], g[0])) % 360.0
    return l_deg, math.degrees(math.asin(max(-1.0, min(1.0, float(g[2])))))


_MATRIX: list[np.ndarray] = []


def _icrs_to_galactic_matrix() -> np.ndarray:
    """Columns: the ICRS unit vectors expressed in Galactic Cartesian coordinates."""
    # Deferred import: astropy.coordinates is slow to import and needed once.
    if not _MATRIX:
        import astropy.units as u
        from astropy.coordinates import ICRS, Galactic

        sky = ICRS(ra=[0.0, 90.0, 0.0] * u.deg, dec=[0.0, 0.0, 90.0] * u.deg)
        xyz = sky.transform_to(Galactic()).cartesian.xyz.to_value(u.one)
        _MATRIX.append(np.asarray(xyz, dtype=float))
    return _MATRIX[0]
