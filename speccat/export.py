"""Writing detection records to CSV, ECSV, VOTable and JSON, streamed and atomically.

Rows are written as they come from the archive, a chunk at a time (constant memory; a large
CSV of a SQLite archive is formatted by worker processes, see "parallel CSV"); the file is
written under a temporary name in the target folder and renamed at the end, so a failed export
leaves nothing behind, and an existing file is never replaced unless ``force``. Floats are
written as ``repr`` writes them (shortest text that reads back to the same float64; made a
column at a time, see ``speccat.celltext``), in JSON with the same digits by orjson; unknown
values are empty fields (CSV, ECSV), empty cells (VOTable) or ``null`` (JSON). ECSV and VOTable carry
units and descriptions as column metadata and the provenance (speccat version, archive URL with
the password hidden, filters, UTC time of export) in their header.
"""

from __future__ import annotations

import contextlib
import csv
import importlib
import io
import itertools
import json
import math
import multiprocessing
import os
import tempfile
import threading
import warnings
from collections import deque
from collections.abc import Callable, Iterable, Iterator, Mapping, Sequence
from concurrent.futures import Future, ProcessPoolExecutor
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path
from typing import IO, Any, TextIO
from xml.sax.saxutils import escape, quoteattr

import orjson

from speccat import __version__
from speccat.archive import EXPORT_COLUMNS, Archive, Filters
from speccat.archive.engine import sqlite_path
from speccat.archive.records import DESCRIPTIONS, INT_COLUMNS, RECORD_NAMES, STRING_COLUMNS, UNITS
from speccat.celltext import csv_lines, ecsv_texts, row_cells, xml_texts
from speccat.errors import ExportError

FORMATS: dict[str, str] = {
    ".csv": "csv",
    ".ecsv": "ecsv",
    ".vot": "votable",
    ".xml": "votable",
    ".json": "json",
}
_WITH_UNITS = ("ecsv", "votable")  # the formats with units as column metadata


@dataclass(frozen=True)
class Column:
    """One output column: name, kind (``int``/``float``/``str``), unit and description."""

    name: str
    kind: str
    unit: str = ""
    description: str = ""


def format_for(path: str | Path) -> str:
    """The export format implied by the file suffix; ExportError for anything else."""
    suffix = Path(path).suffix.lower()
    if suffix not in FORMATS:
        known = ", ".join(FORMATS)
        raise ExportError(
            f"{path}: unknown export suffix {suffix or '(none)'!r}; use one of {known}"
        )
    return FORMATS[suffix]


_INTENSITY = ("peak", "peak_err", "rms")
_INTEGRAL = ("integral", "integral_err")


def intensity_units(unit: str | None) -> dict[str, str]:
    """Units of the intensity-valued columns when every row shares ``unit`` (astropy strings);
    empty when the unit is mixed, missing or not one astropy understands."""
    if not unit:
        return {}
    import astropy.units as u  # deferred: only exports with one intensity unit need it

    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # odd header units are simply left out
            base = u.Unit(unit)
    except (ValueError, TypeError):
        return {}
    integral = (base * u.km / u.s).to_string()
    return {**dict.fromkeys(_INTENSITY, base.to_string()), **dict.fromkeys(_INTEGRAL, integral)}


def export_columns(with_derived: bool = False, intensity_unit: str | None = None) -> list[Column]:
    """The output columns; ``intensity_unit`` (when all rows share it) gives peak, rms and
    integral their units."""
    units = {**UNITS, **intensity_units(intensity_unit)}
    cols = [
        Column(
            name,
            "int" if name in INT_COLUMNS else "str" if name in STRING_COLUMNS else "float",
            units.get(name, ""),
            DESCRIPTIONS.get(name, ""),
        )
        for name in EXPORT_COLUMNS
    ]
    if with_derived:
        module = _derived_module()
        derived_units: Mapping[str, str] = getattr(module, "DERIVED_UNITS", {})
        cols += [Column(n, "float", derived_units.get(n, "")) for n in module.DERIVED_COLUMNS]
    return cols


def _vounit(unit: str) -> str | None:
    """An astropy unit string in the VOUnit syntax of VOTable, None when it has none."""
    import astropy.units as u

    try:
        return str(u.Unit(unit).to_string("vounit"))
    except (ValueError, TypeError):
        return None


def _derived_module() -> Any:
    # Deferred import: only --with-derived needs the physics (and its astropy.coordinates).
    return importlib.import_module("speccat.physics.derived")


