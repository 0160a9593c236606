"""The matched-filter bank moved by a model change equals the bank filtered afresh.

``shift_bank`` relies on the linearity of filtering (common practice) and on the Gaussian
convolution identity: a unit-area Gaussian of sigma w convolved with a Gaussian of peak A and
sigma s is a Gaussian of peak A s / sqrt(s^2 + w^2) and sigma sqrt(s^2 + w^2) (common
practice; e.g. Bracewell, The Fourier Transform and Its Applications, the Gaussian's
transform is Gaussian).
"""

from __future__ import annotations

import numpy as np
import pytest

from speccat.reduce.detect import filter_bank, kernel_sigmas, shift_bank
from speccat.reduce.engine import _left

N = 4096
SIGMAS = kernel_sigmas(N, 1.5, 0.25, 2.0)


def _rows(*rows: tuple[float, float, float]) -> np.ndarray:
    return np.array([[a, c, np.log(s)] for a, c, s in rows]).reshape(-1, 3)


@pytest.mark.parametrize("rho", [np.zeros(8), np.array([0.45, 0.1, 0, 0, 0, 0, 0, 0])])
def test_shifted_bank_equals_fresh_bank(rng: np.random.Generator, rho: np.ndarray) -> None:
    y = rng.normal(0.0, 0.7, N)
    valid = np.ones(N, dtype=bool)
    old = _rows((10.0, 500.3, 3.3), (-8.0, 2000.7, 12.0))
    new = _rows((10.2, 500.1, 3.1), (-7.9, 2001.0, 12.5), (3.0, 3000.0, 1.2))
    before = filter_bank(_left(y, valid, old, "gaussian"), SIGMAS, 0.7, rho)
    fresh = filter_bank(_left(y, valid, new, "gaussian"), SIGMAS, 0.7, rho)
    moved = shift_bank(before, SIGMAS, 0.7, rho, valid, new, old)
    assert moved is not None
    for j in range(SIGMAS.size):
        scale = np.max(np.abs(fresh.scale(j)))
        # the broadest kernel's FFT wraps a little around the padded band; the rest agree to
        # rounding
        tol = 1e-5 if j == SIGMAS.size - 1 else 1e-9
        assert np.max(np.abs(moved.scale(j) - fresh.scale(j))) <= tol * scale


@pytest.mark.parametrize(
    ("row", "valid_hole"),
    [((5.0, 1000.0, 0.6), None), ((5.0, 10.0, 3.0), None), ((5.0, 1000.0, 3.0), 1010)],
)
def test_shift_refuses_what_it_cannot_model(
    row: tuple[float, float, float], valid_hole: int | None
) -> None:
    """Narrower than a channel, cut by the band edge, or over an invalid channel: None."""
    valid = np.ones(N, dtype=bool)
    if valid_hole is not None:
        valid[valid_hole] = False
    bank = filter_bank(np.zeros(N), SIGMAS, 1.0, np.zeros(8))
    assert shift_bank(bank, SIGMAS, 1.0, np.zeros(8), valid, _rows(row), _rows()) is None
