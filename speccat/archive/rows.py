"""A measured file turned into ready-to-insert archive rows (``PreparedFile``).

Building the rows and compressing the arrays is the costly part of storing a file, so the ingest
workers do it (``prepare_file``) and the single writer only assigns ids and inserts. Rows are
tuples in the column orders below; the ids that only the writer knows (file, spectrum and
detection ids) and the night label (known only once the batch's earliest observation is) are
left out and supplied at insert time. No connection is touched here.
"""

from __future__ import annotations

import json
import math
from collections.abc import Iterable
from dataclasses import dataclass
from datetime import UTC, datetime
from typing import Any

# Not schema/records: they import SQLAlchemy, which a worker never needs (~0.35 s of start-up).
from speccat.archive.blobs import encode_data, encode_freq
from speccat.archive.widths import clip_strings, string_lengths
from speccat.model import Candidate, Detection, FileResult, SpectrumResult

#: Spectrum flag: a header string (source, telescope, unit...) was longer than its column and
#: was cut to fit.
CLIPPED_FLAG = "metadata-clipped"

#: Columns of a prepared spectrum row (``spectra`` without ``id``, ``file_id``, ``night``).
SPECTRUM_COLUMNS: tuple[str, ...] = (
    "hdu",
    "row",
    "source",
    "ra_deg",
    "dec_deg",
    "obs_time",
    "site_lon_deg",
    "site_lat_deg",
    "site_height_m",
    "telescope",
    "specsys",
    "rest_freq_hz",
    "velocity_convention",
    "velosys_ms",
    "lsrk_factor",
    "frame_flag",
    "stokes",
    "primary_stokes",
    "n_channels",
    "intensity_unit",
    "rms",
    "continuum",
    "baseline",
    "flags",
    "meta",
)
_FIT_COLUMNS: tuple[str, ...] = (
    "center_hz",
    "center_err_hz",
    "peak",
    "peak_err",
    "fwhm_hz",
    "fwhm_err_hz",
    "integral_fit_hz",
    "integral_fit_err_hz",
    "integral_sum_hz",
    "integral_sum_err_hz",
    "center_chan",
    "fwhm_chan",
    "snr",
    "chi2_red",
    "lorentz_fwhm_hz",
    "lorentz_fwhm_err_hz",
    "w50_hz",
    "w20_hz",
    "moment1_hz",
    "moment2_hz",
)
#: Columns of a prepared detection row (``detections`` without ``id``, ``spectrum_id``, ``night``).
DETECTION_COLUMNS: tuple[str, ...] = (
    *_FIT_COLUMNS,
    "stokes",
    "kind",
    "profile",
    "blend",
    "fit_flags",
    "v_lsr_kms",
    "v_lsr_err_kms",
    "fwhm_kms",
    "fwhm_err_kms",
    "integral_kms",
    "integral_err_kms",
    "flags",
    "b_los_ug",
    "b_los_err_ug",
    "species",
    "species_lc",
    "line",
    "transition",
    "rest_freq_hz",
    "id_score",
    "source",
    "source_lc",
    "obs_time",
)
#: Columns of a prepared candidate row (``candidates`` without ``id``, ``detection_id``).
CANDIDATE_COLUMNS: tuple[str, ...] = (
    "rank",
    "name",
    "species",
    "transition",
    "rest_freq_hz",
    "v_lsr_kms",
    "score",
)
SOURCE_AT = SPECTRUM_COLUMNS.index("source")
FLAGS_AT = SPECTRUM_COLUMNS.index("flags")
LINE_AT = DETECTION_COLUMNS.index("line")


@dataclass(frozen=True)
class PreparedDetection:
    row: tuple[Any, ...]  # DETECTION_COLUMNS
    candidates: tuple[tuple[Any, ...], ...]  # CANDIDATE_COLUMNS, ranked


@dataclass(frozen=True)
class PreparedSpectrum:
    row: tuple[Any, ...]  # SPECTRUM_COLUMNS
    freq_blob: bytes  # blobs.encode_freq
    data_blob: bytes  # blobs.encode_data
    detections: tuple[PreparedDetection, ...]

    @property
    def source(self) -> str:
        return str(self.row[SOURCE_AT])


@dataclass(frozen=True)
class PreparedFile:
    """One file ready for ``Archive.store_prepared``; ``error`` set = nothing but a failure."""

    path: str
    size_bytes: int
    sha256: str
    spectra: tuple[PreparedSpectrum, ...] = ()
    error: str | None = None
    earliest_obs: datetime | None = None  # earliest Spectrum.obs_time, as read


def clean_float(value: float | None) -> float | None:
    """Store non-finite numbers as NULL (unknown) so both engines behave alike."""
    if value is None:
        return None
    value = float(value)
    return value if math.isfinite(value) else None


def naive_utc(stamp: datetime | None) -> datetime | None:
    if stamp is None or stamp.tzinfo is None:
        return stamp
    return stamp.astimezone(UTC).replace(tzinfo=None)


def joined(values: Iterable[str]) -> str:
    """Distinct non-empty flags in order, ';'-joined."""
    out: list[str] = []
    for v in values:
        if v and v not in out:
            out.append(v)
    return ";".join(out)


