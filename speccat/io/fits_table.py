"""FITS binary-table HDUs -> one Spectrum per row (the single-dish binary-table convention).

The data sit in a vector column DATA, SPECTRUM or FLUX (optionally multi-dimensional through
TDIMn, e.g. channels x Stokes); every other scalar column is a per-row keyword (CRVAL1,
CDELT1, CRPIX1, CTYPE1, OBJECT, RESTFREQ, DATE-OBS, CRVAL2/CRVAL3 of RA/DEC axes...) that
overrides the same keyword in the table header. The data column's TUNITn gives the intensity
unit unless a BUNIT keyword or column says otherwise.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from speccat.io.fits_image import NoSpectralAxis, spectra_from_array
from speccat.io.keywords import Keys, ReadProblem
from speccat.model import Origin, Spectrum

NAME = "fits-table"
DATA_COLUMNS = ("DATA", "SPECTRUM", "FLUX")
_STRUCTURAL: tuple[str, ...] = (
    "NAXIS",
    "TTYPE",
    "TFORM",
    "TUNIT",
    "TDIM",
    "TNULL",
    "TSCAL",
    "TZERO",
    "TDISP",
)
_STRUCTURAL += ("PCOUNT", "GCOUNT", "TFIELDS", "XTENSION", "BITPIX", "THEAP", "TCTYP", "TCUNI")


def _header_keys(header: dict[str, Any]) -> Keys:
    return Keys.upper({k: v for k, v in header.items() if not k.startswith(_STRUCTURAL)})


def read_hdu(hdu: Any, index: int, path: str, header: dict[str, Any]) -> list[Spectrum]:
    """Spectra of every row of one binary-table HDU."""
    names = {name.upper(): name for name in hdu.columns.names}
    data_name = next((names[n] for n in DATA_COLUMNS if n in names), None)
    if data_name is None:
        raise NoSpectralAxis("no intensity column (DATA, SPECTRUM or FLUX)")
    table = hdu.data
    if table is None or len(table) == 0:
        raise ReadProblem("binary table has no rows")
    header_keys = _header_keys(header)
    column = hdu.columns[data_name]
    unit = (column.unit or "").strip() or None
    cells = table[data_name]
    scalar_cols = []
    for name in hdu.columns.names:
        if name == data_name:
            continue
        values = table[name]
        if values.ndim == 1 or (values.dtype.kind in "SU" and values.ndim == 1):
            scalar_cols.append((name.upper(), values))
    spectra = []
    for row in range(len(table)):
        row_values = {name: _scalar(values[row]) for name, values in scalar_cols}
        keys = header_keys.merged(row_values)
        cell = np.asarray(cells[row])
        if cell.dtype.kind not in "fiu":
            raise ReadProblem(f"row {row}: {data_name} column is not numeric")
        if cell.ndim == 0 or cell.size == 0:
            raise ReadProblem(f"row {row}: zero-length {data_name} cell")
        maxis = keys.number("MAXIS1")
        if maxis is not None and int(maxis) != cell.shape[-1]:
            raise ReadProblem(
                f"row {row}: MAXIS1 = {int(maxis)} but the {data_name} cell has "
                f"{cell.shape[-1]} channels"
            )
        row_unit = keys.text("BUNIT") if "BUNIT" in row_values else None
        try:
            spectrum = spectra_from_array(
                cell, keys, Origin(path, hdu=index, row=row), NAME, row_unit or unit or None
            )
        except ReadProblem as exc:
            raise type(exc)(f"row {row}: {exc}") from None
        spectra.append(spectrum)
    return spectra


def _scalar(value: Any) -> Any:
    if isinstance(value, bytes):
        return value.decode("ascii", "replace").strip()
    if isinstance(value, np.generic):
        return value.item()
    return value
