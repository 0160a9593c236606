"""Stacking: average line segments of one source on a common LSRK radio-velocity grid.

Each segment (e.g. H109α, H110α, ... of one nebula, from one or several spectra) is a
velocity axis (km/s, LSRK, radio convention relative to its own rest frequency), an intensity
array and its rms. Segments are linearly interpolated onto the grid and averaged with weights
1/rms² (the inverse-variance weighted mean; common practice); the stacked rms is
(Σ 1/rms²)^-1/2 per channel — conservative, since interpolation itself smooths the noise.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np

from speccat.errors import PhysicsError
from speccat.model import Convention, Origin, Spectrum
from speccat.physics.doppler import freq_from_velocity


@dataclass(frozen=True, eq=False)
class StackResult:
    """Stacked spectrum: ascending ``v_kms`` grid, intensity, rms and segment count per channel.

    Channels no segment covers hold NaN with ``n`` = 0.
    """

    v_kms: np.ndarray
    intensity: np.ndarray
    rms: np.ndarray
    n: np.ndarray
    labels: tuple[str, ...] = field(default=())


def _check(v: np.ndarray, y: np.ndarray, rms: float, k: int) -> None:
    if v.ndim != 1 or v.shape != y.shape or v.size < 2:
        raise PhysicsError(f"stack segment {k}: velocity and intensity must be 1-D, same length")
    if not (np.isfinite(rms) and rms > 0):
        raise PhysicsError(f"stack segment {k}: rms must be positive, got {rms}")


def default_grid(velocities_kms: Sequence[np.ndarray]) -> np.ndarray:
    """The overlap of all segments, at the coarsest channel width among them."""
    lo = max(float(np.min(v)) for v in velocities_kms)
    hi = min(float(np.max(v)) for v in velocities_kms)
    step = max(float(np.median(np.abs(np.diff(v)))) for v in velocities_kms)
    if not hi - lo >= step:
        raise PhysicsError("stack: the segments do not overlap in velocity")
    return lo + step * np.arange(int(np.floor((hi - lo) / step + 1e-9)) + 1)


def stack(
    velocities_kms: Sequence[np.ndarray],
    intensities: Sequence[np.ndarray],
    rms: Sequence[float],
    grid_kms: np.ndarray | None = None,
    labels: Sequence[str] = (),
) -> StackResult:
    """Inverse-variance weighted mean of the segments on ``grid_kms`` (default: overlap)."""
    if not (len(velocities_kms) == len(intensities) == len(rms)) or not velocities_kms:
        raise PhysicsError("stack: give one velocity axis, intensity and rms per segment")
    vs = [np.asarray(v, dtype=float) for v in velocities_kms]
    ys = [np.asarray(y, dtype=float) for y in intensities]
    for k, (v, y, s) in enumerate(zip(vs, ys, rms, strict=True)):
        _check(v, y, float(s), k)
    grid = default_grid(vs) if grid_kms is None else np.sort(np.asarray(grid_kms, dtype=float))
    num = np.zeros(grid.size)
    wsum = np.zeros(grid.size)
    count = np.zeros(grid.size, dtype=int)
    for v, y, s in zip(vs, ys, rms, strict=True):
        order = np.argsort(v)
        vv, yy = v[order], y[order]
        inside = (grid >= vv[0]) & (grid <= vv[-1])
        values = np.interp(grid, vv, yy)
        good = inside & np.isfinite(values)
        w = 1.0 / float(s) ** 2
        num[good] += w * values[good]
        wsum[good] += w
        count[good] += 1
    with np.errstate(divide="ignore", invalid="ignore"):
        mean = np.where(count > 0, num / wsum, np.nan)
        sigma = np.where(count > 0, 1.0 / np.sqrt(wsum), np.nan)
    return StackResult(grid, mean, sigma, count, tuple(labels))


def to_spectrum(
    result: StackResult,
    rest_freq_hz: float,
    source: str,
    intensity_unit: str,
    label: str = "stack",
) -> Spectrum:
    """A Spectrum (LSRK, ascending frequency) from a stack, for measuring and storing.

    Frequencies are ``freq_from_velocity(v, rest_freq_hz, "radio")``; uncovered channels are
    dropped. ``meta`` records the segment count and labels.
    """
    if not rest_freq_hz > 0:
        raise PhysicsError(f"stack: rest frequency must be positive, got {rest_freq_hz}")
    keep = result.n > 0
    if np.count_nonzero(keep) < 2:
        raise PhysicsError("stack: fewer than two channels are covered")
    v = result.v_kms[keep][::-1]  # descending velocity = ascending frequency
    freq = np.asarray(freq_from_velocity(v, rest_freq_hz, "radio"), dtype=float)
    return Spectrum(
        freq_hz=freq,
        intensity={"I": result.intensity[keep][::-1].copy()},
        intensity_unit=intensity_unit,
        source=source,
        origin=Origin(label),
        specsys="LSRK",
        rest_freq_hz=float(rest_freq_hz),
        velocity_convention=Convention.RADIO,
        meta={
            "STACK_N": str(int(result.n.max())),
            "STACK_OF": ",".join(result.labels),
        },
    )
