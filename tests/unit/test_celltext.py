"""The bulk cell text of the exports is exactly what Python's own ``repr`` and ``csv`` module
write: the shortest round-trip float text, and minimal CSV quoting."""

from __future__ import annotations

import csv
import io
import math
import struct
from typing import Any

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from speccat.celltext import csv_lines, float_texts, text

# every float64 there is, NaN and infinities included, and some None
floats_or_none = st.one_of(st.none(), st.floats(allow_nan=True, allow_infinity=True))


def _reference_csv(rows: list[tuple[Any, ...]], width: int) -> str:
    """What csv.writer writes for the rows (the standard library's writer), floats as repr
    text, with RFC 4180's quoting of fields holding a comma, quote, CR or LF: the writer is
    given CRLF line ends so that it quotes both CR and LF on every Python version, and each
    line then ends in LF as the exports write it."""
    lines = []
    for row in rows:
        buf = io.StringIO()
        csv.writer(buf, lineterminator="\r\n").writerow(
            [repr(v) if isinstance(v, float) else v for v in row[:width]]
        )
        lines.append(buf.getvalue().removesuffix("\r\n") + "\n")
    return "".join(lines)


@settings(max_examples=300)
@given(st.lists(floats_or_none, max_size=40))
def test_float_texts_are_repr(values: list[float | None]) -> None:
    assert float_texts(values) == ["" if v is None else repr(v) for v in values]


def test_float_texts_are_repr_in_every_decade() -> None:
    # the notations orjson and repr write differently sit at decimal exponents -5 to -9;
    # random bit patterns cover the rest of the range, subnormals and both signs
    rng = np.random.default_rng(11)
    mantissa = rng.uniform(1.0, 10.0, 20_000)
    exponent = rng.integers(-320, 308, 20_000)
    decades = (mantissa * 10.0 ** exponent.astype(float)).tolist()
    small = [float(f"{m}e{e}") for m in (1, 1.5, 9.999, 4.415974940009172) for e in range(-12, 0)]
    edges = [1e-4, 9.999999999999999e-05, 1e-5, 1e15, 1e16, 10.00001, -10.00001, 100.000012]
    bits = rng.integers(0, 2**63, 20_000, dtype=np.uint64).tolist()
    patterns = [struct.unpack("<d", struct.pack("<Q", b))[0] for b in bits]
    values = [-v for v in decades + small + edges] + decades + small + edges + patterns
    values = [v for v in values if math.isfinite(v)]
    assert float_texts(values) == [repr(v) for v in values]


def test_float_texts_keeps_what_repr_would_write_for_odd_values() -> None:
    # NaN and infinities (orjson writes null), ints, numpy's float64 (repr of the float)
    assert float_texts([math.nan, 1.5, None]) == ["nan", "1.5", ""]
    assert float_texts([math.inf, -math.inf]) == ["inf", "-inf"]
    assert float_texts([3, None, 2.5]) == ["3", "", "2.5"]
    assert float_texts([np.float64(0.1), 2.0]) == ["0.1", "2.0"]
    assert text(np.float64(0.1)) == "0.1"
    assert float_texts([]) == []


cell = st.one_of(
    st.none(),
    st.integers(-(2**70), 2**70),
    st.floats(allow_nan=True, allow_infinity=True),
    st.text(alphabet=st.sampled_from('ab,"\r\n é\t#'), max_size=6),
)


@settings(max_examples=200)
@given(st.lists(st.lists(cell, min_size=5, max_size=5), min_size=1, max_size=8))
def test_csv_lines_equal_the_csv_module(rows: list[list[Any]]) -> None:
    # kinds as the export columns give them; a column declared float may hold anything
    kinds = ["int", "float", "str", "float", "str"]
    assert csv_lines(rows, kinds[:4]) == _reference_csv([tuple(r) for r in rows], 4)
    assert csv_lines(rows, kinds) == _reference_csv([tuple(r) for r in rows], 5)


def test_csv_lines_quote_only_what_needs_it() -> None:
    rows = [(1, 'say "hi"', 2.5, "a,b", None), (2, "plain", None, "line\nbreak", "x\ry")]
    assert csv_lines(rows, ["int", "str", "float", "str", "str"]) == _reference_csv(rows, 5)
    assert csv_lines([], ["int"]) == ""
