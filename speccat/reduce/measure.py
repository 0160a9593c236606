"""``measure``: one Stokes product in, a ``Measurement`` out (baseline, rms, fitted lines)."""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np

from speccat.model import BaselineModel, LineFit, Measurement
from speccat.reduce.baseline import (
    BaselineFit,
    dilate_runs,
    fit_baseline,
    intervals_mask,
    long_runs,
)
from speccat.reduce.detect import kernel_sigmas
from speccat.reduce.engine import Noise, detect_and_fit, reach_sigma
from speccat.reduce.fit import FWHM_PER_SIGMA, WORK, model
from speccat.reduce.lines import assemble
from speccat.reduce.noise import autocorrelation, median, robust_rms
from speccat.reduce.settings import ReduceError, ReduceSettings

MIN_CHANNELS = 16


def _validate(freq_hz: np.ndarray, intensity: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    freq = np.asarray(freq_hz, dtype=float)
    y = np.asarray(intensity, dtype=float)
    if freq.ndim != 1 or y.ndim != 1:
        raise ReduceError("reduce: frequency and intensity must be one-dimensional arrays")
    if freq.size != y.size:
        raise ReduceError(
            f"reduce: {freq.size} frequencies but {y.size} intensity values (must match)"
        )
    if freq.size < MIN_CHANNELS:
        raise ReduceError(f"reduce: {freq.size} channels; at least {MIN_CHANNELS} are needed")
    if not np.isfinite(freq).all() or (freq[1:] <= freq[:-1]).any():
        raise ReduceError("reduce: frequencies must be finite and strictly ascending")
    if np.count_nonzero(np.isfinite(y)) < MIN_CHANNELS:
        raise ReduceError(f"reduce: fewer than {MIN_CHANNELS} finite intensity values")
    return freq, y


def saturated(y: np.ndarray, valid: np.ndarray, min_run: int = 3) -> np.ndarray:
    """Channels in runs of >= ``min_run`` equal to the data's maximum or minimum (clipping).

    When such runs cover more than a quarter of the data, the data are taken to be constant or
    coarsely quantised rather than clipped, and nothing is marked.
    """
    out = np.zeros(y.size, dtype=bool)
    n_valid = int(np.count_nonzero(valid))
    if n_valid == 0:
        return out
    values = y if n_valid == y.size else y[valid]
    for level in (values.max(), values.min()):
        at = y == level
        if n_valid < y.size:
            at &= valid
        if np.count_nonzero(at) < min_run:
            continue
        out |= long_runs(at, min_run)
    if np.count_nonzero(out) > n_valid // 4:
        return np.zeros(y.size, dtype=bool)  # (nearly) constant data, not a saturated recorder
    return out


def _baseline(
    y: np.ndarray,
    valid: np.ndarray,
    line_mask: np.ndarray,
    s: ReduceSettings,
    start: tuple[np.ndarray, float] | None,
    floor: float,
) -> tuple[BaselineFit, np.ndarray, Noise, np.ndarray]:
    """The baseline, the channels it was fitted on, the noise (at least ``floor``), and ``y``
    minus the baseline."""
    base, good = fit_baseline(
        y,
        valid,
        line_mask,
        max_order=s.max_baseline_order,
        fixed_order=s.baseline_order,
        clip_sigma=s.clip_sigma,
        ripple=s.ripple,
        ripple_false_alarm=s.ripple_false_alarm,
        start=start,
    )
    resid = y - base.total
    # features the clipping removed (runs of >= 4 clipped channels: lines not yet fitted) stay
    # out of the noise estimate; single clipped noise channels (a run of 3 after dilation) stay
    # in it, so that the noise tails are not truncated
    free = valid & ~line_mask
    quiet = free & ~long_runs(free & ~good, 4)
    rms = robust_rms(resid[quiet] if np.count_nonzero(quiet) > 8 else resid[good], finite=True)
    rms = rms if math.isfinite(rms) and rms > floor else floor
    return base, good, Noise(rms, autocorrelation(resid, good)), resid


def _line_mask(params: np.ndarray, n: int, dilate_fwhm: float) -> np.ndarray:
    if params.shape[0] == 0:
        return np.zeros(n, dtype=bool)
    half = np.maximum(dilate_fwhm * FWHM_PER_SIGMA * reach_sigma(params), 2.0)
    return intervals_mask(n, np.floor(params[:, 1] - half), np.ceil(params[:, 1] + half) + 1)


def _leak(params: np.ndarray, fresh: np.ndarray, n_coeffs: int, profile: str) -> float:
    """Rough bound on the baseline shift caused by line flux on channels it was fitted to:
    (number of coefficients) x sum |line model| over those channels / number of channels."""
    idx = fresh.nonzero()[0]
    if idx.size == 0:
        return 0.0
    flux = float(np.abs(model(idx.astype(float), params, profile)).sum())
    return (n_coeffs + 2) * flux / fresh.size


def measure(
    freq_hz: np.ndarray,
    intensity: np.ndarray,
    settings: ReduceSettings | None = None,
    stokes: str = "I",
) -> Measurement:
    """Baseline, noise and every line of one spectrum (``freq_hz`` ascending, NaN allowed).

    Raises ``ReduceError`` for arrays that cannot be measured.
    """
    s = settings if settings is not None else ReduceSettings()
    freq, y = _validate(freq_hz, intensity)
    token = WORK.set([0.0])
    try:
        return _measure(freq, y, s, stokes)
    finally:
        WORK.reset(token)


def _measure(freq: np.ndarray, y: np.ndarray, s: ReduceSettings, stokes: str) -> Measurement:
    n = y.size
    finite = np.isfinite(y)
    yv = y if finite.all() else np.where(finite, y, 0.0)  # read only from here on
    clip = saturated(yv, finite)
    valid = finite & ~dilate_runs(clip) if clip.any() else finite
    flags = []
    if not finite.all():
        flags.append("nan-channels")
    if clip.any():
        flags.append("clipped")

    line_mask = np.zeros(n, dtype=bool)
    top = np.abs(yv).max() if valid.all() else np.abs(yv[valid]).max()
    floor = 1e-9 * max(float(top), 1e-300)  # the least rms: for (nearly) noise-free data
    base, good, noise, resid = _baseline(yv, valid, line_mask, s, None, floor)
    sigmas = kernel_sigmas(n, s.min_kernel_fwhm_chan, s.max_kernel_fraction, s.ladder_step)
    params, groups = detect_and_fit(
        resid, valid, noise, sigmas, s, np.zeros((0, 3 if s.profile == "gaussian" else 4))
    )
    for _ in range(2):
        if params.shape[0] == 0:
            break
        line_mask = _line_mask(params, n, s.mask_dilate_fwhm)
        if _leak(params, line_mask & good, len(base.coeffs), s.profile) < 0.05 * noise.rms:
            break  # the clipping already kept (nearly) all line flux out of the baseline
        new_base, good, new_noise, resid = _baseline(
            yv, valid, line_mask, s, (good, base.ripple_period_chan), floor
        )
        shift = np.max(np.abs(new_base.total - base.total)[valid])
        base, noise = new_base, new_noise
        if shift <= 0.1 * noise.rms:
            break
        params, groups = detect_and_fit(resid, valid, noise, sigmas, s, params)
    lines = assemble(freq, resid, valid, clip, groups, noise, s)
    if base.ripple_amp > 0:
        flags.append("baseline-ripple")
    if any("rfi-spike" in line.flags for line in lines):
        flags.append("rfi-spike")
    model_out = BaselineModel(
        n_channels=n,
        coeffs=tuple(float(c) for c in base.coeffs),
        ripple_amp=float(base.ripple_amp),
        ripple_period_chan=float(base.ripple_period_chan),
        ripple_phase=float(base.ripple_phase),
    )
    return Measurement(
        stokes=stokes,
        rms=float(noise.rms),
        continuum=median(base.total),
        baseline=model_out,
        lines=tuple(lines),
        flags=tuple(flags),
    )


def line_model(freq_hz: np.ndarray, lines: Sequence[LineFit]) -> np.ndarray:
    """The fitted lines (no baseline) on ``freq_hz``: Gaussian or Voigt per ``LineFit.profile``."""
    f = np.asarray(freq_hz, dtype=float)
    out = np.zeros_like(f)
    for line in lines:
        if line.profile == "voigt" and line.lorentz_fwhm_hz:
            fl = float(line.lorentz_fwhm_hz)
            fg2 = (line.fwhm_hz - 0.5346 * fl) ** 2 - 0.2166 * fl * fl
            sig = np.sqrt(max(fg2, 1e-30)) / FWHM_PER_SIGMA
            p = np.array([[1.0, line.center_hz, np.log(sig), np.log(fl / 2.0)]])
            shape = model(f, p, "voigt")
            top = model(np.array([line.center_hz]), p, "voigt")[0]
            out += line.peak * shape / top
        else:
            sig = line.fwhm_hz / FWHM_PER_SIGMA
            out += line.peak * np.exp(-0.5 * ((f - line.center_hz) / sig) ** 2)
    return out
