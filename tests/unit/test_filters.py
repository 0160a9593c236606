"""Filters: parsing and validation, and every filter alone and in pairs against a brute force
over the stored inputs (hypothesis), plus hostile text in every filter."""

from __future__ import annotations

import re
from datetime import datetime, timedelta
from typing import Any

import archive_fixtures
import pytest
from archive_fixtures import NIGHTS, SOURCES, table_checksums
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from speccat.archive import FilterError, Filters
from speccat.archive.filters import glob_to_like, glob_to_sqlite

filled_archive = archive_fixtures.filled_archive  # module-wide archive on both engines


def _glob_re(pattern: str) -> re.Pattern[str]:
    parts = [".*" if ch == "*" else "." if ch == "?" else re.escape(ch) for ch in pattern.lower()]
    return re.compile("".join(parts), re.DOTALL)


def brute(f: Filters, row: dict[str, Any]) -> bool:
    """The documented filter semantics, written out plainly over the input rows."""
    checks = []
    if f.source is not None:
        checks.append(_glob_re(f.source).fullmatch(row["source"].lower()) is not None)
    if f.species is not None:
        sp = row["species"]
        checks.append(sp is not None and _glob_re(f.species).fullmatch(sp.lower()) is not None)
    if f.line is not None:
        checks.append(row["line"] == f.line)
    v = row["v_lsr_kms"]
    if f.vel_min_kms is not None:
        checks.append(v is not None and v >= f.vel_min_kms)
    if f.vel_max_kms is not None:
        checks.append(v is not None and v <= f.vel_max_kms)
    if f.freq_min_hz is not None:
        checks.append(row["center_hz"] >= f.freq_min_hz)
    if f.freq_max_hz is not None:
        checks.append(row["center_hz"] <= f.freq_max_hz)
    if f.snr_min is not None:
        checks.append(row["snr"] >= f.snr_min)
    if f.night is not None:
        checks.append(row["night"] == f.night)
    if f.kind is not None:
        checks.append(row["kind"] == f.kind)
    if f.unidentified:
        checks.append(row["line"] is None)
    t = row["obs_time"]
    if f.since is not None:
        checks.append(t is not None and t >= f.since)
    if f.until is not None:
        checks.append(t is not None and t <= f.until)
    return all(checks)


def check_against_brute(archive: Any, rows: list[dict[str, Any]], f: Filters) -> set[int]:
    expected = [r for r in rows if brute(f, r)]
    ids = {rec["detection_id"] for rec in archive.iter_detections(f, batch=7)}
    assert ids == {r["id"] for r in expected}
    assert archive.count(f) == len(expected)
    top = sorted(expected, key=lambda r: (r["snr"], r["id"]), reverse=True)[:7]
    assert [rec["detection_id"] for rec in archive.page(f, limit=7)] == [r["id"] for r in top]
    return ids


# ---- parsing -----------------------------------------------------------------------------------
@pytest.mark.parametrize(
    ("values", "message"),
    [
        ({"vel": "10:-5"}, "--vel: the minimum 10 is above the maximum -5"),
        ({"vel": "abc"}, "--vel: expected MIN:MAX"),
        ({"vel": "a:b"}, "--vel: expected a number"),
        ({"vel": "nan:"}, "--vel: expected a finite number"),
        ({"freq": "2GHz:1GHz"}, "--freq: the minimum"),
        ({"freq": "1 km:2 km"}, "--freq: .* is not in units of MHz"),
        ({"snr": "lots"}, "--snr: expected a number"),
        ({"kind": "both"}, "--kind: expected emission or absorption"),
        ({"since": "yesterday"}, "--since: expected a date"),
        ({"until": "2026-13-40"}, "--until: expected a date"),
        ({"since": "2026-03-16", "until": "2026-03-15"}, "--since is after --until"),
        ({"source": "x" * 201}, "--source: longer than 200 characters"),
        ({"species": "a\x00b"}, "--species: control characters"),
        ({"unidentified": "maybe"}, "--unidentified: expected yes or no"),
        ({"colour": "red"}, "unknown filter 'colour'"),
    ],
)
def test_bad_values_give_one_line_messages(values: dict[str, str], message: str) -> None:
    with pytest.raises(FilterError, match=message) as err:
        Filters.parse(values)
    assert "\n" not in str(err.value) and len(str(err.value)) < 160


