"""Reading spectra: ``read(path) -> list[Spectrum]`` for every input convention of DESIGN.md.

One module per format, registered in :data:`FORMATS` by name: ``fits`` (image HDUs through
:mod:`speccat.io.fits_image`, binary tables through :mod:`speccat.io.fits_table`) and ``csv``
(:mod:`speccat.io.csv_text`); any of them may be gzip-compressed. The file is read into memory
once and never written to. Every failure, whatever its cause, leaves :func:`read` as a
:class:`~speccat.errors.SpectrumReadError` with a one-line reason.
"""

from __future__ import annotations

import io
import warnings
import zlib
from collections.abc import Callable
from dataclasses import dataclass
from functools import partial
from pathlib import Path
from typing import Any

import numpy as np

from speccat.errors import SpectrumReadError
from speccat.io import csv_text, fits_cards, fits_image, fits_table
from speccat.io.keywords import ReadProblem
from speccat.model import Spectrum

__all__ = ["FORMATS", "SUFFIXES", "Format", "read", "read_bytes"]

#: File name endings speccat reads (lower case; matching is case-insensitive).
SUFFIXES = (".fits", ".fit", ".fts", ".fits.gz", ".fit.gz", ".fts.gz", ".csv", ".csv.gz")
_FITS_SUFFIXES = (".fits", ".fit", ".fts")
_MAX_BYTES = 512 * 1024 * 1024  # decompressed size limit: far above any spectrum


@dataclass(frozen=True)
class Format:
    """A registered input format: which names it claims, how to recognise and read its bytes."""

    name: str
    suffixes: tuple[str, ...]
    sniff: Callable[[bytes], bool]
    read: Callable[[bytes, str], list[Spectrum]]


def _is_fits(raw: bytes) -> bool:
    return raw.startswith(b"SIMPLE  =")


def _is_text(raw: bytes) -> bool:
    return b"\x00" not in raw[:4096]


def _read_fits(raw: bytes, path: str) -> list[Spectrum]:
    try:  # plain images and binary tables: read directly (about 10x faster than astropy)
        return _read_hdus(_direct_hdus(raw), path)
    except fits_cards.Unsupported:
        pass
    from astropy.io import fits  # deferred: astropy.io.fits costs ~0.2 s to import

    try:
        hdul = fits.open(io.BytesIO(raw), memmap=False, lazy_load_hdus=False)
    except OSError:
        raise ReadProblem("file truncated" if len(raw) % 2880 else "FITS header corrupt") from None
    with hdul:
        _check_complete(hdul, raw)
        return _read_hdus(_astropy_hdus(hdul, raw, fits), path)


#: One HDU for _read_hdus: its kind ('image', 'table', 'other'), keywords and a data loader.
_Hdu = tuple[str, dict[str, Any], Callable[[], Any]]


def _direct_hdus(raw: bytes) -> list[_Hdu]:
    hdus: list[_Hdu] = []
    for kind, keys, start in fits_cards.layout(raw):
        if kind == "table":
            hdus.append((kind, keys, partial(fits_cards.table, raw, keys, start)))
        else:
            hdus.append((kind, keys, partial(fits_cards.image, raw, keys, start)))
    for kind, _, load in hdus:  # surface Unsupported before any spectrum is built
        if kind == "table":
            load()
    return hdus


def _astropy_hdus(hdul: Any, raw: bytes, fits: Any) -> list[_Hdu]:
    hdus: list[_Hdu] = []
    for hdu in hdul:
        header, _ = fits_cards.parse_header(raw, hdu.fileinfo()["hdrLoc"])
        if isinstance(hdu, fits.GroupsHDU):
            hdus.append(("other", header, lambda: None))
        elif isinstance(hdu, fits.PrimaryHDU | fits.ImageHDU | fits.CompImageHDU):
            hdus.append(("image", header, partial(_astropy_image, hdu)))
        elif isinstance(hdu, fits.BinTableHDU | fits.TableHDU):
            hdus.append(("table", header, partial(_astropy_table, hdu)))
        else:
            hdus.append(("other", header, lambda: None))
    return hdus


def _astropy_image(hdu: Any) -> Any:
    data = hdu.data
    if data is not None and data.dtype.kind not in "fiu":
        raise ReadProblem(f"image data of type {data.dtype} is not numeric")
    return data


def _astropy_table(hdu: Any) -> tuple[dict[str, Any], dict[str, str]]:
    table = hdu.data
    columns = {} if table is None else {name: table[name] for name in hdu.columns.names}
    units = {c.name: c.unit.strip() for c in hdu.columns if c.unit and c.unit.strip()}
    return columns, units


