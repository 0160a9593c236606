"""The braille rasteriser and the plot layout (pure numpy, no Textual).

Checks against the Unicode standard's Braille Patterns block (U+2800..U+28FF, dot n is bit
n-1; Unicode 15.0, chapter 21.5 "Braille") and against numpy reductions of the same data.
"""

from __future__ import annotations

import numpy as np
import pytest

from speccat.tui.braille import (
    column_ranges,
    combine,
    curve_codes,
    dot_mask,
    fold,
    nice_ticks,
    padded_range,
    vertical_codes,
)
from speccat.tui.plotlayout import PlotData, compose_plot


def test_fold_maps_each_dot_to_its_unicode_bit() -> None:
    # Unicode Braille Patterns: dots 1,2,3,7 form the left column top to bottom (bits 0,1,2,6),
    # dots 4,5,6,8 the right column (bits 3,4,5,7).
    expected = {(0, 0): 0x01, (1, 0): 0x02, (2, 0): 0x04, (3, 0): 0x40}
    expected |= {(0, 1): 0x08, (1, 1): 0x10, (2, 1): 0x20, (3, 1): 0x80}
    for (row, col), bit in expected.items():
        mask = np.zeros((4, 2), dtype=bool)
        mask[row, col] = True
        assert fold(mask)[0, 0] == bit
    assert fold(np.ones((4, 2), dtype=bool))[0, 0] == 0xFF
    assert combine([fold(np.ones((4, 2), dtype=bool))]).chars[0, 0] == "\u28ff"


def test_column_ranges_are_min_and_max_per_bin() -> None:
    rng = np.random.default_rng(7)
    x = np.linspace(0.0, 1.0, 10_000, endpoint=False)
    y = rng.normal(size=x.size)
    lo, hi = column_ranges(x, y, 0.0, 1.0, 50)
    per_bin = y.reshape(50, 200)  # 10,000 samples evenly in 50 bins
    np.testing.assert_array_equal(lo, per_bin.min(axis=1))
    np.testing.assert_array_equal(hi, per_bin.max(axis=1))


def test_zoomed_in_columns_are_interpolated_and_outside_is_empty() -> None:
    x = np.array([0.0, 1.0, 2.0])
    y = np.array([0.0, 10.0, 20.0])
    lo, hi = column_ranges(x, y, -1.0, 3.0, 8)
    centres = -1.0 + (np.arange(8) + 0.5) * 0.5
    inside = (centres >= 0.0) & (centres <= 2.0)
    # bins 0, 1 and 7 lie wholly outside the samples' span and hold no sample
    assert np.isnan(lo[[0, 1, 7]]).all() and np.isnan(hi[[0, 1, 7]]).all()
    # columns without a sample but inside the data take np.interp at their centre
    empty_inside = inside & ~np.isin(np.arange(8), [2, 4, 6])
    np.testing.assert_allclose(lo[empty_inside], np.interp(centres[empty_inside], x, y))


def test_unsorted_and_non_finite_samples() -> None:
    x = np.array([3.0, 1.0, np.nan, 2.0, 0.0])
    y = np.array([3.0, 1.0, 5.0, np.inf, 0.0])
    lo, hi = column_ranges(x, y, 0.0, 4.0, 4)
    # the NaN-x and inf-y samples are ignored; column 2 is interpolated between 1 and 3
    np.testing.assert_allclose(lo, [0.0, 1.0, 2.5, 3.0])
    np.testing.assert_allclose(hi, [0.0, 1.0, 2.5, 3.0])


def test_dot_mask_fills_runs_and_connects_steps() -> None:
    lo = np.array([0.0, 1.0])
    hi = np.array([0.0, 1.0])
    mask = dot_mask(lo, hi, 0.0, 1.0, 8, connect=False)
    assert mask[:, 0].nonzero()[0].tolist() == [7]  # y = y_lo sits on the bottom row
    assert mask[:, 1].nonzero()[0].tolist() == [0]  # y = y_hi on the top row
    joined = dot_mask(lo, hi, 0.0, 1.0, 8, connect=True)
    assert joined[:, 1].all()  # the step is drawn as a continuous vertical run