def with_derived(rows: Iterable[list[Any]]) -> Iterator[list[Any]]:
    """Export rows (``RECORD_NAMES`` order) extended by the ``DERIVED_COLUMNS`` values of
    ``speccat.physics.derived.derived_quantities`` (non-finite values become None)."""
    module = _derived_module()
    derive: Callable[[Mapping[str, Any]], Mapping[str, Any]] = module.derived_quantities
    names: Sequence[str] = module.DERIVED_COLUMNS
    for values in rows:
        extra = derive(dict(zip(RECORD_NAMES, values, strict=True)))
        out = values[: len(EXPORT_COLUMNS)]
        for name in names:
            v = extra.get(name)
            out.append(v if not isinstance(v, float) or math.isfinite(v) else None)
        yield out


def provenance(archive_url: str, filters: Filters) -> dict[str, Any]:
    return {
        "speccat_version": __version__,
        "archive": archive_url,
        "filters": filters.describe(),
        "exported_utc": datetime.now(UTC).strftime("%Y-%m-%dT%H:%M:%SZ"),
    }


# ---- writers: ``rows`` are sequences aligned with ``columns`` ------------------------------
_CHUNK = 5000  # rows formatted together, a column at a time


def _chunked(rows: Iterable[Sequence[Any]]) -> Iterator[list[Sequence[Any]]]:
    it = iter(rows)
    return iter(lambda: list(itertools.islice(it, _CHUNK)), [])


def write_csv(
    out: IO[str], rows: Iterable[Sequence[Any]], columns: Sequence[Column], meta: Mapping[str, Any]
) -> int:
    _csv_header(out, columns)
    return _csv_chunks(out, _chunked(rows), columns)


def _csv_header(out: IO[str], columns: Sequence[Column]) -> None:
    csv.writer(out, lineterminator="\n").writerow([c.name for c in columns])


def _csv_chunks(
    out: IO[str], chunks: Iterable[Sequence[Sequence[Any]]], columns: Sequence[Column]
) -> int:
    kinds = [c.kind for c in columns]
    n = 0
    for chunk in chunks:
        out.write(csv_lines(chunk, kinds))
        n += len(chunk)
    return n


def write_json(
    out: IO[str], rows: Iterable[Sequence[Any]], columns: Sequence[Column], meta: Mapping[str, Any]
) -> int:
    # one object per line; orjson writes floats with the shortest digits that read back
    # exactly (about 30 times faster than json's repr), NaN and infinities as null
    names = [c.name for c in columns]
    out.write("[")
    n = 0
    for chunk in _chunked(rows):
        out.write(",\n" if n else "\n")
        objects = (orjson.dumps(dict(zip(names, v, strict=False)), default=str) for v in chunk)
        out.write(b",\n".join(objects).decode("utf-8"))
        n += len(chunk)
    out.write("\n]\n")
    return n


def ecsv_header(columns: Sequence[Column], meta: Mapping[str, Any]) -> str:
    """The ECSV header (and column-name row) as astropy writes it for these columns."""
    from astropy.table import Table  # deferred: astropy.table is slow to import

    dtypes = {"int": "int64", "float": "float64", "str": "str"}
    table = Table(names=[c.name for c in columns], dtype=[dtypes[c.kind] for c in columns])
    for c in columns:
        if c.unit:
            table[c.name].unit = c.unit
        if c.description:
            table[c.name].description = c.description
    table.meta.update(meta)
    buf = io.StringIO()
    table.write(buf, format="ascii.ecsv")
    return buf.getvalue()


def write_ecsv(
    out: IO[str],
    rows: Iterable[Sequence[Any]],
    columns: Sequence[Column],
    meta: Mapping[str, Any],
) -> int:
    out.write(ecsv_header(columns, meta))
    kinds = [c.kind for c in columns]
    n = 0
    for chunk in _chunked(rows):
        for cells in row_cells(chunk, kinds, ecsv_texts, empty='""'):
            out.write(" ".join(cells))
            out.write("\n")
        n += len(chunk)
    return n


_VOTYPES = {
    "int": 'datatype="long"',
    "float": 'datatype="double"',
    "str": 'datatype="unicodeChar" arraysize="*"',
}


