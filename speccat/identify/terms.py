"""The scoring terms of identification and their tuning constants (see the package docstring)."""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np

from speccat.model import LineFit

#: Candidates kept per detection.
MAX_CANDIDATES = 5
#: Spread (km/s) of Galactic velocities about zero: a broad Gaussian, as most Galactic sources
#: lie within about ±150 km/s of the LSR (common practice; the rotation curve bounds it).
GALACTIC_SIGMA_KMS = 80.0
#: Fraction of a spectrum's lines expected at the source's velocity (the rest are unrelated):
#: higher for the same family (H/He/C recombination lines of any n; one molecular species,
#: e.g. OH 1665/1667, NH3 main line and satellites, maser spikes) than across families.
#: Galactic HI is the exception: clouds along a line of sight sit at many velocities.
COHERENT_SAME = 0.9
COHERENT_SAME_ATOMIC = 0.5
COHERENT_OTHER = 0.3
#: Weight of a known systemic velocity (header or earlier nights) in the velocity prior.
KNOWN_WEIGHT = 0.9
#: Uncertainty (km/s) of a systemic velocity learned from earlier nights / given as a redshift.
KNOWN_SIGMA_KMS = 8.0
REDSHIFT_SIGMA_KMS = 60.0
#: Extra uncertainty (km/s) on a known velocity when the spectrum's frame is not established
#: (an unknown frame can be off from LSRK by up to ~35 km/s: Earth orbit 30 + solar motion 20).
FRAME_UNKNOWN_SIGMA_KMS = 35.0
#: Velocity density (1/(km/s)) for candidates outside every window's Gaussian core.
FAR_DENSITY = 1e-7
#: Prior weight of "none of these" (its velocity density is uniform over the Galactic window).
NONE_PRIOR = 0.05
#: "None of these" is this many times likelier for a fit the reducer flags as interference.
RFI_NONE_FACTOR = 30.0
#: Extragalactic HI: recession velocities up to this (radio, km/s) when the profile is wide.
GALAXY_V_MAX_KMS = 20_000.0
GALAXY_MIN_WIDTH_KMS = 50.0
GALAXY_MAX_WIDTH_KMS = 900.0
#: Velocity density (1/(km/s)) of a galaxy's HI profile between the Galactic window and V_MAX:
#: a profile this wide near 21 cm is taken to be a galaxy about as readily as a narrow line is
#: taken to be Galactic, so the density is that of a uniform spread over the Galactic window.
GALAXY_DENSITY_WINDOWS = 1.0
#: Velocity spread (km/s) about the source velocity, by line class ("galaxy" = extragalactic HI).
SPREAD_KMS = {
    "recombination": 5.0,
    "thermal": 3.0,
    "maser": 30.0,
    "atomic": 30.0,
    "galaxy": 300.0,
}
DEFAULT_SPREAD_KMS = 10.0
#: Tolerance (natural-log units) of the width plausibility outside a line's width range.
WIDTH_TOLERANCE_LN = 0.35
#: A fit narrower than this many channels is unresolved: its width is an upper bound.
RESOLVED_CHANNELS = 2.5
#: Factor for a recombination line seen in absorption (rare at centimetre wavelengths).
ABSORPTION_RRL_FACTOR = 0.05
#: Factor for a group member whose strongest companion (e.g. H for He/C) is missing.
MISSING_COMPANION_FACTOR = 0.02
#: Classes whose weaker members need their group's strongest member (masers vary wildly).
COMPANION_CLASSES = frozenset({"recombination", "thermal"})
#: A group member counts as a weaker companion when the strongest member's prior is at least
#: this many times its own (NH3 main line vs satellites; OH 1665/1667 are peers).
LEADER_PRIOR_RATIO = 1.2
#: Factor for lines of the group the observer tuned to (header RESTFRQ), and the tolerance.
TUNED_FACTOR = 4.0
TUNED_TOL_KMS = 1.0
_SQRT_2PI = math.sqrt(2.0 * math.pi)


# --------------------------------------------------------------------------- scoring terms


def log_prior(prior: np.ndarray) -> np.ndarray:
    """Catalogue prior: how common the transition is among detected lines (0–1)."""
    return np.log(np.clip(prior, 1e-6, 1.0))


