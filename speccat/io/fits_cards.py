"""A small, fast FITS reader: header cards, image HDUs and fixed-width binary tables.

astropy.io.fits parses each card through its configuration machinery (~30 µs a card, several
milliseconds per file); reading thousands of spectra spends most of its time there. The FITS
standard 4.0 (Pence et al. 2010, A&A 524, A42, §4) fixes the card layout: 80 ASCII characters,
keyword in columns 1-8, ``= `` in 9-10 for a value, strings in single quotes with doubled
quotes inside, ``/`` starting a comment, END closing the header, 2880-byte blocks. Files this
module does not handle (extensions, random groups, anything unusual) go through astropy.
"""

from __future__ import annotations

import re
from typing import Any

import numpy as np

from speccat.io.keywords import ReadProblem

BLOCK = 2880
_INT = re.compile(r"^[+-]?\d+$")
_DTYPES = {8: ">u1", 16: ">i2", 32: ">i4", 64: ">i8", -32: ">f4", -64: ">f8"}


def _value(text: str) -> Any:
    text = text.strip()
    if not text:
        return None
    if text[0] == "'":
        out, i = [], 1
        while i < len(text):
            ch = text[i]
            if ch == "'":
                if text[i + 1 : i + 2] == "'":
                    out.append("'")
                    i += 2
                    continue
                break
            out.append(ch)
            i += 1
        return "".join(out).rstrip()
    body = text.split("/", 1)[0].strip()
    if body in ("T", "F"):
        return body == "T"
    if _INT.match(body):
        return int(body)
    try:
        return float(body.replace("D", "E").replace("d", "e"))
    except ValueError:
        return body or None


def parse_header(raw: bytes, start: int) -> tuple[dict[str, Any], int]:
    """Keywords of the header beginning at byte ``start`` and the offset where its data begin.

    Raises ReadProblem when the header runs past the end of the file or is not ASCII.
    """
    keys: dict[str, Any] = {}
    pos = start
    last = ""
    while True:
        block = raw[pos : pos + BLOCK]
        if len(block) < BLOCK:
            raise ReadProblem("file truncated (header without END)")
        try:
            text = block.decode("ascii")
        except UnicodeDecodeError:
            raise ReadProblem("FITS header is not ASCII") from None
        pos += BLOCK
        for k in range(0, BLOCK, 80):
            card = text[k : k + 80]
            key = card[:8].rstrip()
            if key == "END":
                return keys, pos
            if key == "CONTINUE" and isinstance(keys.get(last), str):
                prev: str = keys[last]
                more = _value(card[8:])
                if prev.endswith("&") and isinstance(more, str):
                    keys[last] = prev[:-1] + more
                continue
            if card[8:10] != "= " or not key or key in keys:
                continue
            keys[key] = _value(card[10:])
            last = key


def data_size(keys: dict[str, Any]) -> int:
    """Bytes of the data array the header describes (without padding)."""
    naxis = keys.get("NAXIS", 0)
    bitpix = keys.get("BITPIX")
    if not isinstance(naxis, int) or not 0 <= naxis <= 999 or bitpix not in _DTYPES:
        raise ReadProblem("FITS header has no valid NAXIS/BITPIX")
    if naxis == 0:
        return 0
    count = 1
    for i in range(1, naxis + 1):
        n = keys.get(f"NAXIS{i}")
        if not isinstance(n, int) or n < 0:
            raise ReadProblem(f"NAXIS{i} missing or not a count (NAXIS = {naxis})")
        count *= n
    gcount, pcount = keys.get("GCOUNT", 1), keys.get("PCOUNT", 0)
    if keys.get("XTENSION") and isinstance(gcount, int) and isinstance(pcount, int):
        count = gcount * (pcount + count)
    return abs(bitpix) // 8 * count


def scale(data: np.ndarray, keys: dict[str, Any]) -> np.ndarray:
    """Physical values: BLANK -> NaN for integer data, then BZERO + BSCALE x stored (float64)."""
    out = data.astype(np.float64)
    blank = keys.get("BLANK")
    if data.dtype.kind in "iu" and isinstance(blank, int):
        out[data == blank] = np.nan
    bscale, bzero = keys.get("BSCALE", 1.0), keys.get("BZERO", 0.0)
    if isinstance(bscale, int | float) and bscale != 1.0:
        out *= float(bscale)
    if isinstance(bzero, int | float) and bzero != 0.0:
        out += float(bzero)
    return out


class Unsupported(Exception):
    """A FITS feature this module leaves to astropy (variable-length arrays, scaled columns...)."""


_TFORM = re.compile(r"^\s*(\d*)\s*([LXBIJKAEDCM])\s*$")
_TDTYPES = {"L": "u1", "B": "u1", "I": ">i2", "J": ">i4", "K": ">i8", "E": ">f4", "D": ">f8"}
_TDTYPES |= {"C": ">c8", "M": ">c16"}


