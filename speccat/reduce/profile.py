"""Model-free line measures: peak-fraction widths, moments and the correlation factor of a
box sum (channel units).

W50/W20: distance between the outermost channels at or above 50 %/20 % of the peak, each edge
linearly interpolated to the crossing outside it (common practice for double-horned 21 cm
profiles, e.g. Haynes et al. 1999, AJ 117, 2039, sec. 3). Moments: intensity-weighted mean and
dispersion over the window (common practice).
"""

from __future__ import annotations

import math

import numpy as np


def peak_fraction_widths(
    y: np.ndarray, fracs: tuple[float, ...], min_level: float = -np.inf
) -> list[float | None]:
    """Widths (channels) between the outermost crossings of each fraction x max(y), sharing
    one pass for the peak; None when undefined or when the level (fraction x peak) is below
    ``min_level``.

    ``y`` holds the profile with the line positive (absorption negated by the caller); NaN
    channels are ignored. The crossing is interpolated between the outermost channel above the
    level and its outer neighbour; at the window edge the edge channel itself is used.
    """
    finite = np.isfinite(y)
    every = bool(finite.all())
    if not every and np.count_nonzero(finite) < 3:
        return [None] * len(fracs)
    if y.size < 3:
        return [None] * len(fracs)
    v = y if every else np.where(finite, y, -np.inf)
    peak = float(v.max())
    if peak <= 0:
        return [None] * len(fracs)
    return [_crossings(y, v, frac * peak) if frac * peak >= min_level else None for frac in fracs]


def _crossings(y: np.ndarray, v: np.ndarray, level: float) -> float:
    above = (v >= level).nonzero()[0]
    lo, hi = int(above[0]), int(above[-1])
    left = float(lo)
    if lo > 0 and math.isfinite(y[lo - 1]):
        left = lo - (v[lo] - level) / (v[lo] - y[lo - 1])
    right = float(hi)
    if hi < y.size - 1 and math.isfinite(y[hi + 1]):
        right = hi + (v[hi] - level) / (v[hi] - y[hi + 1])
    return float(right - left)


def box_correlation_factor(rho: np.ndarray, n: int) -> float:
    """Variance factor of a sum of ``n`` correlated channels: 1 + 2 sum_l rho(l)(1 - l/n)."""
    if n <= 1 or not np.any(rho):
        return 1.0
    lags = np.arange(1, rho.size + 1, dtype=float)
    return float(max(1.0 + 2.0 * np.sum(rho * np.clip(1.0 - lags / n, 0.0, None)), 0.05))


def moments(freq: np.ndarray, y: np.ndarray) -> tuple[float | None, float | None]:
    """Intensity-weighted mean frequency and dispersion; None when the weight sum is not > 0."""
    ok = np.isfinite(y)
    if ok.all():
        w, f = y, freq
    else:
        w, f = y[ok], freq[ok]
    total = float(w.sum())
    if total <= 0:
        return None, None
    mean = float((w * f).sum() / total)
    var = float((w * (f - mean) ** 2).sum() / total)
    return mean, (math.sqrt(var) if var > 0 else None)
