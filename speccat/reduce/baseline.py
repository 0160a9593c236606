"""Baseline: polynomial (order by the Bayesian information criterion) plus an optional ripple.

The polynomial is in x = 2*chan/(n-1) - 1 (``speccat.model.BaselineModel``). Orders 0..max are
compared at once from one QR factorisation of the design matrix: the residual sum of squares of
the first k columns is |y|^2 - sum_(j<k) (Q^T y)_j^2. BIC = m ln(RSS/m) + p ln m
(Schwarz 1978, Ann. Stat. 6, 461). A standing wave is searched in the periodogram of the
line-free residual; its normalised power is exponentially distributed for white noise
(Scargle 1982, ApJ 263, 835, eq. 14), which sets the detection threshold.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np
import scipy.fft
import scipy.optimize
from scipy.linalg.lapack import dpotrf, dtrtrs

from speccat.reduce.noise import robust_rms


@dataclass(frozen=True)
class BaselineFit:
    """Baseline on every channel: ``total`` = ``poly`` + the ripple (``poly`` itself when
    there is none), polynomial coeffs in x."""

    coeffs: np.ndarray
    ripple_amp: float
    ripple_period_chan: float
    ripple_phase: float
    poly: np.ndarray
    total: np.ndarray


def runs(mask: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Start and end (exclusive) channels of every run of True in ``mask``."""
    padded = np.zeros(mask.size + 2, dtype=bool)
    padded[1:-1] = mask
    edges = (padded[1:] != padded[:-1]).nonzero()[0]  # alternately a start and an end
    return edges[::2], edges[1::2]


def long_runs(mask: np.ndarray, min_len: int) -> np.ndarray:
    """The runs of True in ``mask`` that are at least ``min_len`` channels long."""
    starts, ends = runs(mask)
    long = (ends - starts) >= min_len
    return intervals_mask(mask.size, starts[long], ends[long])


def dilate_runs(mask: np.ndarray, factor: float = 1.0, minimum: int = 1) -> np.ndarray:
    """Grow every run of True by ``factor`` times its own length (at least ``minimum``) per side."""
    starts, ends = runs(mask)
    grow = np.maximum(np.ceil((ends - starts) * factor), minimum).astype(np.int64)
    return intervals_mask(mask.size, starts - grow, ends + grow)


#: Up to this many intervals, ``intervals_mask`` sets slices instead of counting over the band.
FEW_INTERVALS = 64


