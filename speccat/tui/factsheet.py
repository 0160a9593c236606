"""The inspector's text panels: fit values with errors, ranked candidates, flags and physics."""

from __future__ import annotations

import math
from typing import Any

from textual.content import Content
from textual.markup import escape

from speccat.tui.services import Detail


def _finite(value: Any) -> bool:
    return isinstance(value, int | float) and not isinstance(value, bool) and math.isfinite(value)


def value_pm(value: Any, err: Any, unit: str = "") -> str:
    """``value ± err unit`` with the error to two significant digits (value to match)."""
    if not _finite(value):
        return "—"
    tail = f" {unit}" if unit else ""
    if not _finite(err) or err <= 0:
        return f"{value:.6g}{tail}"
    decimals = max(0, 1 - math.floor(math.log10(err)))
    return f"{value:.{decimals}f} ± {err:.{decimals}f}{tail}"


def _panel(title: str, rows: list[tuple[str, str]], notes: list[str] | None = None) -> Content:
    """A heading, aligned key/value rows and italic notes, as Textual content (no colours)."""
    width = max((len(k) for k, _ in rows), default=0)
    lines = [f"[b u]{escape(title)}[/]"]
    lines += [f"[b]{escape(key.ljust(width))}[/]  {escape(value)}" for key, value in rows]
    lines += [f"[i]{escape(note)}[/]" for note in notes or []]
    return Content.from_markup("\n".join(lines))


def fit_text(d: Detail) -> Content:
    """The fitted values with their 1-sigma errors, in the exported units."""
    r = d.row
    unit = str(r.get("intensity_unit") or "")
    rest = r.get("rest_freq_mhz")
    rows = [
        ("v_LSR", value_pm(r.get("v_lsr_kms"), r.get("v_lsr_err_kms"), "km/s")),
        ("FWHM", value_pm(r.get("fwhm_kms"), r.get("fwhm_err_kms"), "km/s")),
        ("peak", value_pm(r.get("peak"), r.get("peak_err"), unit)),
        ("integral", value_pm(r.get("integral"), r.get("integral_err"), f"{unit} km/s")),
        ("obs freq", f"{r['obs_freq_mhz']:.6f} MHz" if _finite(r.get("obs_freq_mhz")) else "—"),
        ("rest freq", f"{rest:.6f} MHz" if _finite(rest) else "— (unidentified)"),
        ("rms", f"{r['rms']:.3g} {unit}" if _finite(r.get("rms")) else "—"),
        ("S/N", f"{r['snr']:.1f}" if _finite(r.get("snr")) else "—"),
        ("kind", f"{r.get('kind') or '—'}, Stokes {r.get('stokes') or '?'}"),
    ]
    title = f"Fit of detection #{r.get('detection_id')}"
    return _panel(title, rows)


def candidates_text(d: Detail) -> Content:
    """The ranked identification candidates, best first; the chosen one is starred."""
    chosen = d.row.get("line")
    rows: list[tuple[str, str]] = []
    ranked = sorted(d.candidates, key=lambda c: -(c.get("score") or 0.0))
    for i, c in enumerate(ranked, 1):
        name = str(c.get("name") or c.get("line") or "?")
        star = "*" if name == chosen else " "
        v = c.get("v_lsr_kms")
        v_txt = f"v {v:+.1f}" if _finite(v) else "v —"
        score = c.get("score")
        s_txt = f"score {score:.3f}" if _finite(score) else ""
        rows.append((f"{i}{star}{name}", f"{v_txt}  {s_txt}".rstrip()))
    notes = []
    if not ranked:
        notes.append("no catalogue line fits: kept unidentified")
    elif chosen is None:
        notes.append("none scored above the threshold: unidentified")
    else:
        notes.append("* = chosen identification")
    return _panel("Candidates, best first", rows, notes)


def physics_text(d: Detail) -> Content:
    """Quality flags of the line and the spectrum, and the derived physical quantities."""
    line_flags = [f for f in str(d.row.get("flags") or "").split(";") if f]
    rows = [
        ("line flags", ", ".join(line_flags) or "none"),
        ("spectrum flags", ", ".join(d.spectrum_flags) or "none"),
    ]
    derived = [(k, v) for k, v in d.derived.items() if v is not None]
    for key, value in derived:
        rows.append((key, f"{value:.5g}" if _finite(value) else str(value)))
    notes = list(d.notes)
    if not derived:
        notes.append("no derived quantity applies to this line")
    return _panel("Quality and physics", rows, notes)
