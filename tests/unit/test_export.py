"""Exports read back with astropy (the reference reader) equal the archive value by value;
golden bytes for CSV; atomic, never-overwriting files."""

from __future__ import annotations

import json
import math
import os
import warnings
from pathlib import Path
from typing import Any

import archive_fixtures
import pytest
from archive_fixtures import fill_archive
from astropy.io.votable import parse as parse_votable
from astropy.table import Table

from speccat.archive import EXPORT_COLUMNS, Archive, Filters
from speccat.errors import ExportError
from speccat.export import atomic_output, export, export_columns, format_for

filled_archive = archive_fixtures.filled_archive  # module-wide archive on both engines
GOLDEN = Path(__file__).parent.parent / "golden"
FLOATS = [c.name for c in export_columns() if c.kind == "float"]
STRINGS = [c.name for c in export_columns() if c.kind == "str"]


def _same(column: str, read: Any, stored: Any) -> bool:
    """A read-back cell equals the archive value: masked/empty means None; floats exactly."""
    if read is None or read is getattr(read, "mask", None) or _is_masked(read):
        return stored is None or stored == ""
    if column in FLOATS:
        return stored is not None and float(read) == stored
    if column in STRINGS:
        return str(read) == (stored or "")
    return int(read) == stored


def _is_masked(value: Any) -> bool:
    import numpy.ma as ma

    return value is ma.masked


def _compare(table: Table, records: list[dict[str, Any]]) -> None:
    assert list(table.colnames) == list(EXPORT_COLUMNS)
    assert len(table) == len(records)
    for name in EXPORT_COLUMNS:
        column = table[name]
        for i, rec in enumerate(records):
            value = column[i]
            if name in STRINGS and value == "":
                value = None
            assert _same(name, value, rec[name]), (name, i, value, rec[name])


@pytest.mark.parametrize("suffix", [".csv", ".ecsv", ".vot", ".xml"])
def test_exports_read_back_equal_the_archive(
    filled_archive: Any, tmp_path: Path, suffix: str
) -> None:
    archive, _ = filled_archive
    target = tmp_path / f"out{suffix}"
    filters = Filters.parse({"snr": "20"})
    n = export(archive, filters, target)
    records = list(archive.iter_detections(filters))
    assert n == len(records) > 0
    if suffix == ".csv":
        table = Table.read(target, format="ascii.csv")
    elif suffix == ".ecsv":
        table = Table.read(target, format="ascii.ecsv")
    else:
        table = Table.read(target, format="votable")
    _compare(table, records)


def test_json_export_equals_the_archive(filled_archive: Any, tmp_path: Path) -> None:
    archive, _ = filled_archive
    target = tmp_path / "out.json"
    export(archive, Filters(), target)
    data = json.loads(target.read_text(encoding="utf-8"))
    records = list(archive.iter_detections())
    assert data == [{k: r[k] for k in EXPORT_COLUMNS} for r in records]


def test_votable_passes_the_parser_with_units_and_provenance(
    filled_archive: Any, tmp_path: Path
) -> None:
    archive, _ = filled_archive
    target = tmp_path / "out.vot"
    export(archive, Filters.parse({"source": "neb*"}), target)
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # any VOTable warning fails the test
        votable = parse_votable(str(target), verify="exception")
    table = votable.get_first_table()
    units = {f.name: str(f.unit) if f.unit is not None else None for f in table.fields}
    assert units["v_lsr_kms"] == "km / s" and units["rest_freq_mhz"] == "MHz"
    infos = {i.name: i.value for i in votable.resources[0].infos}
    assert infos["archive"] == archive.url
    assert json.loads(infos["filters"]) == {"source": "neb*"}
    assert set(infos) >= {"speccat_version", "exported_utc"}


def test_ecsv_carries_units_and_provenance(filled_archive: Any, tmp_path: Path) -> None:
    archive, _ = filled_archive
    target = tmp_path / "out.ecsv"
    export(archive, Filters.parse({"vel": "-10:"}), target)
    table = Table.read(target, format="ascii.ecsv")
    assert str(table["fwhm_kms"].unit) == "km / s" and str(table["obs_freq_mhz"].unit) == "MHz"
    assert table.meta["filters"] == {"vel_min_kms": "-10.0"}
    assert table.meta["archive"] == archive.url and "speccat_version" in table.meta


def test_csv_matches_golden_bytes(tmp_path: Path) -> None:
    archive, _ = fill_archive(str(tmp_path / "g.sqlite"), range(3), n_spectra=2, n_det=2)
    target = tmp_path / "g.csv"
    with archive:
        export(archive, Filters(), target)
    golden = GOLDEN / "export_small.csv"
    if os.environ.get("UPDATE_GOLDEN"):
        golden.write_bytes(target.read_bytes())
    assert target.read_bytes() == golden.read_bytes()


