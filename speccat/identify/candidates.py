"""Detections in the LSRK frame, the source-velocity context, and the candidate search."""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from speccat.identify.terms import (
    COMPANION_CLASSES,
    DEFAULT_SPREAD_KMS,
    FRAME_UNKNOWN_SIGMA_KMS,
    GALAXY_MIN_WIDTH_KMS,
    GALAXY_V_MAX_KMS,
    KNOWN_SIGMA_KMS,
    LEADER_PRIOR_RATIO,
    MISSING_COMPANION_FACTOR,
    REDSHIFT_SIGMA_KMS,
    RESOLVED_CHANNELS,
    SPREAD_KMS,
    TUNED_TOL_KMS,
)
from speccat.model import C_KMS, Kind, LineFit, Spectrum
from speccat.physics.doppler import velocity_from_freq

if TYPE_CHECKING:
    from speccat.catalogue import Catalogue

# --------------------------------------------------------------------------- detections


@dataclass(frozen=True)
class Features:
    """Per-detection arrays in the LSRK frame (Hz). ``width_hz`` is the fitted FWHM;
    ``profile_width_hz`` max(FWHM, W50), which suits a galaxy's flat-topped or double-horned
    profile (W50 of a blended line can take in its neighbours, so only galaxies use it)."""

    f_hz: np.ndarray
    f_err_hz: np.ndarray
    width_hz: np.ndarray
    profile_width_hz: np.ndarray
    width_rel_err: np.ndarray
    resolved: np.ndarray
    absorption: np.ndarray


def features(fits: Sequence[LineFit], factor: float) -> Features:
    """The fits' centres, errors and widths moved to LSRK by ``factor``."""
    cols = np.array(
        [(f.center_hz, f.center_err_hz, f.fwhm_hz, f.w50_hz or 0.0, f.fwhm_err_hz, f.fwhm_chan)
         for f in fits], dtype=float,
    ).reshape(-1, 6)  # fmt: skip
    f, err, fwhm, w50, fwhm_err = (cols[:, k] * factor for k in range(5))
    with np.errstate(divide="ignore", invalid="ignore"):
        rel = fwhm_err / fwhm
    return Features(
        f_hz=f,
        f_err_hz=np.where(np.isfinite(err), np.abs(err), 0.0),
        width_hz=fwhm,
        profile_width_hz=np.fmax(fwhm, w50),
        width_rel_err=np.where(np.isfinite(rel), np.clip(rel, 0.0, 1.0), 1.0),
        resolved=cols[:, 5] >= RESOLVED_CHANNELS,
        absorption=np.array([f.kind == Kind.ABSORPTION for f in fits], dtype=bool),
    )


def systemic_velocity(
    spectrum: Spectrum, known: Mapping[str, float] | None, frame_flag: str | None
) -> tuple[float, float] | None:
    """(velocity, sigma) in km/s of the source: earlier nights first, then the header redshift.

    A header redshift z (optical convention) is converted to a radio velocity c·z/(1+z).
    """
    extra = FRAME_UNKNOWN_SIGMA_KMS if frame_flag else 0.0
    if known and spectrum.source in known:
        v = float(known[spectrum.source])
        if math.isfinite(v):
            return v, math.hypot(KNOWN_SIGMA_KMS, extra)
    z = spectrum.z_source
    if z is not None and math.isfinite(z) and z > -1.0:
        return C_KMS * z / (1.0 + z), math.hypot(REDSHIFT_SIGMA_KMS, extra)
    return None


# --------------------------------------------------------------------------- catalogue arrays


@dataclass(frozen=True)
class CatalogueArrays:
    """What scoring needs of every catalogue line, as arrays sorted by rest frequency.

    ``family``: one id for all recombination lines, else one per species (lines that share a
    velocity most often); ``leader_hz``: rest frequency of the stronger group member a line
    should be seen with (H for He/C/S recombination lines, an NH3 main line for its
    satellites), NaN when none or for classes exempt from that rule.
    """

    lines: tuple[Any, ...]
    rest_hz: np.ndarray
    prior: np.ndarray
    width_min_kms: np.ndarray
    width_max_kms: np.ndarray
    spread_kms: np.ndarray
    recombination: np.ndarray
    atomic: np.ndarray
    hi: np.ndarray
    family: np.ndarray
    leader_hz: np.ndarray
    group_key: tuple[str, ...]


