"""Kinematic distances forward-checked with astropy's Galactocentric frame (reference library)."""

from __future__ import annotations

import astropy.units as u
import numpy as np
import pytest
from astropy.coordinates import (
    ICRS,
    LSRK,
    CartesianDifferential,
    CartesianRepresentation,
    Galactic,
    Galactocentric,
    SkyCoord,
)

from speccat.physics import kinematic
from speccat.physics.doppler import SUN_WRT_LSRK_ICRS_KMS


def _galactocentric(rc: kinematic.RotationCurve) -> Galactocentric:
    """Galactocentric frame matching the curve: Sun at R0 in the plane, axes = Galactic axes,
    Sun moving at the LSR's circular velocity plus astropy's LSRK solar motion (Gordon 1975)."""
    sun_lsrk = ICRS(
        CartesianRepresentation([0, 0, 0] * u.kpc,
                                differentials=CartesianDifferential(SUN_WRT_LSRK_ICRS_KMS * u.km / u.s))
    ).transform_to(Galactic()).velocity.d_xyz.to_value(u.km / u.s)  # fmt: skip
    return Galactocentric(
        galcen_distance=rc.r0_kpc * u.kpc, z_sun=0 * u.pc, roll=0 * u.deg,
        galcen_coord=SkyCoord(l=0 * u.deg, b=0 * u.deg, frame="galactic").icrs,
        galcen_v_sun=CartesianDifferential(np.add(sun_lsrk, (0.0, rc.theta0_kms, 0.0)) * u.km / u.s),
    )  # fmt: skip


def _astropy_vlsr(l_deg: np.ndarray, b_deg: np.ndarray, d_kpc: np.ndarray,
                  rc: kinematic.RotationCurve) -> np.ndarray:  # fmt: skip
    """v_LSRK of gas on circular orbits (Θ(R), clockwise seen from the north Galactic pole)."""
    frame = _galactocentric(rc)
    gc = SkyCoord(l=l_deg * u.deg, b=b_deg * u.deg, distance=d_kpc * u.kpc,
                  frame="galactic").transform_to(frame)  # fmt: skip
    x, y, _z = gc.cartesian.xyz.to_value(u.kpc)
    r = np.hypot(x, y)
    theta = rc.theta_kms(r)
    vel = CartesianDifferential(np.array([theta * y / r, -theta * x / r, 0 * r]) * u.km / u.s)
    moving = Galactocentric(gc.cartesian.with_differentials(vel), **{
        k: getattr(frame, k) for k in ("galcen_distance", "z_sun", "roll", "galcen_coord",
                                       "galcen_v_sun")})  # fmt: skip
    return np.asarray(moving.transform_to(LSRK()).radial_velocity.to_value(u.km / u.s))


@pytest.mark.parametrize("name", list(kinematic.CURVES))
def test_distances_reproduce_vlsr_through_astropy_galactocentric(name: str) -> None:
    # Issue 9 check: a point placed at the computed distance on a circular orbit gives back
    # v_LSR within 0.5 km/s (astropy Galactocentric + LSRK frames, reference library).
    rc = kinematic.CURVES[name]
    rng = np.random.default_rng(42)
    ls, bs, ds, vs = [], [], [], []
    while len(vs) < 40:
        l_deg, b_deg = rng.uniform(5, 355), rng.uniform(-3, 3)
        v = rng.uniform(-120, 140)
        sol = kinematic.kinematic_distance(l_deg, b_deg, v, curve_name=name, streaming_kms=0)
        for d in {sol.near_kpc, sol.far_kpc} - {None}:
            ls.append(l_deg), bs.append(b_deg), ds.append(d), vs.append(v)
    back = _astropy_vlsr(np.array(ls), np.array(bs), np.array(ds), rc)
    assert np.max(np.abs(back - np.array(vs))) < 0.5


def test_forward_model_agrees_with_astropy() -> None:
    # Our own forward formula (v = (Θ R0/R − Θ0) sin l cos b) against astropy, Brand & Blitz.
    rc = kinematic.CURVES["brand1993"]
    l_deg, b_deg = np.array([20.0, 75.0, 140.0, 250.0]), np.array([0.0, 1.0, -2.0, 0.5])
    d = np.array([3.0, 6.0, 2.0, 9.0])
    np.testing.assert_allclose(kinematic.vlsr_kms(l_deg, b_deg, d, rc),
                               _astropy_vlsr(l_deg, b_deg, d, rc), atol=0.5)  # fmt: skip


def test_galactic_from_icrs_matches_astropy() -> None:
    rng = np.random.default_rng(7)
    ra, dec = rng.uniform(0, 360, 25), np.degrees(np.arcsin(rng.uniform(-1, 1, 25)))
    ref = SkyCoord(ra * u.deg, dec * u.deg, frame="icrs").galactic
    for k in range(25):
        l_deg, b_deg = kinematic.galactic_from_icrs(float(ra[k]), float(dec[k]))
        dl = (l_deg - ref.l.deg[k] + 180.0) % 360.0 - 180.0
        assert abs(dl) * np.cos(np.radians(b_deg)) < 1e-8 and abs(b_deg - ref.b.deg[k]) < 1e-8
