"""Parsing user-typed quantities: ``5008.9MHz``, ``1.42 GHz``, ``-5`` (bare numbers take a default unit)."""

from __future__ import annotations

import math
from collections.abc import Callable

from speccat.errors import FilterError


def parse_value(text: str, unit: str, what: str) -> float:
    """``text`` as a number in ``unit`` (an astropy unit string: "MHz", "km/s", "" for a pure
    number); a bare number is taken to be in ``unit``, a typed unit is converted to it.

    Raises FilterError naming ``what`` (e.g. "--freq") when the text is not a finite quantity
    of the right physical type. Bare numbers never import astropy (about 0.6 s).
    """
    raw = text.strip()
    if not raw or len(raw) > 64:
        raise FilterError(f"{what}: expected a number with an optional unit, got {text[:40]!r}")
    try:
        value = float(raw)
    except ValueError:
        value = _with_unit(raw, unit, what)
    if not math.isfinite(value):
        raise FilterError(f"{what}: {text[:40]!r} is not a finite number")
    return value


def _with_unit(raw: str, unit: str, what: str) -> float:
    import astropy.units as u  # deferred: only typed units need it

    target = u.Unit(unit)
    try:
        q = u.Quantity(raw)
    except (TypeError, ValueError):
        raise FilterError(f"{what}: cannot read {raw[:40]!r} as a quantity") from None
    if q.unit == u.dimensionless_unscaled:
        return float(q.value)
    try:
        return float(q.to_value(target))
    except u.UnitConversionError:
        raise FilterError(f"{what}: {raw[:40]!r} is not in units of {target}") from None


def parse_frequency_hz(text: str, what: str = "frequency") -> float:
    """A frequency in Hz; bare numbers are MHz (DESIGN.md)."""
    return parse_value(text, "MHz", what) * 1.0e6


def parse_range(
    text: str, parse: Callable[[str], float], what: str
) -> tuple[float | None, float | None]:
    """Parse ``MIN:MAX`` where either side may be empty; ``parse`` turns one side into a float."""
    if text.count(":") != 1:
        raise FilterError(f"{what}: expected MIN:MAX (either side may be empty), got {text[:40]!r}")
    lo_text, hi_text = text.split(":")
    try:
        lo = parse(lo_text) if lo_text.strip() else None
        hi = parse(hi_text) if hi_text.strip() else None
    except ValueError:
        raise FilterError(f"{what}: cannot read {text[:40]!r} as MIN:MAX numbers") from None
    if any(v is not None and not math.isfinite(v) for v in (lo, hi)):
        raise FilterError(f"{what}: {text[:40]!r} is not a finite range")
    if lo is not None and hi is not None and lo > hi:
        raise FilterError(
            f"{what}: the minimum {lo_text.strip()} is above the maximum {hi_text.strip()}"
        )
    return lo, hi
