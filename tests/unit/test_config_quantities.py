"""Settings precedence and the parsing of typed quantities."""

from __future__ import annotations

from pathlib import Path

import pytest

from speccat.config import load_settings
from speccat.errors import FilterError, SpeccatError
from speccat.quantities import parse_frequency_hz, parse_range


def test_defaults_then_file_then_environment_then_flags(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    assert load_settings().archive == "speccat.sqlite"
    cfg = tmp_path / "speccat" / "config.toml"
    cfg.parent.mkdir()
    cfg.write_text('archive = "from-file.sqlite"\ndetect_sigma = 6\njobs = 3\n')
    monkeypatch.setenv("XDG_CONFIG_HOME", str(tmp_path))
    s = load_settings()
    assert (s.archive, s.detect_sigma, s.jobs) == ("from-file.sqlite", 6.0, 3)
    monkeypatch.setenv("SPECCAT_ARCHIVE", "from-env.sqlite")
    assert load_settings().archive == "from-env.sqlite"
    assert load_settings({"archive": "flag.sqlite", "jobs": None}).archive == "flag.sqlite"
    assert load_settings({"archive": "flag.sqlite", "jobs": None}).jobs == 3


def test_bad_config_names_the_file_and_key(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    cfg = tmp_path / "speccat" / "config.toml"
    cfg.parent.mkdir()
    cfg.write_text("colour = 'red'\n")
    monkeypatch.setenv("XDG_CONFIG_HOME", str(tmp_path))
    with pytest.raises(SpeccatError, match="unknown setting 'colour'"):
        load_settings()
    cfg.write_text("jobs = 'many'\n")
    with pytest.raises(SpeccatError, match="jobs must be a int"):
        load_settings()


@pytest.mark.parametrize(
    ("text", "hz"),
    [("5008.9MHz", 5008.9e6), ("1.42 GHz", 1.42e9), ("1420", 1420e6), ("22235080 kHz", 22235.08e6)],
)
def test_frequencies_take_units_and_bare_numbers_are_mhz(text: str, hz: float) -> None:
    # DESIGN.md contract: FREQ takes units, bare numbers are MHz.
    assert parse_frequency_hz(text) == pytest.approx(hz, rel=1e-12)


@pytest.mark.parametrize(
    "text", ["abc", "5 km/s", "", "nan", "1e400", "'; drop table x; --", "x" * 500]
)
def test_bad_frequencies_give_one_line_filter_errors(text: str) -> None:
    with pytest.raises(FilterError) as info:
        parse_frequency_hz(text, "--freq")
    assert "\n" not in str(info.value) and str(info.value).startswith("--freq")


def test_ranges() -> None:
    assert parse_range("10:", float, "--vel") == (10.0, None)
    assert parse_range(":-5", float, "--vel") == (None, -5.0)
    with pytest.raises(FilterError, match="above the maximum"):
        parse_range("10:-5", float, "--vel")
    with pytest.raises(FilterError, match="MIN:MAX"):
        parse_range("10", float, "--vel")


def test_range_of_non_numbers_is_a_filter_error() -> None:
    with pytest.raises(FilterError, match="--vel"):
        parse_range("a:b", float, "--vel")
    with pytest.raises(FilterError, match="finite"):
        parse_range("nan:1", float, "--vel")