def test_parse_values() -> None:
    f = Filters.parse(
        {
            "vel": ":12.5",
            "freq": "1.4GHz:1420.5",
            "snr": "5",
            "kind": "Absorption",
            "since": "2026-03-14",
            "until": "2026-03-15",
            "source": " Neb* ",
            "unidentified": "",
        }
    )
    assert (f.vel_min_kms, f.vel_max_kms) == (None, 12.5)
    assert f.freq_min_hz == pytest.approx(1.4e9, rel=1e-15)
    assert f.freq_max_hz == pytest.approx(1420.5e6, rel=1e-15)
    assert f.snr_min == 5.0 and f.kind == "absorption" and f.source == "Neb*"
    assert f.since == datetime(2026, 3, 14)
    assert f.until == datetime(2026, 3, 16) - timedelta(microseconds=1)  # the whole day
    assert not f.unidentified
    aware = Filters.parse({"since": "2026-03-14T23:30:00+02:00"})
    assert aware.since == datetime(2026, 3, 14, 21, 30)
    assert Filters.parse({"source": None, "vel": ""}).is_empty()


def test_line_names_are_normalised() -> None:
    # H109alpha and H109a are two spellings of one line (catalogue name parsing)
    assert Filters.parse({"line": "H109alpha"}).line == Filters.parse({"line": "H109a"}).line
    assert Filters.parse({"line": "not-a-line"}).line == "not-a-line"


def test_glob_translation_escapes_metacharacters() -> None:
    assert glob_to_sqlite("a[b]*?") == "a[[]b[]]*?"
    assert glob_to_like("50%_a\\*?") == "50\\%\\_a\\\\%_"


# ---- against a brute force -------------------------------------------------------------------
def test_each_filter_selects_something_but_not_everything(filled_archive: Any) -> None:
    archive, rows = filled_archive
    for values in (
        {"source": "nebula*"},
        {"species": "h"},
        {"line": "H109alpha"},
        {"vel": "-20:40"},
        {"freq": "1.5GHz:"},
        {"snr": "100"},
        {"night": NIGHTS[1]},
        {"kind": "absorption"},
        {"unidentified": "yes"},
        {"since": "2026-03-15T06:00"},
        {"until": "2026-03-14"},
    ):
        ids = check_against_brute(archive, rows, Filters.parse(values))
        assert 0 < len(ids) < len(rows), values


_text_glob = st.sampled_from(
    [*SOURCES, "nebula*", "NEBULA-?", "*-*", "cloud [7]", "*[*", "*%*", "dark_lane%1", "*ä", "?"]
)
_species = st.sampled_from(["H", "h*", "He", "O?", "*2*", "hi", "H2O", "x*", "*"])
_lines = st.sampled_from(["H109a", "H109alpha", "He109a", "OH1667", "HI", "H2O22", "C109a"])
_num = st.floats(min_value=-250, max_value=250, allow_nan=False).map(repr)
_mhz = st.floats(min_value=1000, max_value=25000, allow_nan=False).map(repr)
_time = st.datetimes(min_value=datetime(2026, 3, 14, 12), max_value=datetime(2026, 3, 16, 12))
_stamp = st.one_of(_time.map(lambda t: t.isoformat()), _time.map(lambda t: t.date().isoformat()))


def _range(side: st.SearchStrategy[str]) -> st.SearchStrategy[str]:
    both = st.tuples(side, side).map(lambda p: ":".join(sorted(p, key=float)))
    return st.one_of(both, side.map(lambda s: s + ":"), side.map(lambda s: ":" + s))


