"""Channel-mask helpers of the baseline: the union of intervals and the runs of a mask.

Checked against brute force (a set union of channel ranges); no published value is involved.
"""

from __future__ import annotations

import numpy as np
import pytest

from speccat.reduce.baseline import FEW_INTERVALS, dilate_runs, intervals_mask, runs


def _brute(n: int, lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
    out = np.zeros(n, dtype=bool)
    for a, b in zip(lo.tolist(), hi.tolist(), strict=True):
        for c in range(max(a, 0), min(b, n)):
            out[c] = True
    return out


@pytest.mark.parametrize("count", [0, 1, 7, FEW_INTERVALS, FEW_INTERVALS + 1, 300])
def test_intervals_mask_is_the_union_of_the_intervals(rng: np.random.Generator, count: int) -> None:
    n = 500
    lo = rng.integers(-40, n + 40, count)
    hi = lo + rng.integers(-5, 60, count)  # some empty (hi <= lo), some past either end
    got = intervals_mask(n, lo, hi)
    assert got.dtype == bool and got.shape == (n,)
    assert np.array_equal(got, _brute(n, lo, hi))


def test_runs_and_dilation_of_a_mask() -> None:
    mask = np.zeros(40, dtype=bool)
    mask[[3, 4, 5, 20, 38, 39]] = True
    starts, ends = runs(mask)
    assert starts.tolist() == [3, 20, 38] and ends.tolist() == [6, 21, 40]
    grown = dilate_runs(mask)  # each run grows by its own length per side (at least 1)
    want = [*range(0, 9), 19, 20, 21, *range(36, 40)]
    assert np.flatnonzero(grown).tolist() == want