def votable_header(columns: Sequence[Column], meta: Mapping[str, Any]) -> str:
    lines = [
        '<?xml version="1.0" encoding="utf-8"?>',
        '<VOTABLE version="1.4" xmlns="http://www.ivoa.net/xml/VOTable/v1.3">',
        ' <RESOURCE type="results">',
    ]
    for key, value in meta.items():
        shown = value if isinstance(value, str) else json.dumps(value, ensure_ascii=False)
        lines.append(f"  <INFO name={quoteattr(key)} value={quoteattr(shown)}/>")
    lines += ['  <TABLE name="detections">', "   <DESCRIPTION>speccat detections</DESCRIPTION>"]
    for c in columns:
        attrs = f"name={quoteattr(c.name)} {_VOTYPES[c.kind]}"
        vounit = _vounit(c.unit) if c.unit else None
        if vounit:
            attrs += f" unit={quoteattr(vounit)}"
        desc = f"<DESCRIPTION>{escape(c.description)}</DESCRIPTION>" if c.description else ""
        lines.append(f"   <FIELD {attrs}>{desc}</FIELD>")
    lines += ["   <DATA>", "    <TABLEDATA>"]
    return "\n".join(lines) + "\n"


_VOTABLE_FOOTER = "    </TABLEDATA>\n   </DATA>\n  </TABLE>\n </RESOURCE>\n</VOTABLE>\n"


def write_votable(
    out: IO[str],
    rows: Iterable[Sequence[Any]],
    columns: Sequence[Column],
    meta: Mapping[str, Any],
) -> int:
    out.write(votable_header(columns, meta))
    kinds = [c.kind for c in columns]
    n = 0
    for chunk in _chunked(rows):
        for cells in row_cells(chunk, kinds, xml_texts):
            out.write(f"     <TR><TD>{'</TD><TD>'.join(cells)}</TD></TR>\n")
        n += len(chunk)
    out.write(_VOTABLE_FOOTER)
    return n


WRITERS: dict[
    str, Callable[[IO[str], Iterable[Sequence[Any]], Sequence[Column], Mapping[str, Any]], int]
] = {
    "csv": write_csv,
    "ecsv": write_ecsv,
    "votable": write_votable,
    "json": write_json,
}


# ---- files -------------------------------------------------------------------------------------
@contextlib.contextmanager
def atomic_output(path: Path, force: bool) -> Iterator[TextIO]:
    """A text stream to a temporary file beside ``path``, moved into place on success."""
    if path.exists() and not force:
        raise ExportError(f"{path} already exists; use --force to overwrite it")
    if path.is_dir():
        raise ExportError(f"{path} is a folder")
    folder = path.parent
    if not folder.is_dir():
        raise ExportError(f"{path}: folder {folder} does not exist")
    try:
        fd, tmp_name = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".part", dir=folder)
    except OSError as exc:
        raise ExportError(f"{path}: cannot write in {folder} ({exc.strerror})") from None
    tmp = Path(tmp_name)
    try:
        with os.fdopen(fd, "w", encoding="utf-8", newline="") as stream:
            yield stream
        umask = os.umask(0)
        os.umask(umask)
        tmp.chmod(0o666 & ~umask)
        _place(tmp, path, force)
    finally:
        tmp.unlink(missing_ok=True)


def _place(tmp: Path, path: Path, force: bool) -> None:
    if force:
        os.replace(tmp, path)
        return
    try:
        os.link(tmp, path)  # fails if the target appeared meanwhile: never clobber
    except FileExistsError:
        raise ExportError(f"{path} already exists; use --force to overwrite it") from None
    except OSError:
        if path.exists():
            raise ExportError(f"{path} already exists; use --force to overwrite it") from None
        os.replace(tmp, path)


