"""Shortcuts of the reduction's hot path give what the plain computation gives.

The narrow matched-filter kernels are checked against scipy.ndimage.convolve1d (reference
library); the median against numpy.median; the run dilation against brute force; the lone-line
shortcut of ``assemble`` against the full-model path. No published value is involved.
"""

from __future__ import annotations

import numpy as np
import pytest
import scipy.ndimage

from speccat.reduce import lines, measure
from speccat.reduce.baseline import FEW_INTERVALS, dilate_runs, runs
from speccat.reduce.detect import _pair_sums, _peaks, _plan, kernel_sigmas
from speccat.reduce.fit import _gauss_parts, model
from speccat.reduce.noise import median


@pytest.mark.parametrize("n", [64, 8192])
def test_narrow_kernels_equal_a_direct_convolution(rng: np.random.Generator, n: int) -> None:
    sigmas = kernel_sigmas(n, 1.5, 0.25, 2.0)
    plan = _plan(n, tuple(float(s) for s in sigmas))
    x = rng.normal(0.0, 1.0, n)
    x[n // 3] += 50.0  # a spike, so that the kernel shapes themselves are compared
    got = plan.folded @ _pair_sums(x, plan.folded.shape[1] - 1)
    assert len(plan.taps) == got.shape[0] >= 2
    for row, (_, k, _) in enumerate(plan.taps):
        want = scipy.ndimage.convolve1d(x, k, mode="constant")
        assert np.allclose(got[row], want, rtol=0.0, atol=1e-12 * np.max(np.abs(want)))


@pytest.mark.parametrize("size", [1, 2, 3, 2048, 2731, 8192])
def test_median_by_one_partition_equals_numpy(rng: np.random.Generator, size: int) -> None:
    v = rng.normal(0.0, 1.0, size)
    assert median(v) == float(np.median(v))
    q = np.round(v * 2.0)  # ties
    assert median(q) == float(np.median(q))


def _brute_dilation(mask: np.ndarray, factor: float, minimum: int) -> np.ndarray:
    out = np.zeros_like(mask)
    for a, b in zip(*(r.tolist() for r in runs(mask)), strict=True):
        grow = max(int(np.ceil((b - a) * factor)), minimum)
        out[max(a - grow, 0) : min(b + grow, mask.size)] = True
    return out


@pytest.mark.parametrize("fraction", [0.002, 0.01, 0.2])
@pytest.mark.parametrize(("factor", "minimum"), [(1.0, 1), (0.5, 2)])
def test_run_dilation_by_slices_and_by_counts(
    rng: np.random.Generator, fraction: float, factor: float, minimum: int
) -> None:
    mask = rng.random(4000) < fraction  # few runs (slices) up to many (counting path)
    got = dilate_runs(mask, factor, minimum)
    assert np.array_equal(got, _brute_dilation(mask, factor, minimum))
    if fraction == 0.2:
        assert runs(mask)[0].size > FEW_INTERVALS


def test_lone_lines_are_measured_as_through_the_full_model(
    rng: np.random.Generator, monkeypatch: pytest.MonkeyPatch
) -> None:
    chan = np.arange(4096, dtype=float)
    freq = 1.6e9 + 1.0e3 * chan
    y = 2.0 + rng.normal(0.0, 0.5, chan.size)
    for amp, cen, sig in ((6.0, 700.3, 3.0), (-4.0, 2000.8, 9.0), (5.0, 2040.0, 4.0)):
        y += amp * np.exp(-0.5 * ((chan - cen) / sig) ** 2)  # one lone line, one close pair
    fast = measure(freq, y)
    real_alone = lines._alone
    seen: list[bool] = []

    def never_alone(*args: object) -> dict[int, bool]:
        flags = real_alone(*args)  # type: ignore[arg-type]
        seen.extend(flags.values())
        return dict.fromkeys(flags, False)

    monkeypatch.setattr(lines, "_alone", never_alone)
    slow = measure(freq, y)
    assert True in seen and False in seen  # the rule finds the lone line and the pair
    assert len(fast.lines) == len(slow.lines) >= 2
    for a, b in zip(fast.lines, slow.lines, strict=True):
        assert a == b


def _brute_peaks(u: np.ndarray, threshold: float) -> tuple[list[int], list[float]]:
    top, shift = [], []
    for i, here in enumerate(u.tolist()):
        left = u[i - 1] if i > 0 else -np.inf
        right = u[i + 1] if i < u.size - 1 else -np.inf
        if here > threshold and here >= left and here > right:
            top.append(i)
            denom = left - 2.0 * here + right
            edge = i in (0, u.size - 1)
            offset = 0.5 * (left - right) / denom if denom < 0 and not edge else 0.0
            shift.append(min(max(offset, -0.5), 0.5))
    return top, shift


@pytest.mark.parametrize("ends", [False, True])
def test_peak_search_equals_a_channel_by_channel_search(
    rng: np.random.Generator, ends: bool
) -> None:
    u = np.abs(rng.normal(0.0, 1.0, 3000))
    u[1000:1003] = 2.5  # a plateau: its last channel is the peak (>= left, > right)
    u[0], u[-1] = (9.0, 8.0) if ends else (0.0, 0.0)  # peaks on both ends: no offset there
    top, shift = _peaks(u, 1.5)
    want_top, want_shift = _brute_peaks(u, 1.5)
    assert top.tolist() == want_top and len(want_top) > 20
    assert shift.tolist() == want_shift
    assert (0 in want_top) == ends and (u.size - 1 in want_top) == ends


def test_one_gaussian_model_equals_the_general_evaluation(rng: np.random.Generator) -> None:
    x = np.arange(-50.0, 250.0)
    for row in ([3.0, 100.4, 1.7], [-2.5, 10.0, -20.0], [1e-3, 260.0, 40.0]):  # ln s clamped
        p = np.array([row])
        general = _gauss_parts(x, p)[1].sum(axis=0)
        assert np.array_equal(model(x, p, "gaussian"), general)
    p = rng.normal(0.0, 1.0, (1, 3)) + np.array([0.0, 100.0, 2.0])
    assert np.array_equal(model(x, p, "gaussian"), _gauss_parts(x, p)[1].sum(axis=0))