def test_floats_round_trip_through_csv_text(tmp_path: Path) -> None:
    archive, _ = fill_archive(str(tmp_path / "f.sqlite"), range(2))
    target = tmp_path / "f.csv"
    with archive:
        export(archive, Filters(), target)
        records = list(archive.iter_detections())
    import csv

    with target.open(encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    for row, rec in zip(rows, records, strict=True):
        for name in FLOATS:
            assert (float(row[name]) if row[name] else None) == rec[name]


def test_existing_file_is_never_overwritten_without_force(
    filled_archive: Any, tmp_path: Path
) -> None:
    archive, _ = filled_archive
    target = tmp_path / "keep.csv"
    target.write_text("precious\n")
    with pytest.raises(ExportError, match="already exists; use --force"):
        export(archive, Filters(), target)
    assert target.read_text() == "precious\n"
    export(archive, Filters(), target, force=True)
    assert target.read_text().startswith("detection_id,source,night")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["keep.csv"]  # no temp file left


def test_failed_export_leaves_nothing(
    filled_archive: Any, tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    archive, _ = filled_archive
    real = archive.iter_values

    def broken(*args: Any, **kwargs: Any) -> Any:
        for i, rec in enumerate(real(*args, **kwargs)):
            if i == 5:
                raise RuntimeError("disk vanished")
            yield rec

    monkeypatch.setattr(archive, "iter_values", broken)
    with pytest.raises(RuntimeError):
        export(archive, Filters(), tmp_path / "half.ecsv")
    assert list(tmp_path.iterdir()) == []


def test_atomic_output_never_clobbers_a_file_that_appears_meanwhile(tmp_path: Path) -> None:
    target = tmp_path / "race.csv"
    with (
        pytest.raises(ExportError, match="already exists"),
        atomic_output(target, force=False) as out,
    ):
        out.write("mine\n")
        target.write_text("theirs\n")
    assert target.read_text() == "theirs\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["race.csv"]


def test_unknown_suffix_and_archive_itself_are_refused(tmp_path: Path) -> None:
    with pytest.raises(ExportError, match=r"unknown export suffix '\.txt'"):
        format_for(tmp_path / "x.txt")
    assert format_for("X.VOT") == "votable" and format_for("a.xml") == "votable"
    url = str(tmp_path / "self.json")
    fill_archive(url, range(1))[0].close()
    before = Path(url).read_bytes()
    with (
        Archive.open(url, readonly=True) as archive,
        pytest.raises(ExportError, match="is the archive itself"),
    ):
        export(archive, Filters(), url, force=True)
    assert Path(url).read_bytes() == before


def test_with_derived_adds_the_physics_columns(filled_archive: Any, tmp_path: Path) -> None:
    derived = pytest.importorskip("speccat.physics.derived")
    archive, _ = filled_archive
    target = tmp_path / "d.json"
    export(archive, Filters.parse({"line": "H109a"}), target, derived=True)
    data = json.loads(target.read_text(encoding="utf-8"))
    records = list(archive.iter_detections(Filters.parse({"line": "H109a"})))
    assert len(data) == len(records) > 0
    for row, rec in zip(data, records, strict=True):
        expected = derived.derived_quantities(rec)
        for name in derived.DERIVED_COLUMNS:
            value = expected[name]
            if value is not None and not math.isfinite(value):
                value = None
            assert row[name] == value


def test_votable_survives_markup_and_control_characters(tmp_path: Path) -> None:
    import dataclasses

    from archive_fixtures import make_file

    from speccat.model import FileResult

    good = make_file(3, n_spectra=1)
    sres = good.spectra[0]
    odd = dataclasses.replace(sres.spectrum, source='Odd\x01Name <&> "q"')
    result = FileResult(
        good.path, good.size_bytes, good.sha256, (dataclasses.replace(sres, spectrum=odd),)
    )
    with Archive.open(str(tmp_path / "o.sqlite"), create=True) as archive:
        archive.store_file(archive.begin_run({}), result, "n")
        export(archive, Filters(), tmp_path / "o.vot")
        export(archive, Filters(), tmp_path / "o.ecsv")
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        table = (
            parse_votable(str(tmp_path / "o.vot"), verify="exception").get_first_table().to_table()
        )
    assert set(table["source"]) == {'Odd\ufffdName <&> "q"'}  # XML 1.0 cannot hold U+0001
    assert set(Table.read(tmp_path / "o.ecsv", format="ascii.ecsv")["source"]) == {
        'Odd\x01Name <&> "q"'
    }


def test_one_intensity_unit_becomes_column_units(tmp_path: Path) -> None:
    import dataclasses

    from archive_fixtures import make_file

    from speccat.model import FileResult

    with Archive.open(str(tmp_path / "k.sqlite"), create=True) as archive:
        run_id = archive.begin_run({})
        for seed in range(3):
            f = make_file(seed)
            spectra = tuple(
                dataclasses.replace(s, spectrum=dataclasses.replace(s.spectrum, intensity_unit="K"))
                for s in f.spectra
            )
            archive.store_file(run_id, FileResult(f.path, f.size_bytes, f.sha256, spectra), "n")
        assert archive.intensity_units() == ["K"]
        export(archive, Filters(), tmp_path / "k.ecsv")
        export(archive, Filters(), tmp_path / "k.vot")
    for fmt in ("ascii.ecsv", "votable"):
        table = Table.read(
            tmp_path / f"k.{fmt.split('.')[-1].replace('votable', 'vot')}", format=fmt
        )
        # astropy's own unit algebra is the reference: K times km/s
        import astropy.units as u

        assert table["peak"].unit == u.K and table["rms"].unit == u.K
        assert table["integral"].unit == u.K * u.km / u.s
        assert table["v_lsr_kms"].unit == u.km / u.s


def test_mixed_intensity_units_leave_those_columns_without_unit(
    filled_archive: Any, tmp_path: Path
) -> None:
    archive, _ = filled_archive
    assert archive.intensity_units() == ["Jy", "K"]
    export(archive, Filters(), tmp_path / "m.ecsv")
    table = Table.read(tmp_path / "m.ecsv", format="ascii.ecsv")
    assert table["peak"].unit is None and table["integral"].unit is None
