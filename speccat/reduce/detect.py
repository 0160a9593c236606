"""Line finding by matched filtering with a ladder of Gaussian kernels.

The narrowest kernels (those not decimated) are sampled Gaussians applied in channel space
(``_pair_sums``). The others are applied in the Fourier domain through their analytic transfer
function exp(-2 pi^2 s^2 f^2) (s = kernel sigma in channels, f in cycles per channel) and
evaluated on a decimated grid, which costs nothing in accuracy because their transfer function
is below 1e-5 beyond the decimated Nyquist frequency. The noise of each filtered spectrum is
rms x |k| x sqrt(correlation factor), where |k|^2 = sum_f |H(f)|^2 / N (Parseval), so the
threshold is in sigma of the filtered spectrum. The matched filter is the optimal linear
detector of a known shape in white noise (common practice; e.g. Turin 1960, IRE Trans. IT-6).
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np
import scipy.fft

from speccat.reduce.noise import correlation_factor

FWHM_PER_SIGMA = float(2.0 * np.sqrt(2.0 * np.log(2.0)))


@dataclass(frozen=True)
class Seed:
    """A detected feature: centre and sigma in channels, amplitude estimate, filter S/N."""

    center_chan: float
    sigma_chan: float
    amplitude: float
    z: float


@functools.lru_cache(maxsize=16)
def kernel_sigmas(n: int, min_fwhm_chan: float, max_fraction: float, step: float) -> np.ndarray:
    """Kernel sigmas (channels): FWHM from ``min_fwhm_chan`` up to ``max_fraction`` of the band
    (cached; read-only)."""
    top = max(max_fraction * n, min_fwhm_chan)
    count = int(np.floor(np.log(top / min_fwhm_chan) / np.log(step))) + 1
    out = min_fwhm_chan * step ** np.arange(count) / FWHM_PER_SIGMA
    out.flags.writeable = False
    return out


def _decimation(sigma: float) -> int:
    """Largest power of two not above sigma/1.5 (transfer < 1.5e-5 beyond its Nyquist)."""
    return int(2 ** max(0, int(np.floor(np.log2(max(sigma / 1.5, 1.0))))))


@dataclass(frozen=True)
class _Plan:
    """Direct taps for the narrow kernels (and the same taps folded about their centre, one
    row per kernel, zero-padded to the longest); FFT length and, per decimation, kernel rows,
    transfer functions and squared kernel norms for the others."""

    taps: tuple[tuple[int, np.ndarray, float], ...]
    nfft: int
    parts: tuple[tuple[int, np.ndarray, np.ndarray, np.ndarray], ...]
    folded: np.ndarray


@functools.lru_cache(maxsize=16)
def _plan(n: int, sigmas: tuple[float, ...]) -> _Plan:
    sig = np.asarray(sigmas)
    decims = np.array([_decimation(s) for s in sig])
    taps = []
    for j in np.flatnonzero(decims == 1):  # narrow: sampled kernel, direct convolution
        half = int(np.ceil(5.0 * sig[j]))
        k = np.exp(-0.5 * (np.arange(-half, half + 1) / sig[j]) ** 2)
        taps.append((int(j), k, float(np.dot(k, k))))
    folded = np.zeros((len(taps), max([k.size // 2 for _, k, _ in taps], default=0) + 1))
    for row, (_, k, _) in enumerate(taps):
        folded[row, : k.size // 2 + 1] = k[k.size // 2 :]
    folded.flags.writeable = False
    broad = decims > 1
    if not broad.any():
        return _Plan(tuple(taps), 0, (), folded)
    dmax = int(decims.max())
    pad = int(min(3.0 * sig.max(), 2 * n)) + 8
    nfft = dmax * scipy.fft.next_fast_len(-(-(n + pad) // dmax), real=True)
    f = np.arange(nfft // 2 + 1) / nfft
    parts = []
    for d in np.unique(decims[broad]):
        idx = np.flatnonzero(decims == d)
        keep = (nfft // int(d)) // 2 + 1
        # complex, as numpy would cast it for each product with the spectrum (the same values)
        trans = np.exp(-2.0 * np.pi**2 * sig[idx, None] ** 2 * f[None, :keep] ** 2) + 0j
        trans.flags.writeable = False
        full = np.exp(-4.0 * np.pi**2 * sig[idx, None] ** 2 * f[None, :] ** 2)
        nyq = full[:, -1] if nfft % 2 == 0 else np.zeros(idx.size)
        norm2 = (2.0 * full.sum(axis=1) - full[:, 0] - nyq) / nfft
        parts.append((int(d), idx, trans, norm2))
    return _Plan(tuple(taps), nfft, tuple(parts), folded)


@functools.lru_cache(maxsize=16)
def _broad(n: int, sigmas: tuple[float, ...]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Kernel indices, decimations and squared norms of the FFT (broad) kernels (cached)."""
    parts = _plan(n, sigmas).parts
    if not parts:
        return np.zeros(0, dtype=int), np.zeros(0), np.zeros(0)
    j = np.concatenate([idx for _, idx, _, _ in parts])
    d = np.concatenate([np.full(idx.size, float(dd)) for dd, idx, _, _ in parts])
    norm2 = np.concatenate([norms for _, _, _, norms in parts])
    return j, d, norm2


