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
from pathlib import Path
from typing import Any

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
    simple = fits_cards.simple_image(raw)
    if simple is not None:  # one image HDU: read directly (about 10x faster than astropy)
        header, data = simple
        if data is None:
            raise ReadProblem("no data in any HDU")
        return fits_image.from_array(data, header, 0, path)
    from astropy.io import fits  # deferred: astropy.io.fits costs ~0.2 s to import

    try:
        hdul = fits.open(io.BytesIO(raw), memmap=False, lazy_load_hdus=False)
    except OSError:
        raise ReadProblem("file truncated" if len(raw) % 2880 else "FITS header corrupt") from None
    with hdul:
        _check_complete(hdul, raw)
        return _read_hdus(hdul, raw, path, fits)


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


def _read_hdus(hdul: Any, raw: bytes, path: str, fits: Any) -> list[Spectrum]:
    spectra: list[Spectrum] = []
    skipped: str | None = None
    for index, hdu in enumerate(hdul):
        prefix = f"hdu {index}: " if index else ""
        try:
            info = hdu.fileinfo()
            header, _ = fits_cards.parse_header(raw, info["hdrLoc"])
            if isinstance(hdu, fits.GroupsHDU):
                raise fits_image.NoSpectralAxis("random-groups data are not spectra")
            if isinstance(hdu, fits.PrimaryHDU | fits.ImageHDU | fits.CompImageHDU):
                spectra.extend(fits_image.read_hdu(hdu, index, path, header))
            elif isinstance(hdu, fits.BinTableHDU | fits.TableHDU):
                spectra.extend(fits_table.read_hdu(hdu, index, path, header))
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
