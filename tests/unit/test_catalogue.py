"""The catalogue API: contents, windows, names in every spelling, groups, user files."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from speccat.catalogue import (
    LINE_CLASSES,
    Catalogue,
    CatalogueLine,
    builtin,
    load,
    parse_csv,
    parse_line_name,
    rrl_parts,
)
from speccat.catalogue import recombination as rrl
from speccat.errors import CatalogueError

CAT = builtin()
FREQS = CAT.rest_freq_hz


def test_builtin_is_cached_and_sorted() -> None:
    assert builtin() is CAT
    assert len(CAT.lines) == len(CAT) == len(FREQS)
    assert np.all(np.diff(FREQS) >= 0)
    assert [line.rest_freq_hz for line in CAT.lines] == FREQS.tolist()
    with pytest.raises(ValueError):
        FREQS[0] = 1.0  # read-only


def test_every_line_is_well_formed() -> None:
    for line in CAT.lines:
        assert line.name.isascii() and " " not in line.name, line.name
        assert line.species and line.reference and line.group, line.name
        assert line.line_class in LINE_CLASSES, line.name
        assert 0.0 <= line.prior <= 1.0, line.name
        assert 0.0 < line.width_min_kms <= line.width_max_kms, line.name
        assert line.rest_freq_hz > 0 and line.rest_freq_err_hz >= 0, line.name
        is_rrl = line.line_class == "recombination"
        assert (line.element is not None) == is_rrl, line.name
        assert (line.n is not None and line.dn is not None) == is_rrl, line.name


def test_width_ranges_follow_the_issue() -> None:
    assert (CAT.by_name("H109a").width_min_kms, CAT.by_name("H109a").width_max_kms) == (10, 50)
    assert CAT.by_name("C109a").width_max_kms <= 10
    assert CAT.by_name("HI").width_max_kms >= 500
    assert CAT.by_name("H2O22").line_class == "maser"
    assert CAT.by_name("H2O22").width_min_kms <= 0.1


@pytest.mark.parametrize("element", rrl.ELEMENTS)
@pytest.mark.parametrize("dn", [1, 2, 3, 4, 5])
def test_recombination_series_is_complete(element: str, dn: int) -> None:
    """Every line from 100 MHz to 1 THz is present, and no other."""
    letter = rrl.DN_LETTERS[dn]
    ns = sorted(line.n for line in CAT.search(species=element, name=f"{element}*{letter}"))
    assert ns == list(range(ns[0], ns[-1] + 1))
    assert rrl.rrl_frequency_hz(element, ns[0] - 1, dn) > rrl.FMAX_HZ
    assert rrl.rrl_frequency_hz(element, ns[-1] + 1, dn) < rrl.FMIN_HZ
    assert CAT.by_name(f"{element}{ns[-1]}{letter}").rest_freq_hz >= rrl.FMIN_HZ
    assert CAT.by_name(f"{element}{ns[0]}{letter}").rest_freq_hz <= rrl.FMAX_HZ


def test_recombination_line_fields() -> None:
    line = CAT.by_name("H109a")
    assert (line.element, line.n, line.dn) == ("H", 109, 1)
    assert line.transition == "n=110→109"
    assert line.group == "RRL 109 a"
    assert line.species == "H"
    assert CAT.by_name("H138b").transition == "n=140→138"


# --- windows ---------------------------------------------------------------------------------
_ALL_HZ = np.array([line.rest_freq_hz for line in CAT.lines])
_ALL_NAMES = np.array([line.name for line in CAT.lines], dtype=object)


def _brute(fmin: float, fmax: float) -> list[str]:
    """Every line tested one by one (a mask over all lines, no search)."""
    return list(_ALL_NAMES[np.greater_equal(_ALL_HZ, fmin) & np.less_equal(_ALL_HZ, fmax)])


@settings(max_examples=150, deadline=None)
@given(
    lo=st.one_of(st.floats(5e7, 1.1e12), st.sampled_from(FREQS.tolist())),
    width=st.one_of(st.floats(0.0, 2e9), st.floats(0.0, 1e12), st.just(0.0)),
)
def test_window_equals_brute_force(lo: float, width: float) -> None:
    hi = lo + width
    assert [line.name for line in CAT.between(lo, hi)] == _brute(lo, hi)


def test_window_edges_and_empty() -> None:
    h109 = CAT.by_name("H109a").rest_freq_hz
    assert "H109a" in [line.name for line in CAT.between(h109, h109)]
    assert CAT.between(2e9, 1e9) == []
    assert CAT.between(1.0, 2.0) == []
    names = [line.name for line in CAT.between(1420.0e6, 1420.6e6)]
    assert "HI" in names


# --- names -----------------------------------------------------------------------------------
@pytest.mark.parametrize(
    ("spelling", "name"),
    [
        ("H109a", "H109a"),
        ("H109α", "H109a"),
        ("H109alpha", "H109a"),
        ("h109A", "H109a"),
        ("H 109 α", "H109a"),
        ("H109Alpha", "H109a"),
        ("He109α", "He109a"),
        ("HE109A", "He109a"),
        ("he109alpha", "He109a"),
        ("C109α", "C109a"),
        ("S109a", "S109a"),
        ("H138β", "H138b"),
        ("H138beta", "H138b"),
        ("H100γ", "H100g"),
        ("H100gamma", "H100g"),
        ("H90δ", "H90d"),
        ("H80ε", "H80e"),
        ("H80epsilon", "H80e"),
        ("HI", "HI"),
        ("H I", "HI"),
        ("hi", "HI"),
        ("21cm", "HI"),
        ("21 cm", "HI"),
        ("OH1667", "OH1667"),
        ("OH 1667", "OH1667"),
        ("oh1665", "OH1665"),
        ("OH1612", "OH1612"),
        ("OH1720", "OH1720"),
        ("OH6035", "OH6035"),
        ("NH3(1,1)", "NH3(1,1)"),
        ("NH3 (1,1)", "NH3(1,1)"),
        ("NH3(1, 1)", "NH3(1,1)"),
        ("NH₃(2,2)", "NH3(2,2)"),
        ("NH3(1,1)s-1", "NH3(1,1)s-1"),
        ("NH3 (1,1) s+2", "NH3(1,1)s+2"),
        ("H2O22", "H2O22"),
        ("H₂O 22", "H2O22"),
        ("CH3OH6.7", "CH3OH6.7"),
        ("CH₃OH 6.7", "CH3OH6.7"),
        ("CO(1-0)", "CO(1-0)"),
        ("CO 1-0", "CO(1-0)"),
        ("CO J=1-0", "CO(1-0)"),
        ("CO(1–0)", "CO(1-0)"),
        ("CO(1→0)", "CO(1-0)"),
        ("13CO(2-1)", "13CO(2-1)"),
        ("¹³CO(1-0)", "13CO(1-0)"),
        ("C18O(1-0)", "C18O(1-0)"),
        ("HCO⁺(1-0)", "HCO+(1-0)"),
        ("HCN(1-0)F=2-1", "HCN(1-0)F=2-1"),
        ("HCN(1-0)", "HCN(1-0)F=2-1"),
        ("N2H+(1-0)", "N2H+(1-0)F1=2-1,F=3-2"),
        ("CN(1-0)", "CN(1-0)J=3/2-1/2,F=5/2-3/2"),
        ("SiO(1-0)v=1", "SiO(1-0)v=1"),
        ("SiO (1-0) v=1", "SiO(1-0)v=1"),
        ("CCS(4_3-3_2)", "CCS(4_3-3_2)"),
        ("CH3335", "CH3335"),
    ],
)
def test_by_name_accepts_every_common_spelling(spelling: str, name: str) -> None:
    assert CAT.by_name(spelling).name == name
    assert parse_line_name(spelling) == name
    assert spelling in CAT


@pytest.mark.parametrize(
    ("text", "parts"),
    [
        ("H109a", ("H", 109, 1)),
        ("He42β", ("He", 42, 2)),
        ("c200 gamma", ("C", 200, 3)),
        ("S50δ", ("S", 50, 4)),
        ("H300e", ("H", 300, 5)),
        ("HI", None),
        ("CH3335", None),
        ("H109z", None),
        ("H0a", None),
    ],
)
def test_rrl_parts(text: str, parts: tuple[str, int, int] | None) -> None:
    assert rrl_parts(text) == parts


@pytest.mark.parametrize(
    ("name", "fragment"),
    [
        ("H5a", "H5a (n=6->5)"),
        ("Xx42", "unknown line name 'Xx42'"),
        ("OH1666", "did you mean"),
        ("", "unknown line name"),
    ],
)
def test_unknown_names_raise_a_clear_error(name: str, fragment: str) -> None:
    with pytest.raises(CatalogueError, match=fragment.replace("(", r"\(").replace(")", r"\)")):
        CAT.by_name(name)
    assert name not in CAT


# --- search and groups -----------------------------------------------------------------------
def test_search_by_species_and_name_globs() -> None:
    co_like = {line.species for line in CAT.search(species="*CO")}
    assert co_like == {"CO", "13CO", "H2CO", "HNCO"}
    assert {line.name for line in CAT.search(species="oh", name="OH16*")} == {
        "OH1612",
        "OH1665",
        "OH1667",
    }
    masers = CAT.search(line_class="maser")
    assert masers and all(line.line_class == "maser" for line in masers)
    h1xxa = CAT.search(name="H1??a")
    assert len(h1xxa) == 100 and all(line.species == "H" for line in h1xxa)
    assert CAT.search(species="no-such-species") == []


def test_groups_hold_components_that_appear_together() -> None:
    assert {line.name for line in CAT.group_of("H109a")} == {"H109a", "He109a", "C109a", "S109a"}
    assert {line.name for line in CAT.group_of("OH1665")} == {"OH1665", "OH1667"}
    assert len(CAT.group_of("NH3(1,1)")) == 5
    assert len(CAT.group_of("NH3(2,2)s+1")) == 5
    assert len(CAT.group_of("N2H+(1-0)")) == 7
    assert len(CAT.group_of("CN(1-0)")) == 9
    assert len(CAT.group_of("HCN(1-0)")) == 3
    assert CAT.groups["RRL 138 b"] == tuple(CAT.group_of("H138b"))


def test_curated_content_named_in_the_issue() -> None:
    curated = [line for line in CAT.lines if line.line_class != "recombination"]
    assert len(curated) > 100
    for name in [
        "HI", "OH1612", "OH1665", "OH1667", "OH1720", "OH6030", "OH6035", "OH4765",
        "H2O22", "CH3OH6.7", "CH3OH12.2", "CH3OH44.1", "CH3OH95.2",
        "NH3(1,1)", "NH3(2,2)", "NH3(3,3)", "NH3(4,4)", "NH3(5,5)", "NH3(6,6)",
        "H2CO4.8", "H2CO14.5",
        "SiO(1-0)", "SiO(1-0)v=1", "SiO(1-0)v=2", "SiO(2-1)", "SiO(2-1)v=1", "SiO(2-1)v=2",
        "CO(1-0)", "CO(2-1)", "13CO(1-0)", "13CO(2-1)", "C18O(1-0)", "C18O(2-1)",
        "HCO+(1-0)", "HCN(1-0)F=1-1", "HCN(1-0)F=0-1", "HNC(1-0)", "CS(2-1)",
        "CCS(4_3-3_2)", "HC3N(10-9)", "CH3335",
    ]:  # fmt: skip
        assert name in CAT, name
    assert abs(CAT.by_name("CH3OH44.1").rest_freq_hz - 44.1e9) < 0.05e9
    assert abs(CAT.by_name("H2CO14.5").rest_freq_hz - 14.49e9) < 0.005e9


# --- user catalogue files --------------------------------------------------------------------
HEADER = "name,species,transition,rest_freq_mhz,uncertainty_mhz,reference,line_class,prior,width_min_kms,width_max_kms,group\n"


def _write(tmp_path: Path, text: str, name: str = "extra.csv") -> Path:
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def test_user_file_adds_and_overrides(tmp_path: Path) -> None:
    path = _write(
        tmp_path,
        "# my lines\n"
        "name,species,rest_freq_mhz,line_class,group\n"
        "XY(1-0),XY,12345.678,maser,\n"
        "HI,HI,1420.5,atomic,\n",
    )
    cat = load(str(path))
    assert len(cat) == len(CAT) + 1
    xy = cat.by_name("xy (1-0)")
    assert (xy.rest_freq_hz, xy.line_class, xy.group) == (12345.678e6, "maser", "XY(1-0)")
    assert (xy.width_min_kms, xy.width_max_kms) == (0.1, 3.0)
    assert str(path) in xy.reference
    assert cat.by_name("HI").rest_freq_hz == 1420.5e6
    assert [line.name for line in cat.between(12345e6, 12346e6)] == ["XY(1-0)"]
    assert builtin().by_name("HI").rest_freq_hz == 1420405751.768  # built-in untouched


def test_user_recombination_row_gets_quantum_numbers(tmp_path: Path) -> None:
    path = _write(tmp_path, "name,species,rest_freq_mhz,line_class\nH109a,H,5008.9,recombination\n")
    line = load(path).by_name("H109α")
    assert (line.element, line.n, line.dn, line.rest_freq_hz) == ("H", 109, 1, 5008.9e6)


def test_load_without_extra_is_builtin() -> None:
    assert load(None) is CAT
    assert load("") is CAT


@pytest.mark.parametrize(
    ("body", "message"),
    [
        (HEADER + "A,B,t,abc,0,r,thermal,0.5,1,2,g\n", r"row 2: field 'rest_freq_mhz': 'abc' is not a number"),
        (HEADER + "A,B,t,-5,0,r,thermal,0.5,1,2,g\n", r"row 2: field 'rest_freq_mhz'"),
        (HEADER + "A,B,t,5,0,r,thermal,1.5,1,2,g\n", r"row 2: field 'prior': 1.5 is above 1"),
        (HEADER + "A,B,t,5,0,r,cosmic,0.5,1,2,g\n", r"row 2: field 'line_class'"),
        (HEADER + "A,B,t,5,0,r,thermal,0.5,3,2,g\n", r"row 2: field 'width_max_kms'"),
        (HEADER + "A,B,t,5,0,r,thermal,0.5,1,nan,g\n", r"row 2: field 'width_max_kms'"),
        (HEADER + "A B,B,t,5,0,r,thermal,0.5,1,2,g\n", r"row 2: field 'name'"),
        (HEADER + ",B,t,5,0,r,thermal,0.5,1,2,g\n", r"row 2: field 'name': is empty"),
        (HEADER + "A,B,t,5\n", r"row 2: expected 11 fields, found 4"),
        (HEADER + "A,B,t,5,0,r,thermal,0.5,1,2,g\n# c\na,B,t,6,0,r,thermal,0.5,1,2,g\n", r"row 4: field 'name': 'a' already given in row 2"),
        ("name,species,freq\nA,B,5\n", r"unknown column 'freq'"),
        ("name,species\nA,B\n", r"missing column 'rest_freq_mhz'"),
        ("# only a comment\n", r"no header row"),
    ],
)  # fmt: skip
def test_malformed_user_file_names_file_row_and_field(
    tmp_path: Path, body: str, message: str
) -> None:
    path = _write(tmp_path, body)
    with pytest.raises(CatalogueError, match=message) as info:
        load(str(path))
    assert str(info.value).startswith(str(path))
    assert "\n" not in str(info.value)
    assert path.read_text(encoding="utf-8") == body  # input never modified


def test_missing_or_unreadable_user_file(tmp_path: Path) -> None:
    with pytest.raises(CatalogueError, match="not found"):
        load(str(tmp_path / "nope.csv"))
    bad = tmp_path / "bad.csv"
    bad.write_bytes(b"\xff\xfe\x00bad")
    with pytest.raises(CatalogueError, match="cannot read"):
        load(str(bad))


def test_curated_parse_is_strict() -> None:
    with pytest.raises(CatalogueError, match="field 'reference': is empty"):
        parse_csv(HEADER + "A,B,t,5,0,,thermal,0.5,1,2,g\n", "x.csv", strict=True)
    with pytest.raises(CatalogueError, match="missing column"):
        parse_csv("name,species,rest_freq_mhz\nA,B,5\n", "x.csv", strict=True)


def test_catalogue_rejects_duplicate_names() -> None:
    line = CAT.by_name("HI")
    with pytest.raises(CatalogueError, match="share the name"):
        Catalogue([line, line])


def test_small_catalogue_from_lines() -> None:
    a = CatalogueLine("B", "b", "", 2e9, 0.0, "r", "thermal", 0.5, 1.0, 2.0, "g")
    b = CatalogueLine("A", "a", "", 1e9, 0.0, "r", "maser", 0.5, 1.0, 2.0, "g")
    cat = Catalogue([a, b])
    assert [line.name for line in cat.lines] == ["A", "B"]
    assert cat.between(0.5e9, 1.5e9) == [b]
    assert cat.groups["g"] == (b, a)
    assert math.isclose(cat.by_name("a").rest_freq_mhz, 1000.0)
