"""The detection table's columns: which exported field, its heading, width and number format."""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Protocol


class DetectionSource(Protocol):
    """What the browser needs from an archive (``speccat.archive.Archive`` satisfies it)."""

    def count(self, filters: Any) -> int: ...

    def page(
        self,
        filters: Any,
        sort: str = "snr",
        descending: bool = True,
        offset: int = 0,
        limit: int = 200,
    ) -> list[dict[str, Any]]: ...


@dataclass(frozen=True)
class Column:
    """One table column: ``key`` is the exported field (and the sort key), ``fmt`` a format."""

    key: str
    title: str
    width: int
    fmt: str = ""
    right: bool = False

    def cell(self, row: dict[str, Any]) -> str:
        value = row.get(self.key)
        if value is None or (isinstance(value, float) and not math.isfinite(value)):
            text = "·"
        elif self.fmt and isinstance(value, int | float):
            text = format(value, self.fmt)
        else:
            text = str(value)
        if len(text) > self.width:
            text = text[: self.width - 1] + "…"
        return text.rjust(self.width) if self.right else text.ljust(self.width)


COLUMNS: tuple[Column, ...] = (
    Column("source", "source", 14),
    Column("line", "line", 9),
    Column("v_lsr_kms", "v_LSR km/s", 10, ".2f", right=True),
    Column("snr", "S/N", 7, ".1f", right=True),
    Column("fwhm_kms", "FWHM km/s", 9, ".2f", right=True),
    Column("peak", "peak", 9, ".4g", right=True),
    Column("intensity_unit", "unit", 4),
    Column("obs_freq_mhz", "obs MHz", 12, ".4f", right=True),
    Column("kind", "kind", 10),
    Column("night", "night", 10),
    Column("stokes", "Stokes", 6),
    Column("id_score", "id score", 8, ".3f", right=True),
    Column("flags", "flags", 24),
    Column("species", "species", 8),
    Column("integral", "integral·km/s", 13, ".4g", right=True),
    Column("rms", "rms", 9, ".3g", right=True),
    Column("obs_time", "observed (UTC)", 19),
    Column("detection_id", "#", 8, "d", right=True),
)

#: Width of the mark gutter at the left of every row.
MARK_WIDTH = 2


def column_at(x: int, columns: tuple[Column, ...] = COLUMNS) -> Column | None:
    """The column under virtual x coordinate ``x`` (None on the mark gutter or past the end)."""
    pos = MARK_WIDTH
    for col in columns:
        if pos <= x < pos + col.width:
            return col
        pos += col.width + 1
    return None


def total_width(columns: tuple[Column, ...] = COLUMNS) -> int:
    return MARK_WIDTH + sum(c.width + 1 for c in columns)