def intervals_mask(n: int, lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
    """Boolean mask of the union of channel intervals [lo, hi) (clipped to the band; an
    interval with hi <= lo is empty)."""
    lo = np.asarray(lo, dtype=np.int64)
    hi = np.asarray(hi, dtype=np.int64)
    if lo.size <= FEW_INTERVALS:  # the common case: a slice each beats whole-band passes
        out = np.zeros(n, dtype=bool)
        for a, b in zip(lo.tolist(), hi.tolist(), strict=True):
            if b > a and b > 0:
                out[max(a, 0) : b] = True
        return out
    lo = np.minimum(np.maximum(lo, 0), n)
    hi = np.minimum(np.maximum(hi, lo), n)
    acc = np.bincount(lo, minlength=n + 1) - np.bincount(hi, minlength=n + 1)
    return np.asarray(np.cumsum(acc[:n]) > 0)


@functools.lru_cache(maxsize=8)
def _legendre_design(n: int, order: int) -> np.ndarray:
    """Legendre columns P_0..P_order at x = 2*chan/(n-1) - 1 (cached; read-only)."""
    x = 2.0 * np.arange(n, dtype=float) / max(n - 1, 1) - 1.0
    out = np.polynomial.legendre.legvander(x, order)
    out.flags.writeable = False
    return out


@functools.lru_cache(maxsize=16)
def _leg_to_power(size: int) -> np.ndarray:
    """Matrix turning Legendre coefficients into power-series ones (cached; read-only)."""
    out = np.zeros((size, size))
    for j in range(size):
        col = np.polynomial.legendre.leg2poly(np.eye(size)[j])
        out[: col.size, j] = col
    out.flags.writeable = False
    return out


@functools.lru_cache(maxsize=8)
def _gram(n: int, order: int) -> np.ndarray:
    """A^T A of the Legendre columns over all channels (cached; read-only)."""
    a = _legendre_design(n, order)
    out = a.T @ a
    out.flags.writeable = False
    return out


def _design(n: int, order: int, period: float) -> np.ndarray:
    """Columns: [sin, cos] of the ripple (when period > 0), then P_0..P_order."""
    poly = _legendre_design(n, order)
    if period <= 0:
        return poly
    arg = 2.0 * np.pi * np.arange(n, dtype=float) / period
    return np.column_stack((np.sin(arg), np.cos(arg), poly))


def fit_linear(
    y: np.ndarray,
    good: np.ndarray,
    max_order: int,
    fixed_order: int | None,
    period: float,
    sums: tuple[np.ndarray, float] | None = None,
) -> tuple[BaselineFit, float]:
    """Least-squares baseline on ``good`` channels; returns the fit and its BIC.

    Normal equations in the (well-conditioned) Legendre basis, Cholesky factor G = L L^T:
    with w = L^-1 A^T y the RSS of the first k columns is |y|^2 - sum_(j<k) w_j^2.
    Without a ripple, ``sums`` = (P^T y, |y|^2) over every channel (``legendre_sums``) lets
    the good-channel sums be formed from the few excluded channels alone; ``y`` must then be
    finite everywhere.
    """
    n = y.size
    m = int(np.count_nonzero(good))
    n_rip = 2 if period > 0 else 0
    top = max_order if fixed_order is None else fixed_order
    top = max(0, min(top, m - n_rip - 2))
    design = _design(n, top, period)
    if period <= 0:  # cached Gram matrix minus the few excluded rows
        bad = (~good).nonzero()[0]
        a_bad = design[bad]
        gram = _gram(n, top) - a_bad.T @ a_bad
        if sums is None:
            sums = legendre_sums(np.where(good, y, 0.0), top)
            bad = bad[:0]
        y_bad = y[bad]
        rhs = sums[0][: top + 1] - a_bad[: y_bad.size].T @ y_bad
        yy = sums[1] - float(np.dot(y_bad, y_bad))
    else:
        a = design[good]
        gram = a.T @ a
        yg = np.where(good, y, 0.0)
        rhs, yy = design.T @ yg, float(np.dot(yg, yg))
    chol, info = dpotrf(gram, lower=1, clean=1)
    if info != 0:  # degenerate columns (e.g. ripple aliasing): regularise
        ridge = np.eye(gram.shape[0]) * 1e-9 * max(np.trace(gram), 1.0)
        chol, info = dpotrf(gram + ridge, lower=1, clean=1)
        if info != 0:
            raise np.linalg.LinAlgError("baseline normal matrix is not positive definite")
    w = dtrtrs(chol, rhs, lower=1)[0]
    # RSS and BIC per number of columns, in floats (a handful of values)
    explained, rss_all = 0.0, []
    for wj in w.tolist():
        explained += wj * wj
        rss_all.append(yy - explained)
    log_m = math.log(m)
    if fixed_order is None:
        first = n_rip  # the ripple columns are always in
        extra = 1 if period > 0 else 0
        bic = [
            m * math.log(max(rss_all[j], 1e-300) / m) + (j + 1 + extra) * log_m
            for j in range(first, len(rss_all))
        ]
        best_bic = min(bic)
        k = first + bic.index(best_bic)
    else:
        k = design.shape[1] - 1
        best_bic = float(m * math.log(max(rss_all[k], 1e-300) / m) + (k + 1) * log_m)
    beta = dtrtrs(chol[: k + 1, : k + 1], w[: k + 1], lower=1, trans=1)[0]
    leg = beta[n_rip:]
    poly = design[:, n_rip : k + 1] @ leg
    coeffs = _leg_to_power(leg.size) @ leg
    if n_rip:
        s_amp, c_amp = float(beta[0]), float(beta[1])
        total = poly + design[:, :2] @ beta[:2]
        amp, phase = float(np.hypot(s_amp, c_amp)), float(np.arctan2(c_amp, s_amp))
    else:
        total, amp, phase = poly, 0.0, 0.0
    fit = BaselineFit(np.asarray(coeffs), amp, period if n_rip else 0.0, phase, poly, total)
    return fit, best_bic


def legendre_sums(y: np.ndarray, order: int) -> tuple[np.ndarray, float]:
    """(P_0..P_order)^T y and |y|^2 over every channel, for ``fit_linear``."""
    return _legendre_design(y.size, order).T @ y, float(np.dot(y, y))


def find_ripple(resid: np.ndarray, good: np.ndarray, sigma: float, false_alarm: float) -> float:
    """Period (channels) of a significant sinusoid in the good-channel residual, else 0.

    Periods from 4 channels to a third of the band are searched on the FFT grid (peak interpolated); the
    peak's normalised power must exceed ln(M / false_alarm) for M independent frequencies,
    and the sinusoid must run through the whole band (``spans_band``); the four strongest
    peaks above the level are tried in turn.
    """
    n = resid.size
    m = int(np.count_nonzero(good))
    if m < 32 or not np.isfinite(sigma) or sigma <= 0:
        return 0.0
    r = resid - float(resid[good].sum()) / m  # (the mean, as np.mean forms it)
    np.copyto(r, 0.0, where=~good)
    nfft, inner = _ripple_grid(n)
    if inner.size == 0:
        return 0.0
    spec = scipy.fft.rfft(r, nfft)  # (SciPy keeps its plans: no twiddle factors per call)
    # power only over the searched indices and their two outer neighbours (a contiguous run)
    first = int(inner[0]) - 1
    part = spec[first : int(inner[-1]) + 2]
    power = (part.real**2 + part.imag**2) / (m * sigma**2)
    level = math.log(max(float(inner.size), 1.0) / false_alarm)
    at = power[1:-1]
    peaks = ((at >= level) & (at >= power[:-2]) & (at >= power[2:])).nonzero()[0] + 1
    for at_peak in peaks[(-power[peaks]).argsort()][:4]:  # strongest first; a few candidates
        best = first + int(at_peak)
        lo, mid, hi = np.log(power[at_peak - 1 : at_peak + 2] + 1e-300)
        denom = lo - 2 * mid + hi
        shift = 0.5 * (lo - hi) / denom if denom < 0 else 0.0
        period = float(nfft / (best + np.minimum(np.maximum(shift, -0.5), 0.5)))
        if spans_band(r, good, period):
            return period
    return 0.0


@functools.lru_cache(maxsize=8)
def _ripple_grid(n: int) -> tuple[int, np.ndarray]:
    """FFT length and the searched frequency indices (3/n to 1/4 cycle per channel), those
    with both neighbours on the grid (cached; read-only)."""
    nfft = scipy.fft.next_fast_len(n, real=True)
    freqs = np.arange(nfft // 2 + 1) / nfft
    idx = np.flatnonzero((freqs >= 3.0 / n) & (freqs <= 0.25))
    inner = idx[(idx > 0) & (idx < freqs.size - 1)]  # contiguous (``find_ripple`` slices)
    inner.flags.writeable = False
    return nfft, inner


def spans_band(r: np.ndarray, good: np.ndarray, period: float) -> bool:
    """A standing wave runs through the whole band: the sinusoid fitted to all good channels
    must also be present in each third of the band, i.e. each third's fit, projected on the
    whole-band (sin, cos) amplitude vector, must reach a third of its length (periods are at
    most a third of the band, so each third holds at least one cycle). A single wide feature
    (e.g. a 21 cm galaxy profile not yet masked) puts low-frequency power into the
    periodogram too, but only in the part of the band that holds it. A third with fewer good
    channels than one period is not judged; at least two thirds must be."""
    n = r.size
    arg = 2.0 * np.pi * np.arange(n, dtype=float) / period
    basis = np.column_stack((np.sin(arg), np.cos(arg), np.ones(n)))
    whole = _sinusoid(basis, r, good)
    length = float(np.hypot(whole[0], whole[1]))
    if length <= 0:
        return False
    third = np.arange(n) * 3 // n
    tested = 0
    for k in range(3):
        sel = good & (third == k)
        if sel.sum() < max(period, 8):  # too few channels (e.g. masked lines) to judge
            continue
        tested += 1
        part = _sinusoid(basis, r, sel)
        if float(part[0] * whole[0] + part[1] * whole[1]) / length < length / 3.0:
            return False
    return tested >= 2


def _sinusoid(basis: np.ndarray, r: np.ndarray, good: np.ndarray) -> np.ndarray:
    """Least-squares [sin, cos, offset] amplitudes over ``good`` channels (zeros if too few)."""
    if good.sum() < 8:
        return np.zeros(3)
    coef = np.linalg.lstsq(basis[good], r[good], rcond=None)[0]
    return np.asarray(coef)


def refine_period(
    y: np.ndarray, good: np.ndarray, max_order: int, fixed_order: int | None, period: float
) -> float:
    """Polish the ripple period: bounded scalar minimisation of the BIC within +/- 0.6 bin."""
    n = y.size
    freq = 1.0 / period
    half = 0.6 / n

    def cost(f: float) -> float:
        return fit_linear(y, good, max_order, fixed_order, 1.0 / f)[1]

    res = scipy.optimize.minimize_scalar(
        cost, bounds=(freq - half, freq + half), method="bounded", options={"xatol": 1e-4 / n}
    )
    return float(1.0 / res.x) if res.success else period


def fit_baseline(
    y: np.ndarray,
    valid: np.ndarray,
    line_mask: np.ndarray,
    *,
    max_order: int,
    fixed_order: int | None,
    clip_sigma: float,
    ripple: bool,
    ripple_false_alarm: float,
    start: tuple[np.ndarray, float] | None = None,
    max_iter: int = 6,
) -> tuple[BaselineFit, np.ndarray]:
    """Iterative baseline: fit, clip |resid| > clip_sigma, dilate clipped runs, refit.

    Without ``start`` the first fit is a straight line (order <= 1) so that a wide line is
    clipped before the order is chosen by the BIC on the remaining channels.

    The clipping level is the robust rms of the good channels (``robust_rms``).
    ``start`` (good-channel mask, ripple period) warm-starts from an earlier call. Stops when
    fewer than 0.2 % of the channels change. Returns the baseline and the mask of channels it
    was fitted on (valid, line-free, unclipped). Invalid channels of ``y`` may hold anything.
    """
    free = valid & ~line_mask
    good = free.copy() if start is None else start[0] & free
    n_valid = int(np.count_nonzero(valid))
    if n_valid < y.size:
        y = np.where(valid, y, 0.0)
    sums = legendre_sums(y, max(max_order, fixed_order or 0, 1))
    if np.count_nonzero(good) < 8:
        good = valid.copy()
    period = 0.0 if start is None or not ripple else start[1]
    # a cold start clips against a straight line first: a high-order polynomial fitted to
    # every channel would follow a wide line (e.g. a 21 cm galaxy profile) and hide it
    first = fixed_order if fixed_order is not None or start is not None else min(max_order, 1)
    fit, _ = fit_linear(y, good, max_order, first, period, sums)
    tolerance = max(2, int(0.002 * y.size))
    least = max(8, 0.2 * n_valid)
    changed_before = True
    for it in range(max_iter):
        resid = y - fit.total
        sigma = robust_rms(resid[good], finite=True)
        clipped = np.abs(resid) > clip_sigma * sigma
        if n_valid < y.size:
            clipped &= valid
        new_good = free & ~dilate_runs(clipped)
        if np.count_nonzero(new_good) < least:  # dilation took too much: undilated
            new_good = free & ~clipped
            if np.count_nonzero(new_good) < least:
                new_good = good
        new_period = period
        search = it == 0 or (it == 1 and start is None and (period > 0 or changed_before))
        if ripple and search:
            left = resid if fit.total is fit.poly else y - fit.poly  # (no ripple: the same)
            found = find_ripple(left, new_good, sigma, ripple_false_alarm)
            same = bool(found and period and abs(found - period) < 0.02 * period)
            if found and not same:
                found = refine_period(y, new_good, max_order, fixed_order, found)
            new_period = period if same else found
        changed = int(np.count_nonzero(new_good != good))
        changed_before = changed > 0.01 * y.size
        if changed <= tolerance and new_period == period and (it > 0 or start is not None):
            break
        good, period = new_good, new_period
        fit, _ = fit_linear(y, good, max_order, fixed_order, period, sums)
    return fit, good
