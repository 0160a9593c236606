"""The values that flow through speccat: read -> reduce -> identify -> store.

Units are in the field names (``_hz``, ``_kms``, ``_deg``, ``_m``). Intensities are in the
spectrum's own ``intensity_unit`` (K, Jy, ...). ``None`` always means "not known".
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from datetime import datetime
from enum import StrEnum

import numpy as np

#: Speed of light in km/s (exact, SI definition); the core's hot loops use this plain float.
C_KMS = 299_792.458


class Kind(StrEnum):
    """Whether a line rises above or dips below the baseline."""

    EMISSION = "emission"
    ABSORPTION = "absorption"


class Convention(StrEnum):
    """Doppler velocity conventions (radio, optical, relativistic)."""

    RADIO = "radio"
    OPTICAL = "optical"
    RELATIVISTIC = "relativistic"


@dataclass(frozen=True)
class Site:
    """An observing site on the WGS84 ellipsoid."""

    lon_deg: float
    lat_deg: float
    height_m: float


@dataclass(frozen=True)
class Origin:
    """Where a spectrum came from: file path as given, HDU index, table row (None for images)."""

    path: str
    hdu: int | None = None
    row: int | None = None

    def label(self) -> str:
        parts = [self.path]
        if self.hdu is not None:
            parts.append(f"hdu {self.hdu}")
        if self.row is not None:
            parts.append(f"row {self.row}")
        return ", ".join(parts)


@dataclass(frozen=True, eq=False)
class Spectrum:
    """One observed spectrum, possibly with several Stokes/polarization products.

    ``freq_hz`` is float64 and strictly ascending; every array in ``intensity`` has the same
    length and is aligned with it. ``intensity`` keys are Stokes or polarization labels
    (``I``, ``Q``, ``U``, ``V``, ``RR``, ``LL``, ``XX``, ``YY``...). Frequencies are in the frame
    the file declares (``specsys``, FITS WCS Paper III values such as ``TOPOCENT``, ``LSRK``;
    empty when the file does not say). ``rest_freq_hz`` and ``velocity_convention`` describe the
    original axis when it was a velocity axis (or the header's rest frequency otherwise).
    """

    freq_hz: np.ndarray
    intensity: dict[str, np.ndarray]
    intensity_unit: str
    source: str
    origin: Origin
    ra_deg: float | None = None
    dec_deg: float | None = None
    obs_time: datetime | None = None
    site: Site | None = None
    telescope: str = ""
    specsys: str = ""
    rest_freq_hz: float | None = None
    velocity_convention: Convention | None = None
    velosys_ms: float | None = None
    z_source: float | None = None
    meta: dict[str, str] = field(default_factory=dict)

    @property
    def n_channels(self) -> int:
        return int(self.freq_hz.size)

    @property
    def stokes(self) -> tuple[str, ...]:
        return tuple(self.intensity)

    @property
    def primary_stokes(self) -> str:
        """The product that lines are measured in: I when present, else the first one."""
        return "I" if "I" in self.intensity else next(iter(self.intensity))

    @property
    def channel_width_hz(self) -> float:
        """Median channel spacing (positive, Hz)."""
        return float(np.median(np.diff(self.freq_hz))) if self.freq_hz.size > 1 else math.nan


@dataclass(frozen=True)
class BaselineModel:
    """A fitted baseline: polynomial in x = 2*channel/(n-1) - 1, plus an optional sinusoid.

    ``coeffs`` are numpy.polynomial.polynomial coefficients (lowest order first) in x;
    the ripple term is ``ripple_amp * sin(2*pi*channel/ripple_period_chan + ripple_phase)``.
    """

    n_channels: int
    coeffs: tuple[float, ...]
    ripple_amp: float = 0.0
    ripple_period_chan: float = 0.0
    ripple_phase: float = 0.0

    def evaluate(self) -> np.ndarray:
        chan = np.arange(self.n_channels, dtype=float)
        x = 2.0 * chan / max(self.n_channels - 1, 1) - 1.0
        out = np.polynomial.polynomial.polyval(x, np.asarray(self.coeffs, dtype=float))
        if self.ripple_amp and self.ripple_period_chan:
            out = out + self.ripple_amp * np.sin(
                2.0 * np.pi * chan / self.ripple_period_chan + self.ripple_phase
            )
        return np.asarray(out, dtype=float)


@dataclass(frozen=True)
class LineFit:
    """One fitted spectral feature, on the file's own frequency axis.

    ``peak`` is signed (negative for absorption) in the spectrum's intensity unit, above the
    baseline. Integrals are intensity x Hz; ``fit`` from the model, ``sum`` by direct summation
    over the line window. ``lorentz_fwhm_hz`` is set for Voigt fits only. ``w50_hz``/``w20_hz``
    are peak-fraction widths of the data (None when the profile is too weak to define them).
    ``blend`` is the index of the blend group within the spectrum (lines fitted together share it).
    ``moment1_hz``/``moment2_hz`` are the intensity-weighted mean frequency and dispersion of the
    data over the summation window (None when the weight sum is not positive).
    """

    center_hz: float
    center_err_hz: float
    peak: float
    peak_err: float
    fwhm_hz: float
    fwhm_err_hz: float
    integral_fit_hz: float
    integral_fit_err_hz: float
    integral_sum_hz: float
    integral_sum_err_hz: float
    center_chan: float
    fwhm_chan: float
    snr: float
    chi2_red: float
    kind: Kind
    profile: str = "gaussian"
    lorentz_fwhm_hz: float | None = None
    lorentz_fwhm_err_hz: float | None = None
    w50_hz: float | None = None
    w20_hz: float | None = None
    blend: int = 0
    flags: tuple[str, ...] = ()
    moment1_hz: float | None = None
    moment2_hz: float | None = None


@dataclass(frozen=True, eq=False)
class Measurement:
    """What the reduction found in one Stokes product of one spectrum."""

    stokes: str
    rms: float
    continuum: float
    baseline: BaselineModel
    lines: tuple[LineFit, ...]
    flags: tuple[str, ...] = ()


@dataclass(frozen=True)
class Candidate:
    """One possible identification of a detection, with its score (higher is better)."""

    name: str
    species: str
    transition: str
    rest_freq_hz: float
    v_lsr_kms: float
    score: float


@dataclass(frozen=True)
class Detection:
    """A measured line with its identification.

    ``line`` is the primary identification (None when unidentified: nothing scored above the
    threshold). Velocities are LSRK, radio convention, relative to the identified rest frequency;
    the km/s widths and integrals use that rest frequency too, or the observed centre when
    unidentified. ``flags`` adds identification flags (e.g. ``frame-unknown``) to the fit's.
    """

    fit: LineFit
    stokes: str
    candidates: tuple[Candidate, ...]
    line: Candidate | None
    v_lsr_kms: float | None
    v_lsr_err_kms: float | None
    fwhm_kms: float
    fwhm_err_kms: float
    integral_kms: float
    integral_err_kms: float
    flags: tuple[str, ...] = ()
    b_los_ug: float | None = None
    b_los_err_ug: float | None = None

    @property
    def id_score(self) -> float | None:
        return self.line.score if self.line is not None else None


@dataclass(frozen=True, eq=False)
class SpectrumResult:
    """Everything measured in one spectrum: the data, its reduction and its detections.

    ``lsrk_factor`` turns the file's frequencies into LSRK ones (``f_lsrk = f * lsrk_factor``);
    it is 1.0 with ``frame_flag`` set when the frame could not be established.
    """

    spectrum: Spectrum
    measurement: Measurement
    detections: tuple[Detection, ...]
    lsrk_factor: float = 1.0
    frame_flag: str | None = None


@dataclass(frozen=True, eq=False)
class FileResult:
    """One input file after reading and measuring: all of its spectra, or the reason it failed."""

    path: str
    size_bytes: int
    sha256: str
    spectra: tuple[SpectrumResult, ...] = ()
    error: str | None = None


def with_total_intensity(spectrum: Spectrum) -> Spectrum:
    """Add Stokes I (and V) derived from polarization products when the file has none.

    Circular feeds: I = (RR + LL)/2, V = (RR - LL)/2; linear feeds: I = (XX + YY)/2 (the usual
    definitions for products each calibrated as total intensity; common practice). The original
    products are kept; a spectrum that already has I is returned unchanged.
    """
    prods = spectrum.intensity
    if "I" in prods:
        return spectrum
    extra: dict[str, np.ndarray] = {}
    if "RR" in prods and "LL" in prods:
        extra["I"] = 0.5 * (prods["RR"] + prods["LL"])
        if "V" not in prods:
            extra["V"] = 0.5 * (prods["RR"] - prods["LL"])
    elif "XX" in prods and "YY" in prods:
        extra["I"] = 0.5 * (prods["XX"] + prods["YY"])
    if not extra:
        return spectrum
    from dataclasses import replace

    return replace(spectrum, intensity={**extra, **prods})