def test_values_beyond_the_range_are_clipped() -> None:
    mask = dot_mask(np.array([-5.0]), np.array([5.0]), 0.0, 1.0, 4)
    assert mask[:, 0].all()


def test_flat_curve_draws_one_braille_row() -> None:
    codes = curve_codes(np.linspace(0, 1, 100), np.zeros(100), (0, 1), (-1, 1), 3, 10)
    rows_with_dots = np.nonzero(codes.any(axis=1))[0]
    assert rows_with_dots.tolist() == [1]  # y=0 is the middle of three cell rows


def test_vertical_marker_is_dotted_in_one_column() -> None:
    codes = vertical_codes(0.5, (0.0, 1.0), 4, 10)
    assert np.count_nonzero(codes.any(axis=0)) == 1
    assert codes[:, 5].tolist() == [0x05] * 4  # dots 1 and 3 of the left dot column
    assert not vertical_codes(2.0, (0.0, 1.0), 4, 10).any()


def test_later_layers_own_shared_cells() -> None:
    a = np.zeros((1, 2), dtype=np.int64)
    b = np.zeros((1, 2), dtype=np.int64)
    a[0, 0], a[0, 1], b[0, 1] = 0x01, 0x02, 0x40
    raster = combine([a, b])
    assert raster.owner.tolist() == [[0, 1]]
    assert raster.chars[0, 1] == chr(0x2800 + 0x42)


@pytest.mark.parametrize(
    ("lo", "hi", "target"),
    [(0.0, 1.0, 5), (-37.2, 112.9, 6), (1420.1, 1420.9, 4), (-3e-4, 2e-4, 5)],
)
def test_nice_ticks_are_round_and_inside(lo: float, hi: float, target: int) -> None:
    ticks = nice_ticks(lo, hi, target)
    assert 2 <= len(ticks) <= 2 * target + 1
    assert all(lo - 1e-12 <= t <= hi + 1e-12 for t in ticks)
    steps = np.diff(ticks)
    np.testing.assert_allclose(steps, steps[0])
    mantissa = steps[0] / 10 ** np.floor(np.log10(steps[0]))
    assert any(np.isclose(mantissa, m) for m in (1.0, 2.0, 5.0))  # common practice: 1-2-5


def test_padded_range_never_collapses() -> None:
    lo, hi = padded_range(np.array([2.0, 2.0]))
    assert lo < 2.0 < hi
    assert padded_range(np.array([np.nan])) == (-1.0, 1.0)


def _plot(width: int, height: int, **kw: object) -> list[str]:
    x = np.linspace(-100.0, 100.0, 4096)
    y = np.exp(-0.5 * (x / 10.0) ** 2)
    data = PlotData(x=x, y=y, model=y * 0.98, x_unit="km/s", y_unit="K", **kw)  # type: ignore[arg-type]
    return ["".join(t for t, _ in row) for row in compose_plot(data, width, height)]


def test_plot_has_the_requested_size_and_labels() -> None:
    rows = _plot(80, 16, markers=((0.0, "H109a"),))
    assert len(rows) == 16
    assert all(len(r) == 80 for r in rows)
    assert "H109a" in rows[0]
    assert rows[-1].lstrip().startswith("km/s")
    assert "resid" in "".join(rows)
    assert "0" in rows[-1] and "-50" in rows[-1] and "50" in rows[-1]


def test_the_peak_is_drawn_above_the_wings() -> None:
    rows = _plot(80, 16)
    plot_rows = rows[1:-5]
    first_row_with_dots = next(i for i, r in enumerate(plot_rows) if r[9:].strip("\u2800 "))
    centre = 9 + (80 - 9) // 2
    assert plot_rows[first_row_with_dots][centre - 3 : centre + 3].strip("\u2800 ")


def test_zoom_window_limits_the_axis() -> None:
    rows = _plot(80, 16, x_range=(-20.0, 20.0))
    assert "-100" not in rows[-1] and "10" in rows[-1]


def test_tiny_area_says_so() -> None:
    rows = _plot(12, 3)
    assert len(rows) == 3 and "too small" in rows[0]