def _check_complete(hdul: Any, raw: bytes) -> None:
    end = 0
    for hdu in hdul:
        info = hdu.fileinfo()
        need = info["datLoc"] + hdu.size
        if need > len(raw):
            raise ReadProblem("file truncated")
        end = info["datLoc"] + info["datSpan"]
    if raw[end : end + 8] == b"XTENSION":
        raise ReadProblem("file truncated (incomplete extension HDU)")


def _read_hdus(hdus: list[_Hdu], path: str) -> list[Spectrum]:
    """Spectra of every HDU that has them; HDUs without a spectral axis are skipped unless
    no HDU has one (then the first one's reason is the file's)."""
    spectra: list[Spectrum] = []
    skipped: str | None = None
    for index, (kind, header, load) in enumerate(hdus):
        prefix = f"hdu {index}: " if index else ""
        try:
            if kind == "other":
                raise fits_image.NoSpectralAxis("not an image or a binary table")
            if kind == "image":
                data = load()
                if data is not None:
                    spectra.extend(fits_image.from_array(np.asarray(data), header, index, path))
            else:
                columns, units = load()
                spectra.extend(fits_table.read_columns(columns, units, index, path, header))
        except fits_image.NoSpectralAxis as exc:
            skipped = skipped or f"{prefix}{exc}"
        except ReadProblem as exc:
            raise ReadProblem(f"{prefix}{exc}") from None
    if not spectra:
        raise ReadProblem(skipped or "no data in any HDU")
    return spectra


def _read_csv(raw: bytes, path: str) -> list[Spectrum]:
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise ReadProblem(
            f"not UTF-8 text (byte 0x{raw[exc.start]:02x} at offset {exc.start})"
        ) from None
    if "\x00" in text:
        raise ReadProblem("not a text file (NUL bytes)")
    return csv_text.read_text(text, path)


FORMATS: dict[str, Format] = {
    "fits": Format("fits", _FITS_SUFFIXES, _is_fits, _read_fits),
    "csv": Format("csv", (".csv",), _is_text, _read_csv),
}


def _gunzip(raw: bytes) -> bytes:
    d = zlib.decompressobj(16 + zlib.MAX_WBITS)
    try:
        out = d.decompress(raw, _MAX_BYTES)
    except zlib.error:
        raise ReadProblem("gzip data corrupt") from None
    if d.unconsumed_tail:
        raise ReadProblem("gzip data larger than 512 MB")
    if not d.eof:
        raise ReadProblem("gzip file truncated")
    return out


def read_bytes(raw: bytes, path: str) -> list[Spectrum]:
    """Spectra from a file's bytes; ``path`` names the file (its suffix picks the format when
    the bytes do not). Raises ReadProblem."""
    if not raw:
        raise ReadProblem("empty file")
    name = path.lower()
    if raw[:2] == b"\x1f\x8b":
        raw = _gunzip(raw)
        if not raw:
            raise ReadProblem("empty file inside gzip")
    name = name.removesuffix(".gz")
    if FORMATS["fits"].sniff(raw):
        return FORMATS["fits"].read(raw, path)
    for fmt in FORMATS.values():
        if name.endswith(fmt.suffixes):
            if fmt.name == "fits":
                raise ReadProblem("not a FITS file (no SIMPLE card)")
            return fmt.read(raw, path)
    tried = ", ".join(f"{f.name} ({' '.join(f.suffixes)})" for f in FORMATS.values())
    raise ReadProblem(f"not a spectrum file speccat knows; tried {tried}")


def read(path: str | Path) -> list[Spectrum]:
    """Every spectrum in one file (FITS image/table, CSV, optionally gzipped).

    Raises SpectrumReadError(path, reason) and nothing else; never modifies the file.
    """
    p = str(path)
    try:
        raw = Path(p).read_bytes()
    except OSError as exc:
        raise SpectrumReadError(p, f"cannot read file ({exc.strerror or exc})") from None
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            return read_bytes(raw, p)
    except ReadProblem as exc:
        raise SpectrumReadError(p, str(exc)) from None
    except SpectrumReadError:
        raise
    except MemoryError:
        raise SpectrumReadError(p, "too large to read into memory") from None
    except Exception as exc:  # the reader boundary: anything a library raises becomes a reason
        detail = " ".join(str(exc).split())[:100]
        raise SpectrumReadError(p, f"unreadable ({type(exc).__name__}: {detail})") from None
