"""Kinematic distance: published curve forms, tangent point, statuses, Monte Carlo errors."""

from __future__ import annotations

import numpy as np
import pytest

from speccat.errors import PhysicsError
from speccat.physics import kinematic


def test_published_curve_parameters() -> None:
    iau, reid, bb = (kinematic.CURVES[k] for k in ("iau1985", "reid2014", "brand1993"))
    # IAU 1985: flat, R0 = 8.5 kpc, Θ0 = 220 km/s (Kerr & Lynden-Bell 1986).
    assert iau.theta_kms(3.0) == pytest.approx(220.0) and iau.r0_kpc == 8.5
    # Reid et al. 2014 (ApJ 783, 130) model A5: Θ0 = 240, dΘ/dR = −0.2 km/s/kpc, R0 = 8.34.
    assert reid.theta_kms(10.34) == pytest.approx(240.0 - 0.4)
    # Brand & Blitz 1993 (A&A 275, 67) eq. 5: Θ/Θ0 = 1.00767 (R/R0)^0.0394 + 0.00712.
    assert bb.theta_kms(4.25) == pytest.approx(220.0 * (1.00767 * 0.5**0.0394 + 0.00712))


@pytest.mark.parametrize("name", list(kinematic.CURVES))
def test_tangent_point_is_the_extreme_velocity(name: str) -> None:
    # Common practice: along a line of sight inside the solar circle the extreme velocity
    # occurs at the tangent point, D = R0 cos l.
    rc = kinematic.CURVES[name]
    sol = kinematic.kinematic_distance(35.0, 0.0, 10.0, curve_name=name)
    d = np.linspace(0.01, 2 * rc.r0_kpc, 200_001)
    v = kinematic.vlsr_kms(35.0, 0.0, d, rc)
    assert sol.tangent_vlsr_kms == pytest.approx(v.max(), abs=1e-6)
    assert sol.tangent_kpc == pytest.approx(d[np.argmax(v)], abs=1e-3)


@pytest.mark.parametrize("name", list(kinematic.CURVES))
def test_near_and_far_solutions_round_trip(name: str) -> None:
    rc = kinematic.CURVES[name]
    for l_deg, v in [(30.0, 60.0), (320.0, -45.0), (10.0, 80.0)]:
        sol = kinematic.kinematic_distance(l_deg, 0.3, v, curve_name=name, streaming_kms=0)
        assert sol.status == "ok" and sol.near_kpc < sol.tangent_kpc < sol.far_kpc
        for d in (sol.near_kpc, sol.far_kpc):
            assert kinematic.vlsr_kms(l_deg, 0.3, d, rc) == pytest.approx(v, abs=1e-6)


def test_statuses() -> None:
    beyond = kinematic.kinematic_distance(30.0, 0.0, 300.0)
    assert beyond.status == "beyond-tangent" and beyond.near_kpc is None
    assert beyond.far_kpc is None and beyond.tangent_kpc is not None
    wrong = kinematic.kinematic_distance(120.0, 0.0, 40.0)  # second quadrant, v > 0
    assert wrong.status == "wrong-sign" and wrong.near_kpc is None and wrong.far_kpc is None
    outer = kinematic.kinematic_distance(120.0, 0.0, -60.0)
    assert outer.status == "unique" and outer.near_kpc == outer.far_kpc
    assert outer.r_gal_kpc is not None and outer.r_gal_kpc > kinematic.CURVES["reid2014"].r0_kpc
    centre = kinematic.kinematic_distance(180.0, 0.0, 5.0)
    assert centre.status == "undefined" and centre.near_kpc is None


def test_monte_carlo_error_matches_linear_propagation() -> None:
    # Common practice: for small errors σ_D ≈ |dD/dv| σ_v (the MC must reproduce it).
    rc = kinematic.CURVES["iau1985"]
    sol = kinematic.kinematic_distance(30.0, 0.0, 60.0, v_err_kms=1.0, curve_name="iau1985",
                                       streaming_kms=1.0)  # fmt: skip
    dv = 1e-3
    up = kinematic.kinematic_distance(30.0, 0.0, 60.0 + dv, curve_name="iau1985", streaming_kms=0)
    slope = (up.near_kpc - sol.near_kpc) / dv
    assert sol.near_err_kpc == pytest.approx(abs(slope) * np.hypot(1.0, 1.0), rel=0.1)
    assert rc.r0_kpc == 8.5


def test_bad_input() -> None:
    with pytest.raises(PhysicsError, match="rotation curve"):
        kinematic.kinematic_distance(30.0, 0.0, 10.0, curve_name="wobbly")
    with pytest.raises(PhysicsError, match="b must"):
        kinematic.kinematic_distance(30.0, 95.0, 10.0)
    with pytest.raises(PhysicsError, match="finite"):
        kinematic.kinematic_distance(float("nan"), 0.0, 10.0)
