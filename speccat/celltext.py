"""Cell text for the exports: floats as ``repr`` (the shortest text that reads back to the same
float64), unknown values as empty text, made a column at a time; CSV, ECSV and XML quoting.

``repr`` costs about 1 µs per float, which made the floats most of a large export's time.
``float_texts`` gets the same text for a whole column from orjson's float writer (shortest
round-trip digits, about 30 ns each) and rewrites the two notations in which it differs from
``repr``: a decimal exponent of -5 written out in full (``0.00004415``, where repr writes
``4.415e-05``), and one-digit negative exponents (``6e-6`` for ``6e-06``). Any other value
orjson cannot write exactly like repr (NaN, infinities, non-float objects) sends its column
through ``text`` instead; orjson writes ints as ``str`` does.
"""

from __future__ import annotations

import re
from collections.abc import Callable, Iterator, Sequence
from typing import Any
from xml.sax.saxutils import escape

import orjson

# orjson writes decimal exponents -6 to -9 with one digit ("6e-6"); repr pads them to two
_ONE_DIGIT_EXPONENTS = [(f"e-{d},".encode(), f"e-0{d},".encode()) for d in range(6, 10)]
# ... and writes the decade of exponent -5 out in full ("0.00004415"; repr: "4.415e-05")
_FIFTH_DECADE = ("0.0000", "-0.0000")
_NUMBER_BYTES = b"0123456789.e+-nul,"  # all that orjson writes for numbers and None


def text(value: Any) -> str:
    """One cell as text: '' for unknown, repr for floats (exact round trip), else str."""
    if value is None:
        return ""
    if isinstance(value, float):
        return repr(float(value))  # float(): numpy's float64 has a repr of its own
    return str(value)


def float_texts(values: Sequence[Any]) -> list[str]:
    """``text`` of every value of a float column ('' for None), computed in bulk."""
    texts = _number_texts(values)
    return [text(v) for v in values] if texts is None else texts


def _number_texts(values: Sequence[Any]) -> list[str] | None:
    """``text`` of floats, ints and None in bulk; None if there is anything else (text,
    bools, NaN, infinities, numpy scalars, ints beyond 64 bits)."""
    values = list(values)
    if not values:
        return []
    try:
        raw = orjson.dumps(values)
    except TypeError:
        return None
    if raw[1:-1].translate(None, _NUMBER_BYTES):  # text or bools among the numbers
        return None
    nulls = raw.count(b"null")
    if nulls and nulls != values.count(None):  # NaN or infinity, which orjson nulls
        return None
    body = raw[1:-1] + b","  # every cell now ends with a separator
    if b"e-" in body:
        for old, new in _ONE_DIGIT_EXPONENTS:
            body = body.replace(old, new)
    if nulls:
        body = body.replace(b"null", b"")
    cells = body.decode("ascii").split(",")
    cells.pop()  # after the last separator
    if b"0.0000" in body:
        cells = [repr(float(c)) if c.startswith(_FIFTH_DECADE) else c for c in cells]
    return cells


_CSV_SPECIAL = (",", '"', "\r", "\n")


def _csv_field(cell: str) -> str:
    """One field with RFC 4180's quoting: in quotes, quotes doubled, when it holds a comma,
    a quote, CR or LF (the csv module's minimal quoting; before Python 3.12 it left a lone
    CR unquoted when the lines end in LF)."""
    if any(ch in cell for ch in _CSV_SPECIAL):
        return '"' + cell.replace('"', '""') + '"'
    return cell


def csv_texts(values: Sequence[Any]) -> list[str]:
    """The CSV fields of a column of text or ints ('' for None), quoted where needed."""
    if None in values:
        values = ["" if v is None else v for v in values]
    try:
        joined = "\0".join(values)
    except TypeError:  # not all text
        return [_csv_field(text(v)) for v in values]
    if any(ch in joined for ch in _CSV_SPECIAL):
        return [_csv_field(v) for v in values]
    return list(values)


_NUMBER_KINDS = ("float", "int")


def row_cells(
    rows: Sequence[Sequence[Any]],
    kinds: Sequence[str],
    text_column: Callable[[Sequence[Any]], list[str]],
    empty: str = "",
) -> Iterator[tuple[str, ...]]:
    """The rows' cells as text, made a column at a time: columns of kind "float" or "int" as
    ``float_texts`` makes them (``empty`` for None), any other column, and a number column
    holding anything but numbers, by ``text_column``. Rows longer than ``kinds`` are cut."""
    columns = list(zip(*rows, strict=False))[: len(kinds)]
    cells = []
    for values, kind in zip(columns, kinds, strict=True):
        texts = _number_texts(values) if kind in _NUMBER_KINDS else None
        if texts is None:
            texts = text_column(values)
        elif empty and "" in texts:
            texts = [t or empty for t in texts]
        cells.append(texts)
    return zip(*cells, strict=True)


def csv_lines(rows: Sequence[Sequence[Any]], kinds: Sequence[str]) -> str:
    """``rows`` as CSV lines ending in LF, the bytes csv.writer writes (minimal quoting,
    None as an empty field; see ``row_cells``)."""
    if not rows:
        return ""
    return "\n".join(map(",".join, row_cells(rows, kinds, csv_texts))) + "\n"


# ---- ECSV and VOTable cells --------------------------------------------------------------
def ecsv_cell(value: Any) -> str:
    """A cell of ECSV's space-separated data: quoted when empty, holding a space, quote,
    tab, CR or LF, or starting with "#"."""
    s = text(value)
    if s == "" or any(ch in s for ch in ' "\t\n\r') or s.startswith("#"):
        return '"' + s.replace('"', '""') + '"'
    return s


def ecsv_texts(values: Sequence[Any]) -> list[str]:
    return list(map(ecsv_cell, values))


_XML_ILLEGAL = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\ufffe\uffff]")


def xml_text(value: Any) -> str:
    """Cell text for XML: escaped, with characters XML 1.0 forbids replaced by U+FFFD."""
    return escape(_XML_ILLEGAL.sub("\ufffd", text(value)))


def xml_texts(values: Sequence[Any]) -> list[str]:
    return list(map(xml_text, values))
