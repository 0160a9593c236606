"""Joint assignment: candidate probabilities averaged over source-velocity hypotheses."""

from __future__ import annotations

import numpy as np

from speccat.identify.candidates import Pairs
from speccat.identify.terms import log_velocity_likelihood


def _segment_logsumexp(values: np.ndarray, starts: np.ndarray, counts: np.ndarray) -> np.ndarray:
    """log Σ exp over consecutive row segments (rows sorted by segment), column by column."""
    peak = np.maximum.reduceat(values, starts, axis=0)
    total = np.add.reduceat(np.exp(values - np.repeat(peak, counts, axis=0)), starts, axis=0)
    return np.asarray(np.log(total) + peak)


def joint_scores(
    pairs: Pairs,
    base: np.ndarray,
    spread_kms: np.ndarray,
    background: np.ndarray,
    hyp_log_prior: np.ndarray,
    n_det: int,
    none_log: np.ndarray,
) -> tuple[np.ndarray, np.ndarray]:
    """Probabilities of every pair and of "none of these" per detection, averaged over source
    velocity hypotheses (one per pair, at its velocity and of its family).

    Each hypothesis is weighted by its prior times the likelihood of all detections together
    (each marginalised over its candidates and "none"), so an assignment that puts several lines
    at one velocity (H/He/C, OH 1665/1667, NH3 satellites, maser spikes) wins over scattered
    ones. ``base`` is each pair's log score without velocity, ``background`` its unrelated-line
    velocity density, ``hyp_log_prior`` each hypothesis's log prior, ``none_log`` each
    detection's log weight of "none of these". Returns (p_pair, p_none).
    """
    det, v_kms, family = pairs.det, pairs.v_kms, pairs.cat.family[pairs.idx]
    same = family[:, None] == family[None, :]
    loglik = base[:, None] + log_velocity_likelihood(
        v_kms, spread_kms, background, v_kms, same, pairs.cat.atomic[pairs.idx]
    )
    n_hyp = v_kms.size
    rows = np.vstack([loglik, np.repeat(np.asarray(none_log, dtype=float)[:, None], n_hyp, 1)])
    row_det = np.concatenate([det, np.arange(n_det)])
    order = np.argsort(row_det, kind="stable")
    rows, row_det = rows[order], row_det[order]
    counts = np.bincount(row_det, minlength=n_det)
    starts = np.concatenate([[0], np.cumsum(counts)[:-1]])
    norm = _segment_logsumexp(rows, starts, counts)  # (n_det, n_hyp)
    log_post = hyp_log_prior + norm.sum(axis=0)
    weight = np.exp(log_post - log_post.max())
    weight /= weight.sum()
    prob_rows = np.exp(rows - norm[row_det]) @ weight
    prob = np.empty_like(prob_rows)
    prob[order] = prob_rows
    return prob[: det.size], prob[det.size :]
