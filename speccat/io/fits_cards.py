"""A small, fast FITS header-card parser and a direct path for single-HDU images.

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


def simple_image(raw: bytes) -> tuple[dict[str, Any], np.ndarray | None] | None:
    """(keywords, data) of a file that is one primary image HDU and nothing else; None when the
    file has extensions or anything astropy should look at (random groups)."""
    keys, start = parse_header(raw, 0)
    if keys.get("SIMPLE") is not True or keys.get("GROUPS") is True:
        return None
    size = data_size(keys)
    if start + size > len(raw):
        raise ReadProblem("file truncated")
    after = start + -(-size // BLOCK) * BLOCK
    if raw[after : after + 8] == b"XTENSION":
        return None
    if size == 0:
        return keys, None
    naxes = [keys[f"NAXIS{i}"] for i in range(keys["NAXIS"], 0, -1)]
    data = np.frombuffer(raw, _DTYPES[keys["BITPIX"]], count=int(np.prod(naxes)), offset=start)
    return keys, scale(data.reshape(naxes), keys)


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