@dataclass(frozen=True)
class Bank:
    """The S/N spectra of every kernel, one flat array: scale j holds ``sizes[j]`` values from
    ``starts[j]`` (channel i x ``decim[j]``), each scale followed by one zero separator."""

    z: np.ndarray
    starts: np.ndarray
    sizes: np.ndarray
    decim: np.ndarray

    def scale(self, j: int) -> np.ndarray:
        return self.z[self.starts[j] : self.starts[j] + self.sizes[j]]


@functools.lru_cache(maxsize=16)
def _layout(n: int, sigmas: tuple[float, ...]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """starts, sizes and decimations of a bank (cached; read-only)."""
    decim = np.array([_decimation(s) for s in sigmas])
    sizes = -(-n // decim)
    starts = np.concatenate(([0], np.cumsum(sizes + 1)[:-1]))
    for arr in (starts, sizes, decim):
        arr.flags.writeable = False
    return starts, sizes, decim


def filter_bank(resid: np.ndarray, sigmas: np.ndarray, rms: float, rho: np.ndarray) -> Bank:
    """S/N spectra of ``resid`` (one per kernel, decimated): filtered / its own sigma."""
    n = resid.size
    key = tuple(sigmas.tolist())
    plan = _plan(n, key)
    starts, sizes, decim = _layout(n, key)
    z = np.empty(int(starts[-1] + sizes[-1] + 1))
    z[starts + sizes] = 0.0  # the separators; every scale is written below
    corr = correlation_factor(rho, sigmas)
    # each filtered spectrum is divided by its noise straight into its place in the bank
    if plan.taps:
        narrow = plan.folded @ _pair_sums(resid, plan.folded.shape[1] - 1)
        for row, (j, _, norm2) in enumerate(plan.taps):
            noise = rms * math.sqrt(norm2 * corr[j])
            np.divide(narrow[row], noise, out=z[starts[j] : starts[j] + n])
    if plan.parts:
        spec = scipy.fft.rfft(resid, plan.nfft)  # (SciPy keeps its plans)
        for d, idx, trans, norms in plan.parts:
            product = spec[None, : trans.shape[1]] * trans
            filtered = scipy.fft.irfft(product, plan.nfft // d, axis=-1)  # (plans kept)
            noise_b = d * rms * np.sqrt(norms * corr[idx])
            for row, j in enumerate(idx.tolist()):
                out = z[starts[j] : starts[j] + sizes[j]]
                np.divide(filtered[row, : sizes[j]], noise_b[row], out=out)
    return Bank(z, starts, sizes, decim)


def _pair_sums(x: np.ndarray, half: int) -> np.ndarray:
    """Rows h = 0..half: x[i - h] + x[i + h] (x[i] for h = 0), zero outside the band. A
    symmetric kernel's convolution is its folded taps times these rows: the narrow kernels of
    the bank are one small matrix product (fewer operations than a convolution per kernel)."""
    n = x.size
    padded = np.zeros(n + 2 * half)
    padded[half : half + n] = x
    out = np.empty((half + 1, n))
    out[0] = x
    for h in range(1, half + 1):
        np.add(padded[half - h : half - h + n], padded[half + h : half + h + n], out=out[h])
    return out


#: Components narrower than this (channels) are not shifted analytically (``shift_bank``).
SHIFT_MIN_SIGMA = 1.0
#: Responses are evaluated within this many combined sigmas (exp(-32) beyond).
SHIFT_REACH = 8.0


def shift_bank(
    bank: Bank,
    sigmas: np.ndarray,
    rms: float,
    rho: np.ndarray,
    valid: np.ndarray,
    remove: np.ndarray,
    restore: np.ndarray,
    in_place: bool = False,
) -> Bank | None:
    """The bank of (r - model(remove) + model(restore)) from the bank of r, for Gaussian rows
    [A, c, ln s]: filtering is linear, so each component's own response is subtracted (or
    added back) where it is not negligible, instead of filtering the whole band again.

    Narrow (undecimated) kernels convolve the component's sampled model exactly. A broad kernel
    of sigma w answers a Gaussian of sigma s with A s / sqrt(s^2 + w^2) times a Gaussian of
    sigma sqrt(s^2 + w^2) (its transfer function is that of a unit-area Gaussian), exact for
    the sampled profile to exp(-2 pi^2 s^2 w^2 / (s^2 + w^2)) < 1e-7 when s >= 1 channel (the
    Poisson summation formula). Returns None, and the caller filters afresh, when a component
    is narrower than ``SHIFT_MIN_SIGMA``, not within the band to +/- 8 sigma or touches an
    invalid channel there, since then the sampled model is not that Gaussian. ``in_place``
    moves ``bank`` itself (its array is changed) instead of a copy.
    """
    n = valid.size
    key = tuple(sigmas.tolist())
    plan = _plan(n, key)
    rows = np.concatenate((remove, restore))
    if rows.shape[0] == 0:
        return bank
    sign = np.concatenate((-np.ones(remove.shape[0]), np.ones(restore.shape[0])))
    sig = np.exp(rows[:, 2])
    lo = np.floor(rows[:, 1] - SHIFT_REACH * sig).astype(int)
    hi = np.ceil(rows[:, 1] + SHIFT_REACH * sig).astype(int) + 1
    if rows.shape[1] != 3 or np.any(sig < SHIFT_MIN_SIGMA) or lo.min() < 0 or hi.max() > n:
        return None
    if not all(valid[a:b].all() for a, b in zip(lo.tolist(), hi.tolist(), strict=True)):
        return None
    corr = correlation_factor(rho, sigmas)
    amp, cen = rows[:, 0] * sign, rows[:, 1]
    z = bank.z if in_place else bank.z.copy()
    # narrow: exact convolutions with each kernel scaled to S/N units
    taps = [
        (int(bank.starts[j]), k.size // 2, k / (rms * np.sqrt(norm2 * corr[j])))
        for j, k, norm2 in plan.taps
    ]
    for c in range(rows.shape[0] if taps else 0):
        a, b = int(lo[c]), int(hi[c])
        seg = amp[c] * np.exp(-0.5 * ((np.arange(a, b) - cen[c]) / sig[c]) ** 2)
        for at, half, kernel in taps:
            first, stop = max(a - half, 0), min(b + half, n)
            part = np.convolve(seg, kernel)
            z[at + first : at + stop] += part[first - a + half : stop - a + half]
    j_b, d_b, norm_b = _broad(n, key)
    if j_b.size:  # every (component, broad kernel) pair at once, analytic
        comb = np.sqrt(sig[:, None] ** 2 + sigmas[j_b][None, :] ** 2)
        scale = amp[:, None] * sig[:, None] / comb / (rms * np.sqrt(norm_b * corr[j_b]))[None, :]
        reach = SHIFT_REACH * comb
        k_lo = np.maximum(np.ceil((cen[:, None] - reach) / d_b), 0).astype(int)
        k_hi = np.minimum(np.floor((cen[:, None] + reach) / d_b) + 1, bank.sizes[j_b]).astype(int)
        count = np.maximum(k_hi - k_lo, 0).ravel()
        pair = np.repeat(np.arange(count.size), count)
        kk = k_lo.ravel()[pair] + np.arange(pair.size) - np.repeat(np.cumsum(count) - count, count)
        col = pair % j_b.size
        x = kk * d_b[col].astype(float)
        resp = scale.ravel()[pair] * np.exp(
            -0.5 * ((x - cen[pair // j_b.size]) / comb.ravel()[pair]) ** 2
        )
        np.add.at(z, bank.starts[j_b][col] + kk, resp)
    return Bank(z, bank.starts, bank.sizes, bank.decim)


def _peaks(u: np.ndarray, threshold: float) -> tuple[np.ndarray, np.ndarray]:
    """Indices of local maxima of ``u`` above ``threshold`` and their parabolic offsets."""
    above = (u > threshold).nonzero()[0]
    if above.size == 0:
        return above, np.empty(0)
    last = u.size - 1
    # neighbours of each channel above the threshold, -inf beyond the ends (only the first
    # and the last of them can be at an end: they are in ascending order)
    left = u[above - 1]
    right = u[np.minimum(above + 1, last)]
    if above[0] == 0:
        left[0] = -np.inf
    if above[-1] == last:
        right[-1] = -np.inf
    here = u[above]
    is_top = (here >= left) & (here > right)
    top = above[is_top]
    lo, mid, hi = left[is_top], here[is_top], right[is_top]
    denom = lo - 2.0 * mid + hi
    with np.errstate(divide="ignore", invalid="ignore"):
        shift = np.where(denom < 0, 0.5 * (lo - hi) / denom, 0.0)
    shift = np.minimum(np.maximum(shift, -0.5), 0.5)
    if top.size and top[0] == 0:  # no offset at the ends
        shift[0] = 0.0
    if top.size and top[-1] == last:
        shift[-1] = 0.0
    return top, shift


def find_seeds(
    bank: Bank,
    sigmas: np.ndarray,
    rms: float,
    rho: np.ndarray,
    threshold: float,
    limit: int,
    reach: float = 3.0,
) -> list[Seed]:
    """Peaks above ``threshold`` in any filtered spectrum, strongest first, one per feature.

    Each accepted peak's width is refined between the ladder's scales (``_refined_sigma``) and
    its amplitude follows from that width. A weaker peak of the same sign is shadowed (dropped)
    when it lies within ``reach`` sqrt(a^2 + s^2) channels of an accepted feature, a the
    feature's sigma and s the kernel's: it is that feature's own response at another scale or
    position (a narrow kernel on the flank of a strong broad line). A real line that close is
    a blend; the next round finds it in what the fitted model leaves. The kernels are
    positive, so a feature never answers with the opposite sign: such peaks are never
    shadowed.
    """
    # all scales in one array, separated by a zero, so the peak search is one vectorised pass
    flat_z, starts, sizes = bank.z, bank.starts, bank.sizes
    top, shift = _peaks(np.abs(flat_z), threshold)
    if top.size == 0:
        return []
    j_all = np.searchsorted(starts, top, side="right") - 1
    local = top - starts[j_all]
    shift = np.where((local == 0) | (local == sizes[j_all] - 1), 0.0, shift)
    p_all = (local + shift) * bank.decim[j_all]
    v_all = np.abs(flat_z[top])
    s_all = np.sign(flat_z[top])
    w_all = sigmas[j_all]
    corr = correlation_factor(rho, sigmas).tolist()
    w2_all = w_all**2
    positive = s_all > 0  # (every peak is above a positive threshold: the sign is +-1)
    seeds: list[Seed] = []
    score = v_all.copy()
    while len(seeds) < limit:
        k = int(np.argmax(score))
        if not math.isfinite(score[k]):
            break
        j, w, v = int(j_all[k]), float(w_all[k]), float(v_all[k])
        pos, sign = float(p_all[k]), float(s_all[k])
        s = _refined_sigma(bank, sigmas, j, pos, sign)
        # response of a peak-1 kernel of sigma w to a line of peak A and sigma s:
        # A sqrt(2 pi) s w / sqrt(s^2 + w^2); its noise: rms sqrt(sqrt(pi) w x corr)
        filtered = sign * v * rms * math.sqrt(corr[j] * w * math.sqrt(math.pi))
        amp = filtered * math.sqrt(s * s + w * w) / (math.sqrt(2.0 * math.pi) * s * w)
        seeds.append(Seed(pos, s, amp, v))
        near = np.abs(p_all - pos) < reach * np.sqrt(s**2 + w2_all)
        score[near & (positive if sign > 0 else ~positive)] = -np.inf
        score[k] = -np.inf
    return seeds


def _refined_sigma(bank: Bank, sigmas: np.ndarray, j: int, pos: float, sign: float) -> float:
    """Line sigma from the matched-filter S/N at ``pos`` on scales j-1, j, j+1.

    For a Gaussian line of sigma s, the S/N through a kernel of sigma w is proportional to
    sqrt(2 s w / (s^2 + w^2)), a function of ln(w/s) symmetric about 0; a parabola through
    the three scales in ln w puts its vertex at ln s (clamped to half a ladder step).
    """
    if j == 0 or j == bank.sizes.size - 1:
        return float(sigmas[j])
    vals = []
    for i in (j - 1, j, j + 1):
        at = min(max(round(pos / int(bank.decim[i])), 0), int(bank.sizes[i]) - 1)
        vals.append(sign * float(bank.z[bank.starts[i] + at]))
    lo, mid, hi = vals
    denom = lo - 2.0 * mid + hi
    if not denom < 0:
        return float(sigmas[j])
    step = float(np.log(sigmas[j + 1] / sigmas[j]))
    shift = min(max(0.5 * (lo - hi) / denom, -0.5), 0.5)
    return float(sigmas[j] * np.exp(shift * step))
