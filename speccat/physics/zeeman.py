"""Line-of-sight magnetic field from the Zeeman effect in Stokes I and V.

Sign convention (this program's definition, stated in the README):
Stokes V = RCP − LCP, with right- and left-hand circular polarisation in the IEEE sense
(IAU 1973 convention). B_los > 0 means the field points AWAY from the observer; for such a
field the RCP σ component lies at the higher frequency, at ν₀ + Z·B/2, and LCP at ν₀ − Z·B/2,
where Z is the splitting factor (Hz/µG, separation of the two σ components per µG). For a
shift small against the line width this gives

    V(ν) = −(Z·B_los/2) dI/dν

(the derivative method: Troland & Heiles 1982, ApJ 252, 179; Heiles et al. 1993). Which
circular hand lies higher for a receding-pointing field, and the sign of V, differ between
papers and back ends: the sign here is this program's stated definition (the mapping of a
feed's RCP/LCP to it is the observer's to check), the magnitude is convention-free. The fit is
V = a·dI/dν + b·I by least squares over a channel window; b absorbs leakage of I into V;
B_los = −2a/Z, with the error from the fit's covariance scaled by the residual variance.
"""

from __future__ import annotations

import math
from functools import lru_cache
from typing import Any

import numpy as np
from scipy.ndimage import convolve1d

#: Splitting factors Z (Hz per µG, separation of the σ components), by catalogue line name:
#: HI 2.8 Hz/µG; OH 1665 3.27 and OH 1667 1.96 Hz/µG (Troland & Heiles 1982; Heiles et al.
#: 1993). The OH satellite lines are omitted (no value we can vouch for from memory).
SPLIT_HZ_PER_UG: dict[str, float] = {"HI": 2.8, "OH1665": 3.27, "OH1667": 1.96}

_MIN_CHANNELS = 5


def _filter_length(i_rows: np.ndarray) -> int:
    """Odd Savitzky–Golay length ≈ 0.6 × the line FWHM in channels (5 … 31).

    The FWHM is estimated from the (median over rows) window profile as area / peak / 1.064
    (a Gaussian's area is 1.064 × peak × FWHM).
    """
    profile = np.median(np.atleast_2d(i_rows), axis=0)
    dev = np.abs(profile - np.median(profile))
    peak = float(dev.max()) if dev.size else 0.0
    fwhm_chan = float(dev.sum()) / peak / 1.064 if peak > 0 else 0.0
    return int(np.clip(round(0.6 * fwhm_chan), 5, 31)) | 1


def _derivative(y: np.ndarray, f: np.ndarray, length: int) -> np.ndarray:
    """dI/dν along the last axis by a Savitzky–Golay quartic derivative filter.

    The σ-component model V = −(Z·B/2) dI/dν needs the true derivative: plain central
    differences bias B by ~(channel/FWHM)², and their noise, entering the regressor, biases B
    low (errors in variables: ~5 % with 240 channels of baseline at S/N(I) ≈ 175). A quartic
    filter over ~0.6 FWHM keeps the derivative of a resolved line and damps the noise.
    Assumes uniform channels.
    """
    out = np.asarray(np.gradient(y, f, axis=-1), dtype=float)
    half = length // 2
    if y.shape[-1] <= 2 * half:
        return out
    step = float(np.median(np.diff(f)))
    inner = convolve1d(y, _sg_kernel(length), axis=-1, mode="nearest") / step
    out[..., half:-half] = inner[..., half:-half]  # the ends keep central differences
    return out


@lru_cache(maxsize=32)
def _sg_kernel(length: int) -> np.ndarray:
    """Savitzky–Golay quartic first-derivative convolution kernel (unit channel spacing)."""
    from scipy.signal import savgol_coeffs  # here: scipy.signal costs ~0.5 s to import

    return np.asarray(savgol_coeffs(length, 4, deriv=1, use="conv"), dtype=float)


