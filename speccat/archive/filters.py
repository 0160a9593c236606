"""The DESIGN.md detection filters: parsed from strings, turned into bound SQL conditions.

Semantics (the brute-force reference in the tests implements the same rules):

- ``source``/``species``: a glob (``*`` any run, ``?`` one character; nothing else is special),
  matched case-insensitively against the whole name. Unidentified detections have no species.
- ``line``: one line name, normalised through the catalogue (``H109alpha`` == ``H109a``) when
  the catalogue knows it, else compared as typed.
- ``vel``: LSRK radio velocity range in km/s, both ends inclusive; unidentified rows never match.
- ``freq``: the fitted line centre on the file's own axis (``obs_freq_mhz``), inclusive.
- ``snr``: minimum S/N (inclusive). ``night``: exact label. ``kind``: emission|absorption.
- ``unidentified``: only detections without an identification.
- ``since``/``until``: observation time (UTC), inclusive; a date alone means the whole day.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import asdict, dataclass, fields
from datetime import UTC, date, datetime, time, timedelta
from typing import Any

from sqlalchemy import ColumnElement, Table

from speccat.errors import FilterError
from speccat.quantities import parse_frequency_hz, parse_range

MAX_TEXT = 200  # longest glob / label accepted
KINDS = ("emission", "absorption")
_TRUE = {"1", "true", "yes", "on", "y"}
_FALSE = {"", "0", "false", "no", "off", "n"}


@dataclass(frozen=True)
class Filters:
    """A detection selection; every field None/False means "no restriction"."""

    source: str | None = None
    species: str | None = None
    line: str | None = None
    vel_min_kms: float | None = None
    vel_max_kms: float | None = None
    freq_min_hz: float | None = None
    freq_max_hz: float | None = None
    snr_min: float | None = None
    night: str | None = None
    kind: str | None = None
    unidentified: bool = False
    since: datetime | None = None  # naive UTC, inclusive
    until: datetime | None = None  # naive UTC, inclusive

    @classmethod
    def parse(cls, values: Mapping[str, Any]) -> Filters:
        """Build from user text: keys ``source species line vel freq snr night kind
        unidentified since until`` (also ``vel_min``/``vel_max``/``freq_min``/``freq_max``).
        Empty or None values are ignored; anything malformed raises FilterError."""
        v = {k: val for k, val in values.items() if val is not None and val != ""}
        unknown = set(v) - _KEYS
        if unknown:
            raise FilterError(f"unknown filter {sorted(unknown)[0]!r}")
        out: dict[str, Any] = {}
        for key in ("source", "species"):
            if key in v:
                out[key] = check_text(str(v[key]), f"--{key}")
        if "line" in v:
            out["line"] = normalise_line(check_text(str(v["line"]), "--line"))
        if "night" in v:
            out["night"] = check_text(str(v["night"]), "--night")
        out.update(_ranges(v))
        if "snr" in v:
            out["snr_min"] = _number(str(v["snr"]), "--snr")
        if "kind" in v:
            kind = str(v["kind"]).strip().lower()
            if kind not in KINDS:
                raise FilterError(
                    f"--kind: expected emission or absorption, got {_show(v['kind'])}"
                )
            out["kind"] = kind
        if "unidentified" in v:
            out["unidentified"] = _flag(v["unidentified"])
        if "since" in v:
            out["since"] = parse_time(str(v["since"]), "--since", end_of_day=False)
        if "until" in v:
            out["until"] = parse_time(str(v["until"]), "--until", end_of_day=True)
        if out.get("since") and out.get("until") and out["since"] > out["until"]:
            raise FilterError("--since is after --until")
        return cls(**out)

    def is_empty(self) -> bool:
        return self == Filters()

    def describe(self) -> dict[str, str]:
        """The active filters as text (for provenance and status lines)."""
        out: dict[str, str] = {}
        for key, value in asdict(self).items():
            if value is None or value is False:
                continue
            out[key] = value.isoformat() if isinstance(value, datetime) else str(value)
        return out


_KEYS = {f.name for f in fields(Filters)} | {
    "vel",
    "freq",
    "snr",
    "vel_min",
    "vel_max",
    "freq_min",
    "freq_max",
}


def _show(value: object) -> str:
    return repr(str(value)[:40])


def check_text(value: str, what: str) -> str:
    """A stripped, non-empty, printable text value of at most MAX_TEXT characters."""
    text = value.strip()
    if len(text) > MAX_TEXT:
        raise FilterError(f"{what}: longer than {MAX_TEXT} characters")
    if any(ord(ch) < 32 or ord(ch) == 127 for ch in text):
        raise FilterError(f"{what}: control characters are not allowed")
    if not text:
        raise FilterError(f"{what}: empty value")
    return text


def _number(text: str, what: str) -> float:
    try:
        value = float(text.strip())
    except ValueError:
        raise FilterError(f"{what}: expected a number, got {_show(text)}") from None
    if not math.isfinite(value):
        raise FilterError(f"{what}: expected a finite number, got {_show(text)}")
    return value


def _ranges(v: Mapping[str, Any]) -> dict[str, Any]:
    out: dict[str, Any] = {}

    def vel(t: str) -> float:
        return _number(t, "--vel")

    def freq(t: str) -> float:
        return parse_frequency_hz(t, "--freq")

    if "vel" in v:
        out["vel_min_kms"], out["vel_max_kms"] = parse_range(str(v["vel"]), vel, "--vel")
    if "freq" in v:
        out["freq_min_hz"], out["freq_max_hz"] = parse_range(str(v["freq"]), freq, "--freq")
    for key, field, conv in (
        ("vel_min", "vel_min_kms", vel),
        ("vel_max", "vel_max_kms", vel),
        ("vel_min_kms", "vel_min_kms", vel),
        ("vel_max_kms", "vel_max_kms", vel),
        ("freq_min", "freq_min_hz", freq),
        ("freq_max", "freq_max_hz", freq),
        ("freq_min_hz", "freq_min_hz", lambda t: _number(t, "--freq")),
        ("freq_max_hz", "freq_max_hz", lambda t: _number(t, "--freq")),
    ):
        if key in v:
            out[field] = conv(str(v[key]))
    for lo, hi, what in (
        ("vel_min_kms", "vel_max_kms", "--vel"),
        ("freq_min_hz", "freq_max_hz", "--freq"),
    ):
        if out.get(lo) is not None and out.get(hi) is not None and out[lo] > out[hi]:
            raise FilterError(f"{what}: the minimum is above the maximum")
    return out


def _flag(value: Any) -> bool:
    if isinstance(value, bool):
        return value
    text = str(value).strip().lower()
    if text in _TRUE:
        return True
    if text in _FALSE:
        return False
    raise FilterError(f"--unidentified: expected yes or no, got {_show(value)}")


def parse_time(text: str, what: str, end_of_day: bool) -> datetime:
    """ISO date or date-time; aware times are converted to naive UTC. A bare date is the
    start of that day, or its last microsecond when ``end_of_day``."""
    raw = text.strip()
    if len(raw) > 40:
        raise FilterError(f"{what}: not a date: {_show(text)}")
    try:
        if len(raw) == 10:
            day = date.fromisoformat(raw)
            start = datetime.combine(day, time())
            return start + timedelta(days=1, microseconds=-1) if end_of_day else start
        stamp = datetime.fromisoformat(raw.replace("Z", "+00:00"))
    except ValueError:
        raise FilterError(
            f"{what}: expected a date like 2026-03-14 or 2026-03-14T22:00, got {_show(text)}"
        ) from None
    if stamp.tzinfo is not None:
        stamp = stamp.astimezone(UTC).replace(tzinfo=None)
    return stamp


def normalise_line(name: str) -> str:
    """The catalogue's own spelling of a line name, or ``name`` unchanged when unknown."""
    from speccat.catalogue import builtin  # deferred: building the catalogue costs ~25 ms

    try:
        return str(builtin().by_name(name).name)
    except Exception:  # CatalogueError for unknown names; keep the user's text
        return name