STRATEGIES: dict[str, st.SearchStrategy[str]] = {
    "source": _text_glob,
    "species": _species,
    "line": _lines,
    "vel": _range(_num),
    "freq": _range(_mhz),
    "snr": st.floats(min_value=0, max_value=250).map(repr),
    "night": st.sampled_from([*NIGHTS, "2026-03-17"]),
    "kind": st.sampled_from(["emission", "absorption"]),
    "unidentified": st.just("yes"),
    "since": _stamp,
    "until": _stamp,
}


@st.composite
def filter_values(draw: st.DrawFn) -> dict[str, str]:
    keys = draw(st.lists(st.sampled_from(sorted(STRATEGIES)), min_size=1, max_size=2, unique=True))
    return {k: draw(STRATEGIES[k]) for k in keys}


@settings(
    max_examples=80, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(values=filter_values())
def test_single_and_paired_filters_match_brute_force(
    filled_archive: Any, values: dict[str, str]
) -> None:
    archive, rows = filled_archive
    try:
        f = Filters.parse(values)
    except FilterError:
        assume(False)  # only since > until can be drawn inconsistent
        return
    check_against_brute(archive, rows, f)


def test_every_single_filter_and_every_pair(filled_archive: Any) -> None:
    """Deterministic sweep: each key alone and each pair with one typical value."""
    archive, rows = filled_archive
    typical = {
        "source": "neb*",
        "species": "h*",
        "line": "OH1667",
        "vel": "-50:50",
        "freq": ":2000",
        "snr": "50",
        "night": NIGHTS[0],
        "kind": "emission",
        "unidentified": "yes",
        "since": "2026-03-15",
        "until": "2026-03-15T12:00",
    }
    keys = sorted(typical)
    for i, a in enumerate(keys):
        for b in keys[i:]:
            check_against_brute(archive, rows, Filters.parse({a: typical[a], b: typical[b]}))


HOSTILE = [
    "'; DROP TABLE detections; --",
    '" OR 1=1 --',
    "%",
    "_",
    "\\",
    "[a-z]*",
    "*]",
    "ä*",
    "QUELLE-Ä",
    "日本語",
    "Robert'); DELETE FROM files; --",
    "x" * 200,
    "x" * 5000,
    "\x00",
    "1; SELECT 1",
]


@pytest.mark.parametrize("key", sorted(STRATEGIES))
def test_hostile_text_in_every_filter(filled_archive: Any, key: str) -> None:
    archive, rows = filled_archive
    before = table_checksums(archive)
    for value in HOSTILE:
        try:
            f = Filters.parse({key: value})
        except FilterError as exc:
            assert "\n" not in str(exc) and len(str(exc)) < 200
            continue
        check_against_brute(archive, rows, f)
    assert table_checksums(archive) == before


@pytest.mark.parametrize("descending", [True, False])
@pytest.mark.parametrize(
    "sort", ["snr", "v_lsr_kms", "source", "obs_time", "rms", "file", "species"]
)
def test_keyset_and_offset_pages_walk_the_full_order(
    filled_archive: Any, sort: str, descending: bool
) -> None:
    archive, rows = filled_archive
    f = Filters.parse({"kind": "emission"})
    full = [
        r["detection_id"] for r in archive.page(f, sort=sort, descending=descending, limit=1000)
    ]
    assert len(full) == archive.count(f)
    keyset: list[int] = []
    offset: list[int] = []
    after = None
    while True:
        page = archive.page(f, sort=sort, descending=descending, limit=17, after=after)
        by_offset = archive.page(f, sort=sort, descending=descending, limit=17, offset=len(offset))
        offset += [r["detection_id"] for r in by_offset]
        if not page:
            break
        keyset += [r["detection_id"] for r in page]
        after = page[-1]["detection_id"]
    assert keyset == full and offset == full
    if sort in ("snr", "v_lsr_kms", "source", "species"):
        # NULLs are the smallest values, ties broken by id in the sort direction
        def key(r: dict[str, Any]) -> tuple[Any, ...]:
            return (r[sort] is not None, r[sort] if r[sort] is not None else 0, r["id"])

        expected = sorted((r for r in rows if r["kind"] == "emission"), key=key, reverse=descending)
        assert full == [r["id"] for r in expected]