def _leaders(lines: Sequence[Any]) -> np.ndarray:
    groups: dict[str, list[int]] = {}
    for k, line in enumerate(lines):
        if line.group:
            groups.setdefault(line.group, []).append(k)
    out = np.full(len(lines), np.nan)
    for members in groups.values():
        hydrogen = [k for k in members if getattr(lines[k], "element", None) == "H"]
        lead = hydrogen[0] if hydrogen else max(members, key=lambda k: lines[k].prior)
        for k in members:
            dominant = bool(hydrogen) or lines[lead].prior >= LEADER_PRIOR_RATIO * lines[k].prior
            if k != lead and dominant and lines[k].line_class in COMPANION_CLASSES:
                out[k] = lines[lead].rest_freq_hz
    return out


_ARRAYS: dict[int, tuple[Any, CatalogueArrays]] = {}


def catalogue_arrays(catalogue: Catalogue) -> CatalogueArrays:
    """The arrays of ``catalogue`` (built once per catalogue object and cached)."""
    cached = _ARRAYS.get(id(catalogue))
    if cached is not None and cached[0] is catalogue:
        return cached[1]
    lines = tuple(sorted(catalogue.lines, key=lambda ln: ln.rest_freq_hz))
    cls = [ln.line_class for ln in lines]
    keys = [
        "recombination" if c == "recombination" else ln.species
        for c, ln in zip(cls, lines, strict=True)
    ]
    arrays = CatalogueArrays(
        lines=lines,
        rest_hz=np.array([ln.rest_freq_hz for ln in lines], dtype=float),
        prior=np.array([ln.prior for ln in lines], dtype=float),
        width_min_kms=np.array([ln.width_min_kms for ln in lines], dtype=float),
        width_max_kms=np.array([ln.width_max_kms for ln in lines], dtype=float),
        spread_kms=np.array([SPREAD_KMS.get(c, DEFAULT_SPREAD_KMS) for c in cls], dtype=float),
        recombination=np.array([c == "recombination" for c in cls], dtype=bool),
        atomic=np.array([c == "atomic" for c in cls], dtype=bool),
        hi=np.array([str(ln.name).upper() == "HI" for ln in lines], dtype=bool),
        family=np.unique(np.array(keys, dtype=object), return_inverse=True)[1].reshape(-1),
        leader_hz=_leaders(lines),
        group_key=tuple(ln.group or ln.name for ln in lines),
    )
    if len(_ARRAYS) > 8:
        _ARRAYS.clear()
    _ARRAYS[id(catalogue)] = (catalogue, arrays)
    return arrays


# --------------------------------------------------------------------------- candidates


@dataclass(frozen=True)
class Pairs:
    """Flattened (detection, candidate line) pairs, ordered by detection; ``idx`` indexes
    ``cat.lines``; ``galaxy`` marks extragalactic HI readings of wide profiles."""

    cat: CatalogueArrays
    det: np.ndarray
    idx: np.ndarray
    v_kms: np.ndarray
    galaxy: np.ndarray


def _window_keys(f_hz: np.ndarray, rest_hz: np.ndarray, lo_kms: float, hi_kms: float) -> np.ndarray:
    """Pair keys (detection × n_lines + line index) of the lines whose velocity for each
    detection lies in [lo_kms, hi_kms] (radio convention; rest = f / (1 - v/c))."""
    a = np.searchsorted(rest_hz, f_hz / (1.0 - lo_kms / C_KMS), "left")
    b = np.searchsorted(rest_hz, f_hz / (1.0 - hi_kms / C_KMS), "right")
    counts = np.maximum(b - a, 0)
    total = int(counts.sum())
    det = np.repeat(np.arange(f_hz.size), counts)
    start = np.repeat(a - np.concatenate([[0], np.cumsum(counts)[:-1]]), counts)
    return np.asarray(det * rest_hz.size + start + np.arange(total))


