"""The archive's column widths live in one SQLAlchemy-free module (``archive.widths``) that the
schema is built from and the ingest workers clip rows with, so a worker never imports SQLAlchemy."""

from __future__ import annotations

import subprocess
import sys

from sqlalchemy import String

from speccat.archive import schema, widths


def test_row_building_imports_no_sqlalchemy() -> None:
    code = "import speccat.archive.rows, sys; print('sqlalchemy' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"


def test_schema_string_columns_are_the_widths_module() -> None:
    """One source of truth: every String(n) column of the schema has exactly its width."""
    assert set(widths.STRING_LENGTHS) <= set(schema.metadata.tables)
    for name, table in schema.metadata.tables.items():
        found = {
            c.name: c.type.length
            for c in table.columns
            if isinstance(c.type, String) and c.type.length is not None
        }
        assert found == dict(widths.STRING_LENGTHS.get(name, {})), name
    assert schema.string_lengths is widths.string_lengths  # what the writer clips with


def test_clip_strings_cuts_to_the_column_and_says_so() -> None:
    n = widths.string_lengths("spectra")["source"]
    row = {"source": "S" * (n + 50), "telescope": "T", "flags": "x" * 999}
    assert widths.clip_strings("spectra", row)
    assert row == {"source": "S" * n, "telescope": "T", "flags": "x" * 999}  # Text: unbounded
    assert not widths.clip_strings("spectra", row)
    assert not schema.clip_strings(schema.spectra, {"source": "S" * n})
    assert schema.clip_strings(schema.spectra, {"source": "S" * (n + 1)})
