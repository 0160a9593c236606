"""Stacking on a common velocity grid: S/N grows as √N; the result is a measurable Spectrum."""

from __future__ import annotations

import numpy as np
import pytest

from speccat.errors import PhysicsError
from speccat.physics import stacking
from speccat.physics.doppler import velocity_from_freq


def _segments(n: int, rms: list[float], rng: np.random.Generator) -> tuple[list, list]:
    """n invented recombination-line segments: 25 km/s FWHM at +40 km/s, own grids."""
    vs, ys = [], []
    for k in range(n):
        v = -200.0 + rng.uniform(0, 1.0) + 1.0 * np.arange(420)  # 1 km/s channels, offset
        line = np.exp(-4 * np.log(2) * ((v - 40.0) / 25.0) ** 2)
        vs.append(v)
        ys.append(line + rng.normal(0, rms[k], v.size))
    return vs, ys


def _snr(result: stacking.StackResult) -> float:
    on = np.abs(result.v_kms - 40.0) < 3.0
    off = np.abs(result.v_kms - 40.0) > 60.0
    return float(np.mean(result.intensity[on]) / np.std(result.intensity[off]))


@pytest.mark.parametrize("n", [4, 9, 16])
def test_snr_improves_as_sqrt_n(n: int) -> None:
    # Issue 9 check: N equal-quality lines improve S/N by √N within 15 % (radiometer
    # equation / inverse-variance averaging, common practice). Single = a stack of one,
    # so both pass through the same regridding.
    rng = np.random.default_rng(100 + n)
    vs, ys = _segments(n, [0.3] * n, rng)
    grid = np.arange(-190.0, 210.0, 1.0)
    single = np.mean(
        [_snr(stacking.stack([v], [y], [0.3], grid)) for v, y in zip(vs, ys, strict=True)]
    )
    stacked = stacking.stack(vs, ys, [0.3] * n, grid)
    assert np.all(stacked.n == n)
    assert _snr(stacked) / single == pytest.approx(np.sqrt(n), rel=0.15)


def test_weights_are_inverse_variance() -> None:
    # Inverse-variance weighted mean and its σ = (Σ 1/σ²)^-1/2 (common practice).
    grid = np.arange(0.0, 10.0, 1.0)
    flat = [np.arange(-5.0, 15.0, 1.0)] * 2
    result = stacking.stack(flat, [np.full(20, 1.0), np.full(20, 4.0)], [1.0, 2.0], grid)
    np.testing.assert_allclose(result.intensity, (1.0 * 1 + 4.0 * 0.25) / 1.25)
    np.testing.assert_allclose(result.rms, 1.0 / np.sqrt(1.25))
    # Measured noise of a weighted stack of unequal segments follows the same law.
    rng = np.random.default_rng(5)
    vs, ys = _segments(3, [0.2, 0.4, 0.8], rng)
    out = stacking.stack(vs, ys, [0.2, 0.4, 0.8], np.arange(-190.0, 210.0, 1.0))
    off = np.abs(out.v_kms - 40.0) > 60.0
    # Interpolation between channels smooths the noise, so measured ≤ formal (conservative).
    assert 0.6 * out.rms[0] < np.std(out.intensity[off]) <= 1.05 * out.rms[0]


def test_default_grid_is_the_overlap_and_coverage_is_counted() -> None:
    a, b = np.arange(0.0, 100.0, 1.0), np.arange(50.0, 150.0, 2.0)
    result = stacking.stack([a, b], [np.zeros(100), np.zeros(50)], [1.0, 1.0])
    assert result.v_kms[0] == 50.0 and result.v_kms[-1] <= 99.0
    assert np.allclose(np.diff(result.v_kms), 2.0) and np.all(result.n == 2)
    wide = stacking.stack([a, b], [np.zeros(100), np.zeros(50)], [1.0, 1.0], np.arange(-10.0, 160))
    assert wide.n[0] == 0 and np.isnan(wide.intensity[0]) and wide.n[60] == 2


def test_to_spectrum_round_trips_velocity() -> None:
    rng = np.random.default_rng(9)
    vs, ys = _segments(4, [0.3] * 4, rng)
    result = stacking.stack(vs, ys, [0.3] * 4, labels=["H109a", "H110a", "H111a", "H112a"])
    rest = 5.008922e9
    spec = stacking.to_spectrum(result, rest, "invented nebula", "K")
    assert np.all(np.diff(spec.freq_hz) > 0) and spec.specsys == "LSRK"
    v_back = velocity_from_freq(spec.freq_hz, rest, "radio")[::-1]
    np.testing.assert_allclose(v_back, result.v_kms, atol=1e-9)
    np.testing.assert_allclose(spec.intensity["I"][::-1], result.intensity)
    assert spec.meta["STACK_N"] == "4" and "H110a" in spec.meta["STACK_OF"]


def test_bad_input() -> None:
    with pytest.raises(PhysicsError, match="overlap"):
        stacking.stack([np.arange(0.0, 10), np.arange(20.0, 30)], [np.zeros(10)] * 2, [1, 1])
    with pytest.raises(PhysicsError, match="rms"):
        stacking.stack([np.arange(0.0, 10)], [np.zeros(10)], [0.0])
    with pytest.raises(PhysicsError, match="same length"):
        stacking.stack([np.arange(0.0, 10)], [np.zeros(9)], [1.0])
    with pytest.raises(PhysicsError, match="one velocity"):
        stacking.stack([], [], [])
