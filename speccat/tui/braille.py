"""A small numpy rasteriser that draws curves with braille characters (2x4 dots per cell).

No plotting library: a curve is decimated to one min/max run of dots per dot column, the dot
grid is folded into braille code points (U+2800 + mask, Unicode "Braille Patterns" block), and
several layers share one character grid; where layers overlap the later (higher) layer owns the
cell's style. Text (axis ticks, marker labels) is laid over the dots by the caller.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

#: Bit of each dot in a braille cell, indexed [dot row 0..3][dot column 0..1] (Unicode 8-dot order).
_DOT_BITS = np.array([[0x01, 0x08], [0x02, 0x10], [0x04, 0x20], [0x40, 0x80]], dtype=np.int64)
#: Code point -> character; 0 maps to a space so empty cells stay blank.
_GLYPHS = np.array([" "] + [chr(0x2800 + i) for i in range(1, 256)])


@dataclass(frozen=True)
class Raster:
    """A character grid: ``chars`` (rows x cols of one-character strings) and ``owner``.

    ``owner[r, c]`` is the index of the layer that styles the cell, or -1 for an empty cell.
    """

    chars: np.ndarray
    owner: np.ndarray

    @property
    def rows(self) -> list[str]:
        return ["".join(row) for row in self.chars]


def column_ranges(
    x: np.ndarray, y: np.ndarray, x_lo: float, x_hi: float, n_cols: int
) -> tuple[np.ndarray, np.ndarray]:
    """Min and max of ``y`` per column of ``n_cols`` equal bins over [x_lo, x_hi].

    Columns with no sample take the linearly interpolated value at their centre (zoomed in
    further than the sampling); columns outside the data's x range, and non-finite samples,
    give NaN. ``x`` need not be sorted.
    """
    lo = np.full(n_cols, np.nan)
    hi = np.full(n_cols, np.nan)
    good = np.isfinite(x) & np.isfinite(y)
    x, y = np.asarray(x, dtype=float)[good], np.asarray(y, dtype=float)[good]
    if x.size == 0 or not x_hi > x_lo or n_cols <= 0:
        return lo, hi
    col = np.floor((x - x_lo) / (x_hi - x_lo) * n_cols).astype(np.int64)
    inside = (col >= 0) & (col < n_cols)
    if inside.any():
        mn = np.full(n_cols, np.inf)
        mx = np.full(n_cols, -np.inf)
        np.minimum.at(mn, col[inside], y[inside])
        np.maximum.at(mx, col[inside], y[inside])
        hit = np.isfinite(mn)
        lo[hit], hi[hit] = mn[hit], mx[hit]
    order = np.argsort(x, kind="stable")
    xs, ys = x[order], y[order]
    centres = x_lo + (np.arange(n_cols) + 0.5) * (x_hi - x_lo) / n_cols
    empty = np.isnan(lo) & (centres >= xs[0]) & (centres <= xs[-1])
    if empty.any():
        interp = np.interp(centres[empty], xs, ys)
        lo[empty], hi[empty] = interp, interp
    return lo, hi


def dot_mask(
    lo: np.ndarray, hi: np.ndarray, y_lo: float, y_hi: float, n_dot_rows: int, connect: bool = True
) -> np.ndarray:
    """Boolean dot grid (n_dot_rows x len(lo)) with each column's run [lo, hi] filled.

    Row 0 is the top (``y_hi``). With ``connect`` each run is stretched to meet its left
    neighbour so a steep curve stays continuous. Values beyond the y range are clipped.
    """
    n = lo.size
    if n == 0 or n_dot_rows <= 0 or not y_hi > y_lo:
        return np.zeros((max(n_dot_rows, 0), n), dtype=bool)
    lo2, hi2 = lo.copy(), hi.copy()
    if connect and n > 1:
        prev_lo, prev_hi = lo[:-1], hi[:-1]
        both = np.isfinite(prev_lo) & np.isfinite(lo[1:])
        lo2[1:] = np.where(both, np.minimum(lo[1:], prev_hi), lo[1:])
        hi2[1:] = np.where(both, np.maximum(hi[1:], prev_lo), hi[1:])
    scale = (n_dot_rows - 1) / (y_hi - y_lo)
    valid = np.isfinite(lo2) & np.isfinite(hi2)
    top = np.clip(np.rint((y_hi - np.where(valid, hi2, y_hi)) * scale), 0, n_dot_rows - 1)
    bottom = np.clip(np.rint((y_hi - np.where(valid, lo2, y_hi)) * scale), 0, n_dot_rows - 1)
    rows = np.arange(n_dot_rows)[:, None]
    return (rows >= top[None, :]) & (rows <= bottom[None, :]) & valid[None, :]


def fold(mask: np.ndarray) -> np.ndarray:
    """Fold a dot grid (4*rows x 2*cols) into braille masks (rows x cols, 0..255)."""
    n_r, n_c = mask.shape[0] // 4, mask.shape[1] // 2
    cells = mask[: n_r * 4, : n_c * 2].reshape(n_r, 4, n_c, 2).astype(np.int64)
    return (cells * _DOT_BITS[None, :, None, :]).sum(axis=(1, 3))


def curve_codes(
    x: np.ndarray,
    y: np.ndarray,
    x_range: tuple[float, float],
    y_range: tuple[float, float],
    rows: int,
    cols: int,
) -> np.ndarray:
    """Braille masks (rows x cols) of the curve y(x) drawn into the given data ranges."""
    lo, hi = column_ranges(np.asarray(x), np.asarray(y), x_range[0], x_range[1], 2 * cols)
    return fold(dot_mask(lo, hi, y_range[0], y_range[1], 4 * rows))


def vertical_codes(x_at: float, x_range: tuple[float, float], rows: int, cols: int) -> np.ndarray:
    """Braille masks of a dotted vertical line at ``x_at`` (every other dot), empty if outside."""
    codes = np.zeros((rows, cols), dtype=np.int64)
    x_lo, x_hi = x_range
    if not (x_hi > x_lo and x_lo <= x_at <= x_hi) or cols <= 0:
        return codes
    dot_col = min(int((x_at - x_lo) / (x_hi - x_lo) * 2 * cols), 2 * cols - 1)
    bits = _DOT_BITS[[0, 2], dot_col % 2].sum()  # dots 1 and 3 (or 4 and 6): a dotted rule
    codes[:, dot_col // 2] = bits
    return codes


def combine(layers: list[np.ndarray]) -> Raster:
    """Overlay layers of braille masks; the last non-empty layer in a cell owns its style."""
    if not layers:
        return Raster(np.empty((0, 0), dtype="<U1"), np.empty((0, 0), dtype=np.int64))
    codes = np.zeros_like(layers[0])
    owner = np.full(layers[0].shape, -1, dtype=np.int64)
    for i, layer in enumerate(layers):
        codes |= layer
        owner[layer > 0] = i
    return Raster(_GLYPHS[codes], owner)


def nice_ticks(lo: float, hi: float, target: int = 5) -> list[float]:
    """Round tick values (1, 2, 5 x 10^k steps) inside [lo, hi], about ``target`` of them."""
    if not (math.isfinite(lo) and math.isfinite(hi)) or hi <= lo or target < 1:
        return []
    raw = (hi - lo) / target
    mag = 10.0 ** math.floor(math.log10(raw))
    steps = [m * mag for m in (0.1, 0.2, 0.5, 1.0, 2.0, 5.0, 10.0)]
    k = next(i for i, st in enumerate(steps) if st >= raw * (1 - 1e-9))
    while True:  # the round step nearest the target, but never fewer than two ticks
        step = steps[k]
        first = math.ceil(lo / step - 1e-9) * step
        count = math.floor((hi - first) / step + 1e-9) + 1
        if count >= 2 or k == 0:
            break
        k -= 1
    return [round(first + i * step, 12) for i in range(count)]


def padded_range(*arrays: np.ndarray, pad: float = 0.06) -> tuple[float, float]:
    """The finite min..max over arrays, widened by ``pad`` of the span (never zero width)."""
    finite = [a[np.isfinite(a)] for a in (np.asarray(a, dtype=float) for a in arrays)]
    finite = [a for a in finite if a.size]
    if not finite:
        return (-1.0, 1.0)
    lo = min(float(a.min()) for a in finite)
    hi = max(float(a.max()) for a in finite)
    span = hi - lo if hi > lo else max(abs(hi), 1.0)
    return (lo - pad * span, hi + pad * span)
