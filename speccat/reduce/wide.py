"""Wide non-Gaussian profiles (e.g. double-horned 21 cm galaxy profiles) as ONE detection.

A blend group is a *wide profile* when all of these hold (channel units):

1. its fit needed at least ``MIN_COMPONENTS`` (3) components, or it mixes emission and
   absorption components;
2. its extent (outermost FWHM edges) exceeds ``MIN_EXTENT`` (3) times its narrowest FWHM;
3. the group's fitted model, taken with the sign of its largest excursion, never returns to
   the baseline between the outermost components of that sign: it stays at or above
   ``MIN_FLOOR`` (25 %) of its peak there;
4. no component of the other sign is both inside the body (the dominant-sign components'
   centres +/- half their sigma) and narrower than ``NARROW_DIP`` (0.3) times the widest
   dominant component: such a narrow dip (e.g. HI self-absorption) is a line of its own,
   whereas opposite-sign components at the edges or as broad as the profile's parts are the
   multi-Gaussian model's way of drawing steep edges and a central trough.

Blend groups whose fit windows overlap are judged together (``clusters``). Separate maser
spikes (each its own group) and H/He/C recombination blends (He + C: two same-sign
components, rule 1; H with them: the model returns to the baseline between H and He, rule 3)
stay separate components.

Such a profile is reported the way 21 cm profiles are (common practice, e.g. Haynes et al.
1999, AJ 117, 2039, sec. 3): W50/W20 between the outermost crossings of 50 %/20 % of the
highest horn, centre = midpoint of the W50 edges, peak = highest horn, S/N = peak / rms. The
edges are the outermost data crossings near the fitted multi-Gaussian model's crossings
(linear interpolation between channels). Each edge's error is rms / |dI/dchannel| at the
edge, the slope taken from the model (common practice for edge-defined widths; from memory: the error of a level crossing is the intensity noise
divided by the profile slope there); the centre error is half, the W50 error the whole of
the quadrature sum of the two edge errors.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.linalg

from speccat.reduce.engine import Group
from speccat.reduce.fit import FWHM_PER_SIGMA, Component, GroupFit, model

MIN_COMPONENTS = 3
MIN_EXTENT = 3.0
MIN_FLOOR = 0.25
NARROW_DIP = 0.3


@dataclass(frozen=True)
class Edges:
    """Outermost crossings (channels) of a fraction of the peak, with 1-sigma errors."""

    left: float
    right: float
    left_err: float
    right_err: float

    @property
    def width(self) -> float:
        return self.right - self.left

    @property
    def width_err(self) -> float:
        return float(np.hypot(self.left_err, self.right_err))


def clusters(groups: list[Group]) -> list[list[Group]]:
    """Blend groups whose fit windows [lo, hi) overlap, chained, in window order. A wide
    profile can end up fitted as several neighbouring groups; the rule is applied to each
    cluster as a whole."""
    out: list[list[Group]] = []
    reach = -1
    for g in sorted(groups, key=lambda g: (g.lo, g.hi)):
        if out and g.lo < reach:
            out[-1].append(g)
        else:
            out.append([g])
        reach = max(reach, g.hi) if len(out[-1]) > 1 else g.hi
    return out


def merge(cluster: list[Group]) -> Group:
    """One ``Group`` holding every component of ``cluster``: parameters stacked, covariance
    block-diagonal, residual sums and degrees of freedom added, window the union."""
    if len(cluster) == 1:
        return cluster[0]
    fits = [g.fit for g in cluster]
    params = np.concatenate([f.params for f in fits])
    fit = GroupFit(
        params=params,
        cov=scipy.linalg.block_diag(*[f.cov for f in fits]),
        rss=float(sum(f.rss for f in fits)),
        dof=int(sum(f.dof for f in fits)),
        profile=fits[0].profile,
        success=all(f.success for f in fits),
    )
    return Group(params, fit, min(g.lo for g in cluster), max(g.hi for g in cluster))


def is_wide(params: np.ndarray, comps: list[Component], lo: int, hi: int, profile: str) -> bool:
    """The rule of the module docstring for one group (``params`` rows, window [lo, hi))."""
    k = len(comps)
    if k < 2:
        return False
    peaks = np.array([c.peak for c in comps])
    mixed = bool(np.any(peaks > 0) and np.any(peaks < 0))
    if k < 2 or (k < MIN_COMPONENTS and not mixed):
        return False
    cen = np.array([c.center for c in comps])
    fwhm = np.array([c.fwhm for c in comps])
    extent = float(np.max(cen + fwhm / 2) - np.min(cen - fwhm / 2))
    if extent <= MIN_EXTENT * float(np.min(fwhm)):
        return False
    chan = np.arange(lo, hi, dtype=float)
    prof = model(chan, params, profile)
    sign = 1.0 if np.max(prof) >= -np.min(prof) else -1.0
    prof = sign * prof
    dom = sign * peaks > 0
    same = cen[dom]
    if same.size == 0:
        return False
    inner = (chan >= np.floor(np.min(same))) & (chan <= np.ceil(np.max(same)))
    top = float(np.max(prof))
    if not (top > 0 and inner.any() and np.min(prof[inner]) >= MIN_FLOOR * top):
        return False
    sig = fwhm[dom] / FWHM_PER_SIGMA
    body_lo = float(np.min(cen[dom] - 0.5 * sig))
    body_hi = float(np.max(cen[dom] + 0.5 * sig))
    inside = (cen[~dom] >= body_lo) & (cen[~dom] <= body_hi)
    narrow = fwhm[~dom] < NARROW_DIP * float(np.max(fwhm[dom]))
    return not bool(np.any(inside & narrow))


def _cross(v: np.ndarray, i: int, step: int, level: float) -> float:
    """Channel where ``v`` falls through ``level`` between i (above) and i + step (below)."""
    inside, outside = float(v[i]), float(v[i + step])
    return i + step * (inside - level) / (inside - outside) if inside != outside else float(i)


def edges(data: np.ndarray, prof: np.ndarray, frac: float, top: float, rms: float) -> Edges | None:
    """Outermost crossings of ``frac`` x ``top`` (line positive, channels from 0).

    The model ``prof`` brackets the search: the crossings start at the outermost data channels
    at or above the level within (rms / model slope x 3 + 2) channels of the model's
    crossings, continue outwards while the data stay above it, and are interpolated to the
    outer neighbour; the errors are rms / |model slope| there. None when
    the model's crossing is not inside the array (the profile runs off the window).
    """
    level = frac * top
    above = np.flatnonzero(prof >= level)
    if top <= 0 or above.size == 0 or above[0] == 0 or above[-1] == prof.size - 1:
        return None
    i, j = int(above[0]), int(above[-1])
    slope_l = max(abs(float(prof[i] - prof[i - 1])), 1e-300)
    slope_r = max(abs(float(prof[j] - prof[j + 1])), 1e-300)
    err_l, err_r = rms / slope_l, rms / slope_r
    lo = max(int(i - 3.0 * err_l - 2), 1)
    hi = min(int(j + 3.0 * err_r + 2), prof.size - 2)
    v = np.where(np.isfinite(data), data, -np.inf)
    hits = np.flatnonzero(v[lo : hi + 1] >= level) + lo
    if hits.size == 0:
        return None
    # continue outwards while the data stay above the level (the bracket is only a start)
    below_l = np.flatnonzero(v[: hits[0]] < level)
    below_r = np.flatnonzero(v[hits[-1] + 1 :] < level)
    if below_l.size == 0 or below_r.size == 0:
        return None
    a, b = int(below_l[-1]) + 1, int(hits[-1]) + 1 + int(below_r[0]) - 1
    left = _cross(v, a, -1, level)
    right = _cross(v, b, 1, level)
    return Edges(left, right, err_l, err_r)


def wide_component(
    data: np.ndarray,
    params: np.ndarray,
    comps: list[Component],
    lo: int,
    hi: int,
    rms: float,
    profile: str,
) -> tuple[Component, Edges, Edges | None] | None:
    """One ``Component`` standing for a wide profile, from ``data`` (the spectrum minus the
    baseline and other groups, channels lo..hi-1): peak = highest horn, taken as max(data) -
    rms (the horn level used for W50 in HI work, e.g. Springob et al. 2005, ApJS 160, 149;
    from memory), centre/width from the W50 edges, area the sum of the component areas; plus
    the W50 and W20 edges (absolute channels). None when the W50 edges are not in the window.
    """
    chan = np.arange(lo, hi, dtype=float)
    prof = model(chan, params, profile)
    sign = 1.0 if np.max(prof) >= -np.min(prof) else -1.0
    seg = sign * data
    if not np.isfinite(seg).any():
        return None
    top = float(np.nanmax(seg)) - rms
    found = [edges(seg, sign * prof, frac, top, rms) for frac in (0.5, 0.2)]
    e50, e20 = (
        None if e is None else Edges(e.left + lo, e.right + lo, e.left_err, e.right_err)
        for e in found
    )
    if e50 is None:
        return None
    area = float(sum(c.area for c in comps))
    area_err = float(np.sqrt(sum(c.area_err**2 for c in comps)))
    comp = Component(
        peak=sign * top,
        peak_err=rms,
        center=0.5 * (e50.left + e50.right),
        center_err=0.5 * e50.width_err,
        fwhm=e50.width,
        fwhm_err=e50.width_err,
        area=area,
        area_err=area_err,
        sigma=e50.width / FWHM_PER_SIGMA,
    )
    return comp, e50, e20