def log_width_plausibility(
    width_kms: np.ndarray,
    width_min_kms: np.ndarray,
    width_max_kms: np.ndarray,
    resolved: np.ndarray,
    rel_err: np.ndarray,
) -> np.ndarray:
    """Whether the observed FWHM fits the line's class: 0 inside [min, max], falling off as a
    Gaussian in log width outside (masers narrow, recombination lines broad, galaxies wide).

    An unresolved line's width is an upper bound on the true one, so it is only penalised when
    the line should have been broader.
    """
    w = np.where(resolved, width_kms, np.minimum(width_kms, width_max_kms))
    w = np.maximum(w, 1e-6)
    tol = np.hypot(WIDTH_TOLERANCE_LN, rel_err)
    below = np.clip(np.log(width_min_kms / w), 0.0, None)
    above = np.clip(np.log(w / width_max_kms), 0.0, None)
    return np.asarray(-0.5 * ((below + above) / tol) ** 2)


def log_kind(absorption: np.ndarray, recombination: np.ndarray) -> np.ndarray:
    """Recombination lines at centimetre wavelengths appear in emission; absorption is unlikely."""
    rrl_abs = absorption & recombination
    return np.where(rrl_abs, math.log(ABSORPTION_RRL_FACTOR), 0.0)


def background_density(v_kms: np.ndarray, galaxy: np.ndarray, window_kms: float) -> np.ndarray:
    """Velocity density (1/(km/s)) of a line not tied to the source: a broad Galactic Gaussian
    inside the window, a uniform density for extragalactic HI, else tiny."""
    gal = np.exp(-0.5 * (v_kms / GALACTIC_SIGMA_KMS) ** 2) / (_SQRT_2PI * GALACTIC_SIGMA_KMS)
    inside = np.abs(v_kms) <= window_kms
    far = np.where(galaxy, GALAXY_DENSITY_WINDOWS / (2.0 * window_kms), FAR_DENSITY)
    return np.where(inside & ~galaxy, gal + FAR_DENSITY, far)


def systemic_density(
    v_kms: np.ndarray,
    spread_kms: np.ndarray,
    background: np.ndarray,
    systemic: tuple[float, float] | None,
) -> np.ndarray:
    """Prior density (1/(km/s)) of a source velocity hypothesis: the known systemic velocity
    (mean, sigma), broadened by the line's own spread, mixed with the background density."""
    if systemic is None:
        return background
    mean, sigma = systemic
    s = np.hypot(sigma, spread_kms)
    known = np.exp(-0.5 * ((v_kms - mean) / s) ** 2) / (_SQRT_2PI * s)
    return np.asarray(KNOWN_WEIGHT * known + (1.0 - KNOWN_WEIGHT) * background)


def log_velocity_likelihood(
    v_kms: np.ndarray,
    spread_kms: np.ndarray,
    background: np.ndarray,
    hyp_v_kms: np.ndarray,
    same_family: np.ndarray,
    atomic: np.ndarray,
) -> np.ndarray:
    """(pairs × hypotheses) log density of each pair's velocity given a source velocity: within
    the class spread of it (with probability COHERENT_SAME when the hypothesis comes from the
    same family, less for HI, COHERENT_OTHER otherwise), else an unrelated line at the
    background density. ``same_family`` is (pairs × hypotheses), ``atomic`` per pair."""
    z = (v_kms[:, None] - hyp_v_kms[None, :]) / spread_kms[:, None]
    coherent = np.exp(-0.5 * z * z) / (_SQRT_2PI * spread_kms[:, None])
    same = np.where(atomic, COHERENT_SAME_ATOMIC, COHERENT_SAME)[:, None]
    frac = np.where(same_family, same, COHERENT_OTHER)
    mix = frac * coherent + (1.0 - frac) * background[:, None]
    return np.asarray(np.log(mix))


def log_tuned(tuned: np.ndarray) -> np.ndarray:
    """The header's rest frequency (RESTFRQ) names the line the observer was after: its group
    (e.g. H171β with He171β) is likelier than a coincidental line."""
    return np.where(tuned, math.log(TUNED_FACTOR), 0.0)


def log_none(fits: Sequence[LineFit], window_kms: float) -> np.ndarray:
    """Log weight of "none of these" per detection: an uncatalogued line, interference or an
    artefact, spread uniformly over the Galactic window; a fit the reducer flags as a likely
    interference spike (``rfi-spike``) makes it RFI_NONE_FACTOR times likelier (a real maser
    spike still wins on its own prior)."""
    rfi = np.array(["rfi-spike" in f.flags for f in fits], dtype=bool)
    base = math.log(NONE_PRIOR / (2.0 * window_kms))
    return np.where(rfi, base + math.log(RFI_NONE_FACTOR), base)