def fit_zeeman_many(
    freq_hz: np.ndarray,
    stokes_i: np.ndarray,
    stokes_v: np.ndarray,
    window: slice,
    split_hz_per_ug: float,
) -> tuple[np.ndarray, np.ndarray]:
    """Vectorised ``fit_zeeman`` over rows of ``stokes_i``/``stokes_v`` (shape (m, n)).

    Returns (B_los µG, error µG) arrays of length m; NaN where the fit is not possible.
    """
    f = np.asarray(freq_hz, dtype=float)
    i_all = np.atleast_2d(np.asarray(stokes_i, dtype=float))
    v_all = np.atleast_2d(np.asarray(stokes_v, dtype=float))
    didf = _derivative(i_all, f, _filter_length(i_all[:, window]))[:, window]
    i_w, v_w = i_all[:, window], v_all[:, window]
    m, n = i_w.shape
    nan = np.full(m, np.nan)
    if n < _MIN_CHANNELS or not (split_hz_per_ug > 0 and math.isfinite(split_hz_per_ug)):
        return nan, nan
    # Normal equations of the 2-parameter fit, per row: [[Sdd, Sdi], [Sdi, Sii]] (a, b) = rhs.
    sdd = np.einsum("ij,ij->i", didf, didf)
    sdi = np.einsum("ij,ij->i", didf, i_w)
    sii = np.einsum("ij,ij->i", i_w, i_w)
    sdv = np.einsum("ij,ij->i", didf, v_w)
    siv = np.einsum("ij,ij->i", i_w, v_w)
    det = sdd * sii - sdi * sdi
    with np.errstate(divide="ignore", invalid="ignore"):
        ok = np.isfinite(det) & (det > 1e-12 * sdd * sii)
        a = (sii * sdv - sdi * siv) / det
        b = (sdd * siv - sdi * sdv) / det
        resid = v_w - a[:, None] * didf - b[:, None] * i_w
        s2 = np.einsum("ij,ij->i", resid, resid) / (n - 2)
        a_err = np.sqrt(s2 * sii / det)
    b_los = np.where(ok, -2.0 * a / split_hz_per_ug, np.nan)
    b_err = np.where(ok, 2.0 * a_err / split_hz_per_ug, np.nan)
    return b_los, b_err


def fit_zeeman(
    freq_hz: Any,
    stokes_i: Any,
    stokes_v: Any,
    window: slice,
    split_hz_per_ug: float,
) -> tuple[float, float] | None:
    """B_los and its error (µG) from Stokes I and V over ``window`` (channels of the line).

    ``freq_hz`` ascending (Hz), ``stokes_i``/``stokes_v`` in one intensity unit, all of the
    same length. Fits V = a·dI/dν + b·I (dI/dν by a Savitzky–Golay derivative filter);
    B_los = −2a/Z (see the module docstring for the sign convention). None when the window has
    fewer than 5 channels, I has no slope there, or the data are not finite.
    """
    f = np.asarray(freq_hz, dtype=float)
    i = np.asarray(stokes_i, dtype=float)
    v = np.asarray(stokes_v, dtype=float)
    if f.ndim != 1 or i.shape != f.shape or v.shape != f.shape or f.size < _MIN_CHANNELS:
        return None
    if not (np.all(np.isfinite(f)) and np.all(np.isfinite(i[window]))
            and np.all(np.isfinite(v[window]))):  # fmt: skip
        return None
    b_los, b_err = fit_zeeman_many(f, i[None, :], v[None, :], window, split_hz_per_ug)
    if not (math.isfinite(b_los[0]) and math.isfinite(b_err[0])):
        return None
    return float(b_los[0]), float(b_err[0])


def line_window(
    freq_hz: np.ndarray, center_hz: float, fwhm_hz: float, half_width_fwhm: float = 3.0
) -> slice:
    """Channels within ``half_width_fwhm`` × FWHM of a line centre (ascending ``freq_hz``).

    The usual fit window for ``fit_zeeman``: the line and some baseline on both sides.
    """
    half = abs(float(fwhm_hz)) * half_width_fwhm
    lo = int(np.searchsorted(freq_hz, center_hz - half, side="left"))
    hi = int(np.searchsorted(freq_hz, center_hz + half, side="right"))
    return slice(max(lo, 0), min(hi, int(np.asarray(freq_hz).size)))


def split_factor(line_name: str) -> float | None:
    """Z (Hz/µG) for a catalogue line name (``HI``, ``OH1665``, ``OH1667``), else None."""
    return SPLIT_HZ_PER_UG.get(line_name.strip().replace(" ", "").upper())


def field_from_split(split_hz: float, split_hz_per_ug: float) -> float:
    """B_los (µG) from a measured σ-component separation (Hz): B = Δν / Z."""
    return split_hz / split_hz_per_ug


def field_from_coefficient(a_hz: float, split_hz_per_ug: float) -> float:
    """B_los (µG) from a fitted derivative coefficient a (Hz) of V = a·dI/dν: B = −2a / Z."""
    return -2.0 * a_hz / split_hz_per_ug
