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


def read_columns(
    columns: dict[str, np.ndarray],
    units: dict[str, str],
    index: int,
    path: str,
    header: dict[str, Any],
) -> list[Spectrum]:
    """Spectra of every row of a binary table given as name -> column array (rows first)."""
    names = {name.upper(): name for name in columns}
    data_name = next((names[n] for n in DATA_COLUMNS if n in names), None)
    if data_name is None:
        raise NoSpectralAxis("no intensity column (DATA, SPECTRUM or FLUX)")
    cells = columns[data_name]
    if len(cells) == 0:
        raise ReadProblem("binary table has no rows")
    header_keys = _header_keys(header)
    unit = units.get(data_name)
    scalar_cols = [
        (name.upper(), values)
        for name, values in columns.items()
        if name != data_name and values.ndim == 1
    ]
    spectra = []
    for row in range(len(cells)):
        row_values = {name: _scalar(values[row]) for name, values in scalar_cols}
        keys = header_keys.merged(row_values)
        try:
            origin = Origin(path, hdu=index, row=row)
            spectra.append(_row_spectrum(cells[row], keys, row_values, unit, data_name, origin))
        except ReadProblem as exc:
            raise type(exc)(f"row {row}: {exc}") from None
    return spectra


def _row_spectrum(
    cell: Any,
    keys: Keys,
    row_values: dict[str, Any],
    unit: str | None,
    data_name: str,
    origin: Origin,
) -> Spectrum:
    cell = np.asarray(cell)
    if cell.dtype.kind not in "fiu":
        raise ReadProblem(f"{data_name} column is not numeric")
    if cell.ndim == 0 or cell.size == 0:
        raise ReadProblem(f"zero-length {data_name} cell")
    maxis = keys.number("MAXIS1")
    if maxis is not None and int(maxis) != cell.shape[-1]:
        raise ReadProblem(
            f"MAXIS1 = {int(maxis)} but the {data_name} cell has {cell.shape[-1]} channels"
        )
    row_unit = keys.text("BUNIT") if "BUNIT" in row_values else None
    return spectra_from_array(cell, keys, origin, NAME, row_unit or unit or None)


def _scalar(value: Any) -> Any:
    if isinstance(value, bytes):
        return value.decode("ascii", "replace").strip()
    if isinstance(value, np.generic):
        return value.item()
    return value
