"""The writer's inserts: SQLAlchemy Core statements compiled once per dialect, run on the
driver's own cursor.

Going through the driver cursor (not ``Connection.execute``) skips SQLAlchemy's per-statement
cache lookup and result set-up, which cost more than the inserts themselves. The SQL text, the
parameter order and the bind processors (e.g. SQLite's DATETIME to text) are still SQLAlchemy's,
taken from the compiled statement and the column types, so what is stored is the same on both
engines as through Core.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass
from operator import itemgetter
from typing import Any

from sqlalchemy import Table, insert
from sqlalchemy.dialects import postgresql as pg_dialect
from sqlalchemy.dialects import sqlite as sqlite_dialect
from sqlalchemy.engine import Dialect

from speccat.archive.rows import (
    CANDIDATE_COLUMNS,
    CLIPPED_FLAG,
    DETECTION_COLUMNS,
    FLAGS_AT,
    SPECTRUM_COLUMNS,
    PreparedFile,
    joined,
)
from speccat.archive.schema import (
    candidates,
    detections,
    files,
    spectra,
    spectrum_data,
    string_lengths,
)

_FILE_COLUMNS = ("path", "size_bytes", "sha256", "run_id", "night")


@dataclass(frozen=True)
class _Insert:
    """One compiled INSERT: its SQL text, parameter names in order and bind processors."""

    sql: str
    keys: tuple[str, ...]  # the order in which ``params`` takes a row's values
    positional: bool
    processors: tuple[tuple[int, Callable[[Any], Any]], ...]
    order: Callable[[Sequence[Any]], tuple[Any, ...]] | None  # keys order -> SQL order

    @classmethod
    def compile(cls, stmt: Any, table: Table, keys: tuple[str, ...], dialect: Dialect) -> _Insert:
        compiled = stmt.compile(dialect=dialect, column_keys=list(keys))
        order = None
        if compiled.positional:
            in_sql = tuple(compiled.positiontup)
            if sorted(in_sql) != sorted(keys):
                raise RuntimeError(f"unexpected parameters for {table.name}: {in_sql}")
            if in_sql != keys:
                order = itemgetter(*(keys.index(k) for k in in_sql))
        procs = []
        for i, key in enumerate(keys):
            col_type = table.c[key].type.dialect_impl(dialect)
            proc = col_type.bind_processor(dialect)
            if proc is not None:
                procs.append((i, proc))
        return cls(str(compiled), keys, bool(compiled.positional), tuple(procs), order)

    def params(self, values: Sequence[Any]) -> Any:
        """Driver parameters of one row given in ``keys`` order."""
        if self.processors:
            out = list(values)
            for i, proc in self.processors:
                if out[i] is not None:
                    out[i] = proc(out[i])
            values = out
        if not self.positional:
            return dict(zip(self.keys, values, strict=True))
        return tuple(values) if self.order is None else self.order(values)


class InsertStatements:
    """The inserts that store a prepared file, compiled for one dialect."""

    def __init__(self, dialect: Dialect) -> None:
        mod: Any = sqlite_dialect if dialect.name == "sqlite" else pg_dialect
        file_keys = _FILE_COLUMNS
        self.file = _Insert.compile(
            mod.insert(files)
            .on_conflict_do_nothing(index_elements=["sha256"])
            .returning(files.c.id),
            files,
            file_keys,
            dialect,
        )
        spec_keys = ("file_id", "night", *SPECTRUM_COLUMNS)
        self.spectrum = _Insert.compile(
            insert(spectra).returning(spectra.c.id), spectra, spec_keys, dialect
        )
        data_keys = ("spectrum_id", "freq_hz", "data")
        self.data = _Insert.compile(insert(spectrum_data), spectrum_data, data_keys, dialect)
        det_keys = ("spectrum_id", "night", *DETECTION_COLUMNS)
        self.detection = _Insert.compile(
            insert(detections).returning(detections.c.id), detections, det_keys, dialect
        )
        cand_keys = ("detection_id", *CANDIDATE_COLUMNS)
        self.candidate = _Insert.compile(insert(candidates), candidates, cand_keys, dialect)

    def store(self, cursor: Any, run_id: int, prepared: PreparedFile, night: str) -> bool:
        """Insert a prepared file inside the caller's transaction; False (nothing written)
        when its SHA-256 is already archived."""
        file_night = night[: string_lengths("files")["night"]]
        cursor.execute(
            self.file.sql,
            self.file.params(
                (prepared.path, prepared.size_bytes, prepared.sha256, run_id, file_night)
            ),
        )
        found = cursor.fetchone()
        if found is None:
            return False
        file_id = int(found[0])
        spec_night = night[: string_lengths("spectra")["night"]]
        det_night = night[: string_lengths("detections")["night"]]
        night_clipped = spec_night != night
        data_rows = []
        cand_rows = []
        for ps in prepared.spectra:
            row = ps.row
            if night_clipped and CLIPPED_FLAG not in str(row[FLAGS_AT]).split(";"):
                row = (*row[:FLAGS_AT], joined((*str(row[FLAGS_AT]).split(";"), CLIPPED_FLAG)))
                row += ps.row[FLAGS_AT + 1 :]
            cursor.execute(self.spectrum.sql, self.spectrum.params((file_id, spec_night, *row)))
            spectrum_id = int(cursor.fetchone()[0])
            data_rows.append(self.data.params((spectrum_id, ps.freq_blob, ps.data_blob)))
            for det in ps.detections:
                cursor.execute(
                    self.detection.sql, self.detection.params((spectrum_id, det_night, *det.row))
                )
                detection_id = int(cursor.fetchone()[0])
                cand_rows += [self.candidate.params((detection_id, *c)) for c in det.candidates]
        if data_rows:
            cursor.executemany(self.data.sql, data_rows)
        if cand_rows:
            cursor.executemany(self.candidate.sql, cand_rows)
        return True