def layout(raw: bytes) -> list[tuple[str, dict[str, Any], int]]:
    """Every HDU as (kind, keywords, data offset); kind is 'image' or 'table'.

    Raises ReadProblem for truncation and Unsupported for HDUs astropy should read.
    """
    out: list[tuple[str, dict[str, Any], int]] = []
    pos = 0
    while pos < len(raw):
        if out and raw[pos : pos + 8] != b"XTENSION":
            break  # trailing padding or junk after the last HDU (the standard allows none)
        keys, start = parse_header(raw, pos)
        xtension = str(keys.get("XTENSION", "")).strip().upper()
        if not out and (keys.get("SIMPLE") is not True or keys.get("GROUPS") is True):
            raise Unsupported("not a plain primary HDU")
        if out and xtension not in ("IMAGE", "BINTABLE"):
            raise Unsupported(f"extension {xtension!r}")
        if xtension in ("IMAGE", "BINTABLE"):
            check_extension(keys, xtension)
        size = data_size(keys)
        if start + size > len(raw):
            raise ReadProblem("file truncated")
        if xtension == "BINTABLE" and keys.get("PCOUNT", 0) != 0:
            raise Unsupported("binary table with a heap")
        out.append(("table" if xtension == "BINTABLE" else "image", keys, start))
        pos = start + -(-size // BLOCK) * BLOCK
    return out


def check_extension(keys: dict[str, Any], xtension: str) -> None:
    """Mandatory keywords of an IMAGE or BINTABLE extension within the FITS standard 4.0
    limits (§7.1: PCOUNT = 0, GCOUNT = 1; §7.3: PCOUNT >= 0, GCOUNT = 1, 0 <= TFIELDS <= 999),
    checked here so no hostile value reaches the astropy fallback. Raises ReadProblem."""
    pcount, gcount = keys.get("PCOUNT", 0), keys.get("GCOUNT", 1)
    if gcount != 1 or isinstance(gcount, bool):
        raise ReadProblem(f"{xtension} extension has GCOUNT = {gcount!r} (must be 1)")
    if not isinstance(pcount, int) or isinstance(pcount, bool) or pcount < 0:
        raise ReadProblem(f"{xtension} extension has PCOUNT = {pcount!r} (must be >= 0)")
    if xtension == "IMAGE" and pcount != 0:
        raise ReadProblem(f"IMAGE extension has PCOUNT = {pcount} (must be 0)")
    if xtension == "BINTABLE":
        tfields = keys.get("TFIELDS")
        if not isinstance(tfields, int) or isinstance(tfields, bool) or not 0 <= tfields <= 999:
            raise ReadProblem(f"BINTABLE has TFIELDS = {tfields!r} (must be 0..999)")


def image(raw: bytes, keys: dict[str, Any], start: int) -> np.ndarray | None:
    """The physical values of an image HDU's data (None when it has none)."""
    naxis = keys.get("NAXIS", 0)
    if not naxis:
        return None
    naxes = [keys[f"NAXIS{i}"] for i in range(naxis, 0, -1)]
    if 0 in naxes:
        raise ReadProblem("zero-length axis")
    data = np.frombuffer(raw, _DTYPES[keys["BITPIX"]], count=int(np.prod(naxes)), offset=start)
    return scale(data.reshape(naxes), keys)


def table(
    raw: bytes, keys: dict[str, Any], start: int
) -> tuple[dict[str, np.ndarray], dict[str, str]]:
    """Columns of a binary-table HDU (name -> array over rows; vector cells shaped by TDIMn)
    and the columns' units; FITS standard 4.0 §7.3. Unsupported for scaled or heap columns."""
    nfields, nrows, width = keys.get("TFIELDS"), keys.get("NAXIS2"), keys.get("NAXIS1")
    if not all(isinstance(v, int) and v >= 0 for v in (nfields, nrows, width)):
        raise ReadProblem("binary table without valid TFIELDS/NAXIS1/NAXIS2")
    assert isinstance(nfields, int) and isinstance(nrows, int) and isinstance(width, int)
    names, formats, shapes, units = [], [], [], {}
    for n in range(1, nfields + 1):
        if f"TSCAL{n}" in keys or f"TZERO{n}" in keys:
            raise Unsupported("scaled column")
        m = _TFORM.match(str(keys.get(f"TFORM{n}", "")))
        if not m:
            raise Unsupported(f"TFORM{n}")
        repeat = int(m.group(1) or 1)
        code = m.group(2)
        name = str(keys.get(f"TTYPE{n}") or f"COL{n}").strip()
        if code == "A":
            fmt = f"S{repeat}" if repeat else "S1"
        elif code == "X":
            fmt = f"({-(-repeat // 8)},)u1"
        else:
            fmt = _TDTYPES[code] if repeat == 1 else f"({repeat},){_TDTYPES[code]}"
        names.append(name if name not in names else f"{name}_{n}")
        formats.append(fmt)
        shapes.append(_tdim(keys.get(f"TDIM{n}"), repeat) if code not in "AX" else None)
        unit = keys.get(f"TUNIT{n}")
        if isinstance(unit, str) and unit.strip():
            units[names[-1]] = unit.strip()
    dtype = np.dtype({"names": names, "formats": formats})
    if dtype.itemsize != width:
        raise ReadProblem(f"NAXIS1 = {width} but the columns take {dtype.itemsize} bytes")
    rows = np.frombuffer(raw, dtype, count=nrows, offset=start)
    columns: dict[str, np.ndarray] = {}
    for name, shape in zip(names, shapes, strict=True):
        col = rows[name]
        if shape is not None and col.ndim == 2:
            col = col.reshape((nrows, *shape))
        columns[name] = col
    return columns, units


def _tdim(value: Any, repeat: int) -> tuple[int, ...] | None:
    if not isinstance(value, str):
        return None
    try:
        dims = [int(p) for p in value.strip().strip("()").split(",")]
    except ValueError:
        raise ReadProblem(f"TDIM {value.strip()!r} is not a shape") from None
    if int(np.prod(dims)) != repeat or any(d <= 0 for d in dims):
        raise ReadProblem(f"TDIM {value.strip()!r} does not match the column's {repeat} values")
    return tuple(reversed(dims))