def prepare_file(result: FileResult) -> PreparedFile:
    """Rows and blobs of everything measured in one file (a failed file keeps only its error)."""
    if result.error is not None:
        return PreparedFile(result.path, result.size_bytes, result.sha256, error=result.error)
    times = [s.spectrum.obs_time for s in result.spectra if s.spectrum.obs_time is not None]
    return PreparedFile(
        result.path,
        int(result.size_bytes),
        result.sha256,
        spectra=tuple(prepare_spectrum(r) for r in result.spectra),
        earliest_obs=min(times) if times else None,
    )


def prepare_spectrum(res: SpectrumResult) -> PreparedSpectrum:
    row = spectrum_row(res)
    values = tuple(row[k] for k in SPECTRUM_COLUMNS)
    dets = tuple(
        PreparedDetection(detection_row(det, row), candidate_rows(det.candidates))
        for det in res.detections
    )
    return PreparedSpectrum(
        values, encode_freq(res.spectrum.freq_hz), encode_data(res.spectrum.intensity), dets
    )


def spectrum_row(res: SpectrumResult) -> dict[str, Any]:
    """The ``spectra`` row of one spectrum, strings clipped to their columns (a clipped one
    flags the spectrum ``metadata-clipped``)."""
    s, m = res.spectrum, res.measurement
    base = m.baseline
    site = s.site
    row = {
        "hdu": s.origin.hdu,
        "row": s.origin.row,
        "source": s.source,
        "ra_deg": clean_float(s.ra_deg),
        "dec_deg": clean_float(s.dec_deg),
        "obs_time": naive_utc(s.obs_time),
        "site_lon_deg": None if site is None else clean_float(site.lon_deg),
        "site_lat_deg": None if site is None else clean_float(site.lat_deg),
        "site_height_m": None if site is None else clean_float(site.height_m),
        "telescope": s.telescope,
        "specsys": s.specsys,
        "rest_freq_hz": clean_float(s.rest_freq_hz),
        "velocity_convention": None
        if s.velocity_convention is None
        else str(s.velocity_convention),
        "velosys_ms": clean_float(s.velosys_ms),
        "lsrk_factor": float(res.lsrk_factor),
        "frame_flag": res.frame_flag,
        "stokes": json.dumps(list(s.intensity)),
        "primary_stokes": m.stokes,
        "n_channels": s.n_channels,
        "intensity_unit": s.intensity_unit,
        "rms": clean_float(m.rms),
        "continuum": clean_float(m.continuum),
        "baseline": json.dumps(
            {
                "n_channels": base.n_channels,
                "coeffs": [float(c) for c in base.coeffs],
                "ripple_amp": float(base.ripple_amp),
                "ripple_period_chan": float(base.ripple_period_chan),
                "ripple_phase": float(base.ripple_phase),
            }
        ),
        "flags": joined(m.flags),
        "meta": json.dumps(dict(s.meta), sort_keys=True, default=str),
    }
    if clip_strings("spectra", row):
        row["flags"] = joined((*m.flags, CLIPPED_FLAG))
    return row


def detection_row(det: Detection, srow: dict[str, Any]) -> tuple[Any, ...]:
    """A ``detections`` row (DETECTION_COLUMNS) with the spectrum's source and time copied in."""
    fit, ident = det.fit, det.line
    row: dict[str, Any] = {name: clean_float(getattr(fit, name)) for name in _FIT_COLUMNS}
    row.update(
        stokes=det.stokes,
        kind=str(fit.kind),
        profile=fit.profile,
        blend=int(fit.blend),
        fit_flags=joined(fit.flags),
        v_lsr_kms=clean_float(det.v_lsr_kms),
        v_lsr_err_kms=clean_float(det.v_lsr_err_kms),
        fwhm_kms=clean_float(det.fwhm_kms),
        fwhm_err_kms=clean_float(det.fwhm_err_kms),
        integral_kms=clean_float(det.integral_kms),
        integral_err_kms=clean_float(det.integral_err_kms),
        flags=joined((*fit.flags, *det.flags)),
        b_los_ug=clean_float(det.b_los_ug),
        b_los_err_ug=clean_float(det.b_los_err_ug),
        species=None if ident is None else ident.species,
        species_lc=None if ident is None else ident.species.lower(),
        line=None if ident is None else ident.name,
        transition=None if ident is None else ident.transition,
        rest_freq_hz=None if ident is None else clean_float(ident.rest_freq_hz),
        id_score=None if ident is None else clean_float(ident.score),
        source=srow["source"],
        source_lc=str(srow["source"]).lower(),
        obs_time=srow["obs_time"],
    )
    clip_strings("detections", row)
    return tuple(row[k] for k in DETECTION_COLUMNS)


def candidate_rows(ranked: Iterable[Candidate]) -> tuple[tuple[Any, ...], ...]:
    """``candidates`` rows (CANDIDATE_COLUMNS), rank 1 first, strings clipped to their columns
    (built as tuples directly: a file has a handful of candidates per line)."""
    width = string_lengths("candidates")
    n_name, n_species, n_transition = width["name"], width["species"], width["transition"]
    return tuple(
        (
            rank,
            _cut(c.name, n_name),
            _cut(c.species, n_species),
            _cut(c.transition, n_transition),
            clean_float(c.rest_freq_hz),
            clean_float(c.v_lsr_kms),
            clean_float(c.score),
        )
        for rank, c in enumerate(ranked, start=1)
    )


def _cut(value: Any, length: int) -> Any:
    return value[:length] if isinstance(value, str) and len(value) > length else value
