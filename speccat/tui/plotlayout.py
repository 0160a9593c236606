"""Lay out a spectrum plot as styled text: y ticks, braille curves, residual strip, x ticks.

Pure numpy + strings (no Textual): ``compose_plot`` returns one list of ``(text, role)``
segments per screen row, and the widget maps each role to a theme style. Roles: ``axis``,
``tick``, ``data``, ``model``, ``residual``, ``marker``, ``label``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from speccat.tui.braille import combine, curve_codes, nice_ticks, padded_range, vertical_codes

Segment = tuple[str, str]
MARGIN = 9  # characters for y tick labels
DASH_MASK = 0x01 | 0x02 | 0x04 | 0x40  # keep the left dot column of each cell: a dashed curve


@dataclass(frozen=True, eq=False)
class PlotData:
    """What to draw. ``x`` in axis units (km/s or MHz), any order; ``y`` baseline-subtracted.

    ``model`` is the fitted line model on the same x (None: no fit); the residual strip shows
    ``y - model``. ``markers`` are (x position, name) of catalogue lines. ``x_range`` is the
    window shown (None: the whole of x).
    """

    x: np.ndarray
    y: np.ndarray
    model: np.ndarray | None = None
    markers: tuple[tuple[float, str], ...] = ()
    x_range: tuple[float, float] | None = None
    x_unit: str = ""
    y_unit: str = ""
    model_dashed: bool = False


def _fmt_tick(value: float, step: float) -> str:
    decimals = max(0, -math.floor(math.log10(step) + 1e-9)) if step > 0 else 0
    text = f"{value:.{decimals}f}"
    return "0" if text.strip("-0.") == "" else text


def _row_of(value: float, y_lo: float, y_hi: float, n_rows: int) -> int:
    return round((y_hi - value) / (y_hi - y_lo) * (n_rows * 4 - 1)) // 4


def _braille_rows(
    layers: list[np.ndarray], roles: list[str], y_labels: dict[int, str], label: str
) -> list[list[Segment]]:
    raster = combine(layers)
    out: list[list[Segment]] = []
    n_rows = raster.chars.shape[0]
    for r in range(n_rows):
        margin = y_labels.get(r, label if r == n_rows // 2 and label else "")
        row: list[Segment] = [(margin[-MARGIN + 1 :].rjust(MARGIN - 1), "tick")]
        row.append(("┤" if r in y_labels else "│", "axis"))
        owners = raster.owner[r]
        chars = raster.chars[r]
        start = 0
        for c in range(1, len(owners) + 1):
            if c == len(owners) or owners[c] != owners[start]:
                role = roles[owners[start]] if owners[start] >= 0 else "data"
                row.append(("".join(chars[start:c]), role))
                start = c
        out.append(row)
    return out


def _place_labels(width: int, items: list[tuple[int, str]]) -> str:
    """Put each text centred at its column, left to right, dropping any that would overlap."""
    line = [" "] * width
    free_from = 0
    for col, text in sorted(items):
        start = max(free_from, min(col - len(text) // 2, width - len(text)))
        if start < 0 or start + len(text) > width or start > col + 1:
            continue
        line[start : start + len(text)] = list(text)
        free_from = start + len(text) + 1
    return "".join(line)


def compose_plot(data: PlotData, width: int, height: int) -> list[list[Segment]]:
    """The plot as rows of (text, role) segments, exactly ``height`` rows of ``width`` cells."""
    plot_w = width - MARGIN
    if plot_w < 8 or height < 5:
        return [[("(too small)"[:width].ljust(width), "label")]] + [
            [(" " * width, "label")] for _ in range(max(height - 1, 0))
        ]
    x = np.asarray(data.x, dtype=float)
    y = np.asarray(data.y, dtype=float)
    x_range = data.x_range or (float(np.nanmin(x)), float(np.nanmax(x)))
    if not x_range[1] > x_range[0]:
        x_range = (x_range[0] - 1.0, x_range[0] + 1.0)
    in_view = (x >= x_range[0]) & (x <= x_range[1])
    resid = y - data.model if data.model is not None else None
    res_rows = max(2, height // 6) if resid is not None else 0
    main_rows = height - 3 - res_rows

    model_v = data.model[in_view] if data.model is not None else np.empty(0)
    y_range = padded_range(y[in_view], model_v)
    y_ticks = nice_ticks(y_range[0], y_range[1], max(2, main_rows // 3))
    step = y_ticks[1] - y_ticks[0] if len(y_ticks) > 1 else 1.0
    y_labels = {_row_of(t, *y_range, main_rows): _fmt_tick(t, step) for t in y_ticks}

    layers = [vertical_codes(mx, x_range, main_rows, plot_w) for mx, _ in data.markers]
    roles = ["marker"] * len(layers)
    layers.append(curve_codes(x, y, x_range, y_range, main_rows, plot_w))
    roles.append("data")
    if data.model is not None:
        model_codes = curve_codes(x, data.model, x_range, y_range, main_rows, plot_w)
        if data.model_dashed:
            model_codes &= DASH_MASK
        layers.append(model_codes)
        roles.append("model")

    x_span = x_range[1] - x_range[0]
    label_items = [
        (int((mx - x_range[0]) / x_span * plot_w), name)
        for mx, name in data.markers
        if x_range[0] <= mx <= x_range[1]
    ]
    rows: list[list[Segment]] = [
        [
            (data.y_unit[: MARGIN - 1].rjust(MARGIN - 1) + " ", "tick"),
            (_place_labels(plot_w, label_items), "marker"),
        ]
    ]
    rows += _braille_rows(layers, roles, y_labels, "")
    if resid is not None:
        r_abs = float(np.nanmax(np.abs(resid[in_view]))) if in_view.any() else 1.0
        r_abs = r_abs if math.isfinite(r_abs) and r_abs > 0 else 1.0
        r_codes = curve_codes(x, resid, x_range, (-r_abs, r_abs), res_rows, plot_w)
        rows += _braille_rows([r_codes], ["residual"], {}, "resid")

    x_ticks = nice_ticks(x_range[0], x_range[1], max(2, plot_w // 14))
    x_step = x_ticks[1] - x_ticks[0] if len(x_ticks) > 1 else 1.0
    tick_cols = [(min(int((t - x_range[0]) / x_span * plot_w), plot_w - 1), t) for t in x_ticks]
    axis = ["─"] * plot_w
    for col, _ in tick_cols:
        axis[col] = "┬"
    rows.append([(" " * (MARGIN - 1) + "└", "axis"), ("".join(axis), "axis")])
    tick_text = _place_labels(plot_w, [(c, _fmt_tick(t, x_step)) for c, t in tick_cols])
    rows.append([(data.x_unit[: MARGIN - 1].rjust(MARGIN - 1) + " ", "tick"), (tick_text, "tick")])
    return rows