def glob_to_sqlite(pattern: str) -> str:
    """A ``*``/``?`` glob as a SQLite GLOB pattern (brackets made literal)."""
    return "".join({"[": "[[]", "]": "[]]"}.get(ch, ch) for ch in pattern)


def glob_to_like(pattern: str) -> str:
    """A ``*``/``?`` glob as a LIKE pattern with ``\\`` as escape character."""
    out = []
    for ch in pattern:
        if ch in "\\%_":
            out.append("\\" + ch)
        elif ch == "*":
            out.append("%")
        elif ch == "?":
            out.append("_")
        else:
            out.append(ch)
    return "".join(out)


def _glob_clause(column: Any, pattern: str, dialect: str) -> ColumnElement[bool]:
    pattern = pattern.lower()
    if "*" not in pattern and "?" not in pattern:
        return column == pattern
    if dialect == "sqlite":
        return column.op("GLOB")(glob_to_sqlite(pattern))
    return column.like(glob_to_like(pattern), escape="\\")


def clauses(f: Filters, det: Table, dialect: str) -> list[ColumnElement[bool]]:
    """SQL conditions on the detections table; every value is a bound parameter."""
    c = det.c
    out: list[ColumnElement[bool]] = []
    if f.source is not None:
        out.append(_glob_clause(c.source_lc, f.source, dialect))
    if f.species is not None:
        out.append(_glob_clause(c.species_lc, f.species, dialect))
    if f.line is not None:
        out.append(c.line == f.line)
    if f.vel_min_kms is not None:
        out.append(c.v_lsr_kms >= f.vel_min_kms)
    if f.vel_max_kms is not None:
        out.append(c.v_lsr_kms <= f.vel_max_kms)
    if f.freq_min_hz is not None:
        out.append(c.center_hz >= f.freq_min_hz)
    if f.freq_max_hz is not None:
        out.append(c.center_hz <= f.freq_max_hz)
    if f.snr_min is not None:
        out.append(c.snr >= f.snr_min)
    if f.night is not None:
        out.append(c.night == f.night)
    if f.kind is not None:
        out.append(c.kind == f.kind)
    if f.unidentified:
        out.append(c.line.is_(None))
    if f.since is not None:
        out.append(c.obs_time >= f.since)
    if f.until is not None:
        out.append(c.obs_time <= f.until)
    return out