def export(
    archive: Archive,
    filters: Filters,
    path: str | Path,
    *,
    force: bool = False,
    derived: bool = False,
    sort: str = "detection_id",
    descending: bool = False,
    batch: int = 5000,
    jobs: int | None = None,
) -> int:
    """Write every detection matching ``filters`` to ``path`` (format from its suffix);
    returns the number of rows written. A large CSV of a SQLite archive in id order is
    formatted by ``jobs`` worker processes (default: one per CPU, see ``export_workers``)."""
    target = Path(path)
    fmt = format_for(target)
    db_file = sqlite_path(archive.target)
    if (
        db_file is not None
        and db_file.exists()
        and target.exists()
        and target.resolve() == db_file.resolve()
    ):
        raise ExportError(f"{target} is the archive itself; choose another output file")
    # only ECSV and VOTable carry units (a scan of the matching spectra: 0.3 s at 1M rows)
    units = archive.intensity_units(filters) if fmt in _WITH_UNITS else []
    columns = export_columns(derived, units[0] if len(units) == 1 else None)
    meta = provenance(archive.url, filters)
    pieces = None
    if fmt == "csv" and not derived and sort == "detection_id" and not descending:
        pieces = _pieces(archive, filters, export_workers(jobs))
    if pieces is not None:
        with atomic_output(target, force) as out:
            return _write_csv_parallel(out, archive.target, filters, columns, *pieces)
    if fmt == "csv" and not derived:
        chunks = archive.iter_value_chunks(
            filters, sort=sort, descending=descending, batch=batch, exported_only=True
        )
        with atomic_output(target, force) as out:
            _csv_header(out, columns)
            return _csv_chunks(out, chunks, columns)
    rows: Iterable[list[Any]] = archive.iter_values(
        filters, sort=sort, descending=descending, batch=batch
    )
    if derived:
        rows = with_derived(rows)
    with atomic_output(target, force) as out:
        return WRITERS[fmt](out, rows, columns, meta)


# ---- parallel CSV ------------------------------------------------------------------------------
# Formatting floats (repr) and building the rows' Python objects is CPU-bound, so a large CSV
# export of a SQLite archive is cut into detection-id ranges that worker processes read (each
# with its own read-only connection) and format; the parent writes the pieces in id order,
# holding at most two pieces per worker (flat memory). Rows and bytes are those of the
# sequential path.
PARALLEL_MIN_ROWS = 200_000  # fewer matching rows: one process
PIECE_IDS = 25_000  # detection ids per piece
MAX_JOBS = 4
_WORKER_ARCHIVES: dict[str, Archive] = {}


def export_workers(jobs: int | None) -> int:
    """Worker processes for a parallel export: ``jobs`` when given, else one per CPU (at most
    MAX_JOBS) when the process may fork safely (one thread: never from inside the TUI)."""
    if "fork" not in multiprocessing.get_all_start_methods():
        return 1
    if jobs is not None:
        return max(1, jobs)
    if threading.active_count() > 1:
        return 1
    return min(MAX_JOBS, len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else 1)


def _pieces(
    archive: Archive, filters: Filters, workers: int
) -> tuple[list[tuple[int, int]], int] | None:
    """(id ranges, workers) for a parallel CSV export, or None for the sequential path."""
    if workers < 2 or sqlite_path(archive.target) is None:
        return None
    if archive.count(filters) < PARALLEL_MIN_ROWS:
        return None
    bounds = archive.id_bounds(filters)
    if bounds is None:
        return None
    lo, hi = bounds
    return [(a, min(a + PIECE_IDS, hi + 1)) for a in range(lo, hi + 1, PIECE_IDS)], workers


def _csv_piece(
    target: str, filters: Filters, id_range: tuple[int, int], columns: Sequence[Column]
) -> tuple[int, bytes]:
    """Worker: (rows, UTF-8 CSV lines) of the matching rows with ids in ``id_range``; bytes,
    which cross the pipe and reach the file without being decoded and encoded again."""
    archive = _WORKER_ARCHIVES.get(target)
    if archive is None:
        archive = _WORKER_ARCHIVES[target] = Archive.open(target, readonly=True)
    buf = io.StringIO()
    chunks = archive.iter_value_chunks(filters, id_range=id_range, exported_only=True)
    n = _csv_chunks(buf, chunks, columns)
    return n, buf.getvalue().encode("utf-8")


def _write_csv_parallel(
    out: TextIO,
    target: str,
    filters: Filters,
    columns: Sequence[Column],
    ranges: list[tuple[int, int]],
    workers: int,
) -> int:
    _csv_header(out, columns)
    out.flush()  # the pieces go to the byte stream beneath
    context = multiprocessing.get_context("fork")
    n = 0
    with ProcessPoolExecutor(workers, mp_context=context) as pool:
        todo = iter(ranges)
        pending: deque[Future[tuple[int, bytes]]] = deque(
            pool.submit(_csv_piece, target, filters, r, columns)
            for r in itertools.islice(todo, 2 * workers)
        )
        try:
            while pending:
                rows, data = pending.popleft().result()
                out.buffer.write(data)
                n += rows
                for r in itertools.islice(todo, 1):
                    pending.append(pool.submit(_csv_piece, target, filters, r, columns))
        except BaseException:
            pool.shutdown(wait=True, cancel_futures=True)
            raise
    return n
