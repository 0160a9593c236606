"""``identify``: from a measurement to detections with ranked candidates."""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import TYPE_CHECKING, Any

import numpy as np

from speccat.identify.candidates import (
    Features,
    Pairs,
    candidate_pairs,
    catalogue_arrays,
    features,
    log_missing_companion,
    spreads,
    systemic_velocity,
    tuned_mask,
)
from speccat.identify.joint import joint_scores
from speccat.identify.terms import (
    GALAXY_MAX_WIDTH_KMS,
    GALAXY_MIN_WIDTH_KMS,
    MAX_CANDIDATES,
    background_density,
    log_kind,
    log_none,
    log_prior,
    log_tuned,
    log_width_plausibility,
    systemic_density,
)
from speccat.model import (
    C_KMS,
    Candidate,
    Detection,
    LineFit,
    Measurement,
    Spectrum,
    SpectrumResult,
)
from speccat.physics.doppler import lsrk_correction

if TYPE_CHECKING:
    from speccat.catalogue import Catalogue

_SQRT_2PI = math.sqrt(2.0 * math.pi)


def _base_scores(
    pairs: Pairs, feats: Features, spread_kms: np.ndarray, catalogue: Catalogue,
    spectrum: Spectrum, factor: float,
) -> np.ndarray:  # fmt: skip
    """Log of prior × width plausibility × kind × companion × tuned line for every pair."""
    cat, k, d = pairs.cat, pairs.idx, pairs.det
    wmin = np.where(pairs.galaxy, np.maximum(cat.width_min_kms[k], GALAXY_MIN_WIDTH_KMS),
                    cat.width_min_kms[k])  # fmt: skip
    wmax = np.where(cat.hi[k], np.maximum(cat.width_max_kms[k], GALAXY_MAX_WIDTH_KMS),
                    cat.width_max_kms[k])  # fmt: skip
    width_hz = np.where(pairs.galaxy, feats.profile_width_hz[d], feats.width_hz[d])
    width_kms = width_hz * C_KMS / cat.rest_hz[k]
    freq = spectrum.freq_hz
    band = (
        (float(np.nanmin(freq)) * factor, float(np.nanmax(freq)) * factor)
        if freq.size
        else (math.nan, math.nan)
    )  # no band: no companion can be missed
    return np.asarray(
        log_prior(cat.prior[k])
        + log_width_plausibility(width_kms, wmin, wmax, feats.resolved[d], feats.width_rel_err[d])
        + log_kind(feats.absorption[d], cat.recombination[k])
        + log_missing_companion(pairs, feats, spread_kms, band)
        + log_tuned(tuned_mask(pairs, catalogue, spectrum.rest_freq_hz))
    )


# --------------------------------------------------------------------------- results


def _detection(
    fit: LineFit,
    stokes: str,
    cands: list[tuple[float, Any, float]],
    p_none: float,
    feats_f_hz: float,
    factor: float,
    threshold: float,
    flags: tuple[str, ...],
) -> Detection:
    """One Detection from a fit and its scored (score, line, velocity) candidates."""
    cands.sort(key=lambda c: (-c[0], -c[1].prior, c[1].name))
    ranked = tuple(
        Candidate(ln.name, ln.species, ln.transition, float(ln.rest_freq_hz), float(v), float(s))
        for s, ln, v in cands[:MAX_CANDIDATES]
    )
    best = ranked[0] if ranked and ranked[0].score >= max(threshold, p_none) else None
    ref_hz = best.rest_freq_hz if best is not None else feats_f_hz
    kms_per_hz = C_KMS * factor / ref_hz if ref_hz > 0 else math.nan
    v = v_err = None
    if best is not None:
        line = cands[0][1]
        rest_err = float(getattr(line, "rest_freq_err_hz", 0.0) or 0.0)
        v = best.v_lsr_kms
        v_err = math.hypot(
            fit.center_err_hz * kms_per_hz, C_KMS * feats_f_hz * rest_err / ref_hz**2
        )
    integral, integral_err = fit.integral_fit_hz, fit.integral_fit_err_hz
    if not math.isfinite(integral):
        integral, integral_err = fit.integral_sum_hz, fit.integral_sum_err_hz
    return Detection(
        fit=fit,
        stokes=stokes,
        candidates=ranked,
        line=best,
        v_lsr_kms=v,
        v_lsr_err_kms=v_err,
        fwhm_kms=fit.fwhm_hz * kms_per_hz,
        fwhm_err_kms=fit.fwhm_err_hz * kms_per_hz,
        integral_kms=integral * kms_per_hz,
        integral_err_kms=integral_err * kms_per_hz,
        flags=tuple(dict.fromkeys(fit.flags + flags)),
    )


def identify(
    spectrum: Spectrum,
    measurement: Measurement,
    catalogue: Catalogue,
    *,
    known_velocities: Mapping[str, float] | None = None,
    threshold: float = 0.05,
    vel_window_kms: float = 400.0,
) -> SpectrumResult:
    """Identify every line of ``measurement`` (measured in ``spectrum``) against ``catalogue``.

    ``known_velocities`` maps source name → systemic LSRK velocity (km/s, radio) learned from
    earlier nights; ``threshold`` is the lowest score (0–1) a primary identification may have;
    ``vel_window_kms`` is the half-width of the Galactic velocity window for candidates.
    """
    corr = lsrk_correction(spectrum)
    factor = float(corr.factor)
    flags = (corr.flag,) if corr.flag else ()
    fits = measurement.lines
    feats = features(fits, factor)
    systemic = systemic_velocity(spectrum, known_velocities, corr.flag)
    pairs = candidate_pairs(feats, catalogue_arrays(catalogue), vel_window_kms, systemic)
    n_det = len(fits)
    per_det: list[list[tuple[float, Any, float]]] = [[] for _ in range(n_det)]
    p_none = np.ones(n_det)
    if pairs.det.size:
        class_spread, spread = spreads(pairs, feats)
        base = _base_scores(pairs, feats, spread, catalogue, spectrum, factor)
        bg = background_density(pairs.v_kms, pairs.galaxy, vel_window_kms)
        # a hypothesis stands for source velocities within the class spread of the pair's own
        # velocity: its prior is the density there times that width (a poorly measured centre
        # does not widen it, so it cannot outweigh well measured lines)
        density = systemic_density(pairs.v_kms, spread, bg, systemic)
        hyp_prior = np.log(density * _SQRT_2PI * class_spread)
        none_log = log_none(fits, vel_window_kms)
        p_pair, p_none = joint_scores(pairs, base, spread, bg, hyp_prior, n_det, none_log)
        lines = pairs.cat.lines
        for i, k, p, v in zip(pairs.det.tolist(), pairs.idx.tolist(), p_pair.tolist(),
                              pairs.v_kms.tolist(), strict=True):  # fmt: skip
            per_det[i].append((p, lines[k], v))
    detections = tuple(
        _detection(
            fit, measurement.stokes, per_det[i], float(p_none[i]), float(feats.f_hz[i]),
            factor, threshold, flags,
        )
        for i, fit in enumerate(fits)
    )  # fmt: skip
    return SpectrumResult(spectrum, measurement, detections, factor, corr.flag)
