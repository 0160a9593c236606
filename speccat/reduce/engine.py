"""Detection and fitting rounds: find seeds, group them into blends, fit, prune, repeat.

Component parameter rows are [A, c, ln s] (Gaussian: peak, centre, sigma; channels) or
[S, c, ln sigma, ln gamma] (Voigt: area, centre, Gaussian sigma, Lorentzian half width).
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass, replace

import numpy as np

from speccat.reduce.detect import SHIFT_REACH, Bank, Seed, filter_bank, find_seeds, shift_bank
from speccat.reduce.fit import GroupFit, fit_components, model, over_budget
from speccat.reduce.noise import correlation_factor
from speccat.reduce.settings import ReduceSettings

SQRT2PI = float(np.sqrt(2.0 * np.pi))
#: A fitted component whose |peak| exceeds this many times the data's largest |value| in its
#: blend window is absurd (it must be cancelled by another) and is pruned.
PEAK_LIMIT = 3.0
TRIAL_FEV = 100  # evaluation cap of the trial fits in _simplest (the kept fit: the default 200)


@dataclass(frozen=True)
class Noise:
    """Per-channel rms and the channel autocorrelation rho(1..L) of the line-free residual."""

    rms: float
    rho: np.ndarray


@dataclass(frozen=True)
class Group:
    """One blend: its fitted components, the fit, and its channel window [lo, hi)."""

    params: np.ndarray
    fit: GroupFit
    lo: int
    hi: int


def reach_sigma(params: np.ndarray) -> np.ndarray:
    """A Gaussian-equivalent extent (channels) per component; Voigt wings count double."""
    sig = np.exp(np.minimum(np.maximum(params[:, 2], -30), 30))
    if params.shape[1] == 4:
        sig = sig + 2.0 * np.exp(np.minimum(np.maximum(params[:, 3], -30), 30))
    return np.asarray(sig)


def group_rows(params: np.ndarray, max_components: int) -> list[np.ndarray]:
    """Indices of components whose +/- 3 sigma intervals overlap (chains), in centre order.

    A chain longer than ``max_components`` keeps its strongest members (|A| x sigma).
    """
    if params.shape[0] == 0:
        return []
    order = params[:, 1].argsort()
    cen, sig = params[order, 1], reach_sigma(params[order])
    lo, hi = cen - 3.0 * sig, cen + 3.0 * sig
    reach = np.maximum.accumulate(hi)
    breaks = (lo[1:] >= reach[:-1]).nonzero()[0] + 1
    out: list[np.ndarray] = []
    bounds = [0, *breaks.tolist(), order.size]
    for a, b in itertools.pairwise(bounds):
        chunk = order[a:b]
        if chunk.size > max_components:  # keep the strongest; the rest is dropped
            strength = np.abs(params[:, 0]) * np.exp(np.minimum(np.maximum(params[:, 2], -30), 30))
            chunk = np.sort(chunk[np.argsort(-strength[chunk])[:max_components]])
        out.append(chunk)
    return out


def window(params: np.ndarray, n: int) -> tuple[int, int]:
    """Fit window [lo, hi): +/- 4 sigma around the components, with spare channels."""
    if params.shape[0] == 1:  # the common case, in floats
        row = params[0].tolist()
        sig1 = math.exp(min(max(row[2], -30.0), 30.0))
        if len(row) == 4:
            sig1 += 2.0 * math.exp(min(max(row[3], -30.0), 30.0))
        lo = math.floor(row[1] - 4.0 * sig1)
        hi = math.ceil(row[1] + 4.0 * sig1) + 1
    else:
        cen, sig = params[:, 1], reach_sigma(params)
        lo = int(np.floor(np.min(cen - 4.0 * sig)))
        hi = int(np.ceil(np.max(cen + 4.0 * sig))) + 1
    need = params.size + 3
    while hi - lo < need:
        lo, hi = lo - 1, hi + 1
    return max(lo, 0), min(hi, n)


def model_snr(params: np.ndarray, noise: Noise, n: int, profile: str) -> np.ndarray:
    """Matched-filter S/N of each component: |model| / (rms sqrt(correlation factor))."""
    out = np.empty(params.shape[0])
    cf = correlation_factor(noise.rho, np.exp(params[:, 2]))
    for i, p in enumerate(params):
        lo, hi = window(p[None, :], n)
        m = model(np.arange(lo, hi, dtype=float), p[None, :], profile)
        out[i] = math.sqrt(np.dot(m, m) / cf[i]) / noise.rms
    return out


def _fit_all(
    resid: np.ndarray, valid: np.ndarray, params: np.ndarray, noise: Noise, s: ReduceSettings
) -> list[Group]:
    n = resid.size
    groups = []
    rows_list = group_rows(params, s.max_components)
    # how far each component reaches: a Gaussian is < 1e-14 of its peak beyond 8 sigma
    reach = (
        SHIFT_REACH * reach_sigma(params)
        if s.profile == "gaussian"
        else np.full(len(params), np.inf)
    )
    for rows in rows_list:
        p0 = params[rows]
        lo, hi = window(p0, n)
        sel = valid[lo:hi]
        every = bool(sel.all())
        x = np.arange(lo, hi, dtype=float)
        if not every:
            x = x[sel]
        if x.size < p0.size + 1:
            continue
        # the other components (of every other group) that reach this window, over it only
        near = np.abs(params[:, 1] - 0.5 * (lo + hi)) < reach + 0.5 * (hi - lo)
        near[rows] = False
        y = resid[lo:hi] if every else resid[lo:hi][sel]
        if near.any():
            y = y - model(x, params[near], s.profile)
        fit = _simplest(x, y, p0, noise, s.detect_sigma)
        # (a successful fit has a finite covariance; _simplest may still void its params)
        if np.isfinite(fit.params).all() and (fit.success or np.isfinite(fit.cov).all()):
            groups.append(Group(fit.params, fit, lo, hi))
    return groups


def _simplest(
    x: np.ndarray, y: np.ndarray, p0: np.ndarray, noise: Noise, detect_sigma: float
) -> GroupFit:
    """Fit ``p0`` jointly, then drop components one at a time, refitting from the remaining
    start values: first any that left the window or became absurd (|peak| above PEAK_LIMIT x
    the data's largest |value| in the window, or the weaker of an opposite-sign pair that
    shares a centre, see ``_cancelling``), then any whose amplitude is below detect_sigma times
    its own error.

    The amplitude's Wald statistic (A / sigma_A)^2 approximates the rise of chi^2 when the
    component is removed and the others refitted (Wald 1943, Trans. AMS 54, 426), so this is
    the detection threshold applied to each component given the others; one refit per drop.

    Trial fits run on half the evaluation budget (an over-complete joint fit that wanders
    until the cap is only used to pick the component to drop); the fit that is kept is redone
    on the full budget when it stopped at the short cap.
    """
    profile = "gaussian" if p0.shape[1] == 3 else "voigt"
    fit = fit_components(x, y, p0, profile, maxfev=TRIAL_FEV)
    span = float(x[-1] - x[0]) if x.size > 1 else 1.0
    top = float(np.abs(y).max()) if y.size else 0.0

    def absurd(p: np.ndarray) -> np.ndarray:
        wid = reach_sigma(np.where(np.isfinite(p), p, 0.0))
        return np.asarray(
            ~np.all(np.isfinite(p), axis=1)
            | (p[:, 1] < x[0] - 0.25 * span)
            | (p[:, 1] > x[-1] + 0.25 * span)
            | (wid > 2.0 * span)
            | (wid < 0.05)
            | ((np.abs(_peaks(p, profile)) > PEAK_LIMIT * top) & _seen(x, p, wid))
            | _cancelling(p)
        )

    while fit.params.shape[0] > 1 and not over_budget():
        p = fit.params
        bad = absurd(p)
        if bad.any():
            worst = int(np.flatnonzero(bad)[0])
        else:
            var = np.diag(fit.cov)[0 :: p.shape[1]]
            with np.errstate(divide="ignore", invalid="ignore"):
                wald = np.where(var > 0, np.abs(p[:, 0]) / np.sqrt(var), 0.0)
            worst = int(np.argmin(wald))
            if wald[worst] >= detect_sigma:
                break
        p0 = np.delete(p0, worst, axis=0)
        fit = fit_components(x, y, p0, profile, maxfev=TRIAL_FEV)
    if not fit.success:  # the kept fit gets the full budget, as every fit had before
        fit = fit_components(x, y, p0, profile)
    p = fit.params
    if profile == "gaussian" and p.shape[0] == 1 and not abs(p[0, 0]) > PEAK_LIMIT * top:
        return fit  # (the common case of the test below, in floats)
    over = np.abs(_peaks(p, profile)) > PEAK_LIMIT * top
    # a lone component far above the data it sits on: no fit (dropped)
    if over.any() and (over & _seen(x, p, reach_sigma(np.where(np.isfinite(p), p, 0.0)))).any():
        return replace(fit, params=np.full_like(p, np.nan))
    return fit


def _seen(x: np.ndarray, p: np.ndarray, wid: np.ndarray) -> np.ndarray:
    """Components whose peak is bounded by the data: all but those centred in a gap inside
    the window (no fitted channel within max(1, sigma), e.g. saturated channels removed),
    whose peak may legitimately exceed every channel seen."""
    cen = np.where(np.isfinite(p[:, 1]), p[:, 1], 0.0)
    idx = np.clip(np.searchsorted(x, cen), 1, max(x.size - 1, 1))
    near = np.minimum(np.abs(x[idx - 1] - cen), np.abs(x[np.minimum(idx, x.size - 1)] - cen))
    in_gap = (near > np.maximum(1.0, wid)) & (cen > x[0]) & (cen < x[-1])
    return np.asarray(~in_gap)


def _peaks(p: np.ndarray, profile: str) -> np.ndarray:
    """Peak value of each component (Voigt rows hold the area, so evaluate at the centre)."""
    safe = np.where(np.isfinite(p), p, 0.0)
    if profile == "gaussian":
        return np.asarray(safe[:, 0])
    return np.array([model(safe[i : i + 1, 1], safe[i : i + 1], profile)[0] for i in range(len(p))])


def _cancelling(p: np.ndarray) -> np.ndarray:
    """The weaker member of every opposite-sign pair whose centres differ by less than half
    the narrower sigma and whose widths differ by less than a factor of 2: such a pair is a
    near-degenerate difference of two similar profiles (they cancel), not two lines. A narrow
    absorption on a much broader emission (self-absorption) is not affected."""
    k = p.shape[0]
    out = np.zeros(k, dtype=bool)
    if k < 2:
        return out
    safe = np.where(np.isfinite(p), p, 0.0)
    sig = reach_sigma(safe)
    amp, cen = safe[:, 0], safe[:, 1]
    i, j = np.triu_indices(k, 1)
    near = np.abs(cen[i] - cen[j]) < 0.5 * np.minimum(sig[i], sig[j])
    alike = np.maximum(sig[i], sig[j]) < 2.0 * np.minimum(sig[i], sig[j])
    pair = near & alike & (np.sign(amp[i]) * np.sign(amp[j]) < 0)
    weaker = np.where(np.abs(amp[i]) < np.abs(amp[j]), i, j)
    out[weaker[pair]] = True
    return out


def fit_groups(
    resid: np.ndarray,
    valid: np.ndarray,
    params: np.ndarray,
    noise: Noise,
    settings: ReduceSettings,
    profile: str,
) -> list[Group]:
    """Fit every blend group jointly (others' models subtracted); drop insignificant components.

    A component survives when it is finite, inside the band, not wider than half the band, and
    its model S/N (the matched-filter S/N of the fitted shape) reaches ``detect_sigma``.
    """
    n = resid.size
    groups: list[Group] = []
    for _ in range(4):
        groups = _fit_all(resid, valid, params, noise, settings)
        fitted = stack(groups, params.shape[1])
        keep = _keep(fitted, noise, settings, n, profile)
        params = fitted[keep]
        if keep.all():
            return groups
        if over_budget():
            return [g for g in groups if _keep(g.params, noise, settings, n, profile).all()]
    return _fit_all(resid, valid, params, noise, settings)


def _keep(
    params: np.ndarray, noise: Noise, settings: ReduceSettings, n: int, profile: str
) -> np.ndarray:
    if params.shape[0] == 0:
        return np.zeros(0, dtype=bool)
    finite = np.isfinite(params).all(axis=1)
    safe = np.where(finite[:, None], params, 0.0)
    sig = reach_sigma(safe)
    inside = (safe[:, 1] > -0.5) & (safe[:, 1] < n - 0.5) & (sig < 0.5 * n) & (sig > 0.05)
    ok = finite & inside
    snr = np.zeros(params.shape[0])
    snr[ok] = model_snr(safe[ok], noise, n, profile)
    return np.asarray(ok & (snr >= settings.detect_sigma))


def seed_params(seeds: list[Seed], profile: str) -> np.ndarray:
    """Start values from seeds: Gaussian [A, c, ln s]; Voigt [A sqrt(2 pi) s, c, ln .8s, ln .3s]."""
    amp = np.array([s.amplitude for s in seeds])
    cen = np.array([s.center_chan for s in seeds])
    sig = np.array([s.sigma_chan for s in seeds])
    if profile == "gaussian":
        return np.column_stack((amp, cen, np.log(sig)))
    return np.column_stack((amp * SQRT2PI * sig, cen, np.log(0.8 * sig), np.log(0.3 * sig)))


def stack(groups: list[Group], npar: int) -> np.ndarray:
    """All components of ``groups`` as one parameter array."""
    return np.concatenate([g.params for g in groups]) if groups else np.zeros((0, npar))


def detect_and_fit(
    resid: np.ndarray,
    valid: np.ndarray,
    noise: Noise,
    sigmas: np.ndarray,
    settings: ReduceSettings,
    params: np.ndarray,
) -> tuple[np.ndarray, list[Group]]:
    """Rounds of: filter the residual left by the current model, seed new lines, refit all.

    ``params`` are refitted first when given. Only the first round's seeds are shadowed by
    nothing but each other; later rounds look at what the fitted model leaves, so structure
    next to or under a fitted line (a blend) becomes a new component. Returns the surviving
    components and their fitted groups.
    """
    profile = settings.profile
    groups: list[Group] = []
    if params.shape[0]:
        groups = fit_groups(resid, valid, params, noise, settings, profile)
        params = stack(groups, params.shape[1])
    base = resid if valid.all() else np.where(valid, resid, 0.0)  # read only
    bank: Bank | None = None
    used = params
    for _ in range(settings.max_rounds):
        if over_budget():
            break
        if bank is not None and profile == "gaussian":  # the last bank, its model moved
            bank = shift_bank(
                bank, sigmas, noise.rms, noise.rho, valid, params, used, in_place=True
            )
        else:
            bank = None
        if bank is None:
            bank = filter_bank(_left(base, valid, params, profile), sigmas, noise.rms, noise.rho)
        used = params
        room = settings.max_lines - params.shape[0]
        reach = 3.0 if profile == "gaussian" else 5.0  # Lorentzian wings reach further
        seeds = find_seeds(bank, sigmas, noise.rms, noise.rho, settings.detect_sigma, room, reach)
        if not seeds:
            break
        start = np.concatenate((params, seed_params(seeds, profile)))
        groups = fit_groups(resid, valid, start, noise, settings, profile)
        new_params = stack(groups, start.shape[1])
        if new_params.shape == params.shape and np.allclose(new_params, params, atol=1e-6):
            break  # the seeds were pruned again: nothing more to find
        params = new_params
    return params, groups


def _left(base: np.ndarray, valid: np.ndarray, params: np.ndarray, profile: str) -> np.ndarray:
    """``base`` minus each component on the valid channels: a Gaussian within +/- 8 sigma
    (``SHIFT_REACH``, as ``shift_bank`` assumes), a Voigt over its fit window."""
    if params.shape[0] == 0:
        return base
    n = base.size
    left = base.copy()
    for p in params:
        if profile == "gaussian":
            sig = math.exp(min(max(float(p[2]), -12.0), 30.0))
            lo = max(math.floor(p[1] - SHIFT_REACH * sig), 0)
            hi = min(math.ceil(p[1] + SHIFT_REACH * sig) + 1, n)
        else:
            lo, hi = window(p[None, :], n)
        if hi > lo:
            mod = model(np.arange(lo, hi, dtype=float), p[None, :], profile)
            left[lo:hi] -= np.where(valid[lo:hi], mod, 0.0)
    return left
