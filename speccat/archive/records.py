"""Exported detection records: the column contract, units, and row -> record conversion."""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime
from typing import Any

import numpy as np
from sqlalchemy import ColumnElement, Select, bindparam, select

from speccat.archive.schema import detections, files, spectra
from speccat.model import BaselineModel, LineFit

#: DESIGN.md "Contract: exported columns", in that order.
EXPORT_COLUMNS: tuple[str, ...] = (
    "detection_id",
    "source",
    "night",
    "obs_time",
    "file",
    "stokes",
    "species",
    "line",
    "transition",
    "rest_freq_mhz",
    "obs_freq_mhz",
    "v_lsr_kms",
    "v_lsr_err_kms",
    "peak",
    "peak_err",
    "fwhm_kms",
    "fwhm_err_kms",
    "integral",
    "integral_err",
    "intensity_unit",
    "rms",
    "snr",
    "kind",
    "id_score",
    "flags",
)
#: Extra keys of ``Archive.page`` records (not exported unless asked).
EXTRA_COLUMNS: tuple[str, ...] = ("spectrum_id", "ra_deg", "dec_deg", "continuum")

INT_COLUMNS = frozenset({"detection_id"})
STRING_COLUMNS = frozenset(
    {"source", "night", "obs_time", "file", "stokes", "species", "line", "transition"}
    | {"intensity_unit", "kind", "flags"}
)
#: Units as astropy/VOUnit strings; intensity-valued columns carry ``intensity_unit`` per row.
UNITS: dict[str, str] = {
    "rest_freq_mhz": "MHz",
    "obs_freq_mhz": "MHz",
    "v_lsr_kms": "km / s",
    "v_lsr_err_kms": "km / s",
    "fwhm_kms": "km / s",
    "fwhm_err_kms": "km / s",
    "ra_deg": "deg",
    "dec_deg": "deg",
}
DESCRIPTIONS: dict[str, str] = {
    "detection_id": "archive id of the detection",
    "obs_time": "start of the observation, UTC (ISO 8601)",
    "file": "input file path as ingested",
    "rest_freq_mhz": "rest frequency of the identified line",
    "obs_freq_mhz": "fitted line centre on the file's own axis, in the frame the file declares",
    "v_lsr_kms": "LSRK velocity, radio convention, relative to rest_freq_mhz",
    "peak": "fitted peak above the baseline, in intensity_unit (negative: absorption)",
    "integral": "integrated intensity, in intensity_unit * km/s",
    "integral_err": "error of integral, in intensity_unit * km/s",
    "rms": "baseline noise of the spectrum, in intensity_unit",
    "id_score": "score of the primary identification (higher is better)",
    "flags": "quality and identification flags, ';'-separated",
}

# SQL expression of every sortable/exported column (before conversion to export units).
SQL_COLUMNS: dict[str, ColumnElement[Any]] = {
    "detection_id": detections.c.id,
    "source": detections.c.source,
    "night": detections.c.night,
    "obs_time": detections.c.obs_time,
    "file": files.c.path,
    "stokes": detections.c.stokes,
    "species": detections.c.species,
    "line": detections.c.line,
    "transition": detections.c.transition,
    "rest_freq_mhz": detections.c.rest_freq_hz,
    "obs_freq_mhz": detections.c.center_hz,
    "v_lsr_kms": detections.c.v_lsr_kms,
    "v_lsr_err_kms": detections.c.v_lsr_err_kms,
    "peak": detections.c.peak,
    "peak_err": detections.c.peak_err,
    "fwhm_kms": detections.c.fwhm_kms,
    "fwhm_err_kms": detections.c.fwhm_err_kms,
    "integral": detections.c.integral_kms,
    "integral_err": detections.c.integral_err_kms,
    "intensity_unit": spectra.c.intensity_unit,
    "rms": spectra.c.rms,
    "snr": detections.c.snr,
    "kind": detections.c.kind,
    "id_score": detections.c.id_score,
    "flags": detections.c.flags,
    "spectrum_id": detections.c.spectrum_id,
    "ra_deg": spectra.c.ra_deg,
    "dec_deg": spectra.c.dec_deg,
    "continuum": spectra.c.continuum,
}
JOINED_COLUMNS = frozenset({"file", "intensity_unit", "rms", "ra_deg", "dec_deg", "continuum"})


def record_select() -> Select[Any]:
    """SELECT of every record column, detections joined to their spectrum and file."""
    cols = [SQL_COLUMNS[name].label(name) for name in RECORD_NAMES]
    joined = detections.join(spectra, spectra.c.id == detections.c.spectrum_id).join(
        files, files.c.id == spectra.c.file_id
    )
    return select(*cols).select_from(joined)


RECORD_NAMES = EXPORT_COLUMNS + EXTRA_COLUMNS
_MHZ_AT = tuple(RECORD_NAMES.index(n) for n in ("rest_freq_mhz", "obs_freq_mhz"))
_TIME_AT = RECORD_NAMES.index("obs_time")


def to_values(row: Any) -> list[Any]:
    """A result row of ``record_select`` as export values in ``RECORD_NAMES`` order (MHz, ISO
    times, None = unknown). Non-finite numbers never reach the archive (``rows.clean_float``)."""
    values = list(row)
    for i in _MHZ_AT:
        if values[i] is not None:
            values[i] = values[i] / 1e6
    stamp = values[_TIME_AT]
    if isinstance(stamp, datetime):
        values[_TIME_AT] = stamp.isoformat()
    return values


def to_record(row: Any) -> dict[str, Any]:
    """A result row of ``record_select`` as an export record keyed by ``RECORD_NAMES``."""
    return dict(zip(RECORD_NAMES, to_values(row), strict=True))


@dataclass(frozen=True, eq=False)
class StoredSpectrum:
    """A spectrum as archived, for plotting: axis, products, baseline and fitted lines.

    ``freq_hz`` is the file's own axis (frame ``specsys``; ``f_lsrk = f * lsrk_factor``);
    ``intensity`` holds the float32 products in ``intensity_unit``. ``fits[i]`` belongs to
    ``detections[i]`` (export records of this spectrum's detections, by id).
    """

    spectrum_id: int
    source: str
    file: str
    night: str
    obs_time: datetime | None
    ra_deg: float | None
    dec_deg: float | None
    freq_hz: np.ndarray
    intensity: dict[str, np.ndarray]
    intensity_unit: str
    specsys: str
    lsrk_factor: float
    frame_flag: str | None
    rms: float | None
    continuum: float | None
    baseline: BaselineModel
    flags: tuple[str, ...]
    fits: tuple[LineFit, ...]
    detections: tuple[dict[str, Any], ...]

    @property
    def stokes(self) -> tuple[str, ...]:
        return tuple(self.intensity)


#: Records of a list of detection ids (``ids``, an expanding bound parameter); built once.
RECORDS_BY_ID = record_select().where(detections.c.id.in_(bindparam("ids", expanding=True)))