def candidate_pairs(
    feats: Features,
    cat: CatalogueArrays,
    window_kms: float,
    systemic: tuple[float, float] | None,
) -> Pairs:
    """Every catalogue line within a plausible velocity window of each detection: the Galactic
    window, the window about a known systemic velocity, and — for HI only, when the profile is
    at least GALAXY_MIN_WIDTH_KMS wide — recession velocities up to GALAXY_V_MAX_KMS."""
    usable = np.isfinite(feats.f_hz) & (feats.f_hz > 0)
    f = np.where(usable, feats.f_hz, 0.0)  # f = 0 matches no line
    keys = [_window_keys(f, cat.rest_hz, -window_kms, window_kms)]
    if systemic is not None and abs(systemic[0]) < 0.9 * C_KMS:
        hi = min(systemic[0] + window_kms, 0.9 * C_KMS)
        keys.append(_window_keys(f, cat.rest_hz, systemic[0] - window_kms, hi))
    base = np.unique(np.concatenate(keys)) if len(keys) > 1 else keys[0]
    hi_idx = np.flatnonzero(cat.hi)
    galaxy_keys = np.empty(0, dtype=int)
    with np.errstate(divide="ignore", invalid="ignore"):
        wide = usable & (feats.profile_width_hz * C_KMS / f >= GALAXY_MIN_WIDTH_KMS)
    if hi_idx.size and wide.any():
        v_hi = C_KMS * (1.0 - f[:, None] / cat.rest_hz[hi_idx][None, :])
        d, h = np.nonzero(wide[:, None] & (v_hi > window_kms) & (v_hi <= GALAXY_V_MAX_KMS))
        galaxy_keys = np.setdiff1d(d * cat.rest_hz.size + hi_idx[h], base)
    all_keys = np.sort(np.concatenate([base, galaxy_keys]))
    det, idx = np.divmod(all_keys, cat.rest_hz.size)
    v = np.asarray(velocity_from_freq(feats.f_hz[det], cat.rest_hz[idx], "radio"), dtype=float)
    # a wide HI profile beyond the Galactic window is a galaxy, whichever window found it
    galaxy = cat.hi[idx] & wide[det] & (v > window_kms)
    return Pairs(cat, det.astype(int), idx.astype(int), v, galaxy)


def spreads(pairs: Pairs, feats: Features) -> tuple[np.ndarray, np.ndarray]:
    """Velocity spread (km/s) of each pair about the source velocity: the class spread alone,
    and widened by the pair's centre error."""
    spread = np.where(pairs.galaxy, SPREAD_KMS["galaxy"], pairs.cat.spread_kms[pairs.idx])
    v_err = C_KMS * feats.f_err_hz[pairs.det] / feats.f_hz[pairs.det]
    return spread, np.asarray(np.hypot(spread, v_err))


def log_missing_companion(
    pairs: Pairs, feats: Features, spread_kms: np.ndarray, band_lsrk_hz: tuple[float, float]
) -> np.ndarray:
    """He and C recombination lines come with a brighter H line at the same velocity, NH3
    satellites with their main line: when that companion would fall inside the band but no
    detection sits there, the weaker member is unlikely (masers are exempt: they vary wildly).
    """
    f_exp = pairs.cat.leader_hz[pairs.idx] * (1.0 - pairs.v_kms / C_KMS)
    lo, hi = band_lsrk_hz
    check = np.isfinite(f_exp) & (f_exp > lo) & (f_exp < hi)
    # seen: some detection within 3 spreads of where the companion should be, or within half
    # that detection's own width (a broad H line's centre need not match a narrow C line's)
    tol = (3.0 * spread_kms * f_exp / C_KMS)[:, None]
    tol = np.maximum(tol, 0.5 * feats.width_hz[None, :])
    seen = np.any(np.abs(feats.f_hz[None, :] - f_exp[:, None]) <= tol, axis=1)
    return np.where(check & ~seen, math.log(MISSING_COMPANION_FACTOR), 0.0)


def tuned_mask(pairs: Pairs, catalogue: Catalogue, rest_freq_hz: float | None) -> np.ndarray:
    """Pairs whose line is in the group of the line the header's rest frequency names."""
    if rest_freq_hz is None or not math.isfinite(rest_freq_hz) or rest_freq_hz <= 0:
        return np.zeros(pairs.idx.size, dtype=bool)
    tol = TUNED_TOL_KMS / C_KMS
    named = catalogue.between(rest_freq_hz * (1 - tol), rest_freq_hz * (1 + tol))
    keys = {ln.group or ln.name for ln in named}
    if not keys:
        return np.zeros(pairs.idx.size, dtype=bool)
    return np.array([pairs.cat.group_key[k] in keys for k in pairs.idx.tolist()], dtype=bool)
