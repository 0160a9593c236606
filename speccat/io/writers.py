"""Writing spectra as FITS images, FITS binary tables and CSV (for tests, the sample night,
stacking and benchmarks). Files are written whole to a temporary name and then renamed, and an
existing file is never replaced unless ``overwrite=True``. A name ending in ``.gz`` is gzipped
(with a fixed timestamp, so the bytes depend only on the content).
"""

from __future__ import annotations

import gzip
import io
import itertools
import os
from collections.abc import Sequence
from datetime import UTC
from pathlib import Path
from typing import Any

import numpy as np

from speccat.errors import SpeccatError
from speccat.io.axis import C_MS, STOKES_NUMBERS
from speccat.model import Convention, Spectrum

__all__ = ["axis_values", "write_csv", "write_fits_image", "write_fits_table"]

#: Axis kinds write_fits_image understands: (CTYPE, quantity, VELREF or None).
AXES = {
    "FREQ": ("FREQ", "freq", None),
    "WAVE": ("WAVE", "wave", None),
    "VRAD": ("VRAD", "radio", None),
    "VOPT": ("VOPT", "optical", None),
    "VELO": ("VELO", "relativistic", None),
    "VELO-LSR": ("VELO-LSR", "radio", 257),
    "VELO-HEL": ("VELO-HEL", "optical", 2),
    "VELO-OBS": ("VELO-OBS", "radio", 259),
    "FREQ-LSR": ("FREQ-LSR", "freq", None),
    "FELO-HEL": ("FELO-HEL", "optical", None),
}
_UNITS = {"freq": "Hz", "wave": "m"}


def axis_values(freq_hz: np.ndarray, quantity: str, rest_hz: float | None) -> np.ndarray:
    """The axis quantity (Hz, m or m/s) at each frequency (FITS WCS Paper III, Table 1)."""
    f = np.asarray(freq_hz, dtype=float)
    if quantity == "freq":
        return f
    if quantity == "wave":
        return C_MS / f
    if rest_hz is None:
        raise SpeccatError("a velocity axis needs the spectrum's rest_freq_hz")
    if quantity == "radio":
        return C_MS * (rest_hz - f) / rest_hz
    if quantity == "optical":
        return C_MS * (rest_hz - f) / f
    return C_MS * (rest_hz**2 - f**2) / (rest_hz**2 + f**2)


def _linear_axis(values: np.ndarray, what: str) -> tuple[float, float]:
    n = values.size
    crval, cdelt = float(values[0]), float((values[-1] - values[0]) / (n - 1))
    model = crval + (np.arange(1.0, n + 1.0) - 1.0) * cdelt
    if np.max(np.abs(model - values)) > 1e-6 * abs(cdelt):
        raise SpeccatError(f"the spectrum's channels are not evenly spaced in {what}")
    return crval, cdelt


def _spectral_cards(spectrum: Spectrum, axis: str, descending: bool) -> dict[str, Any]:
    if axis not in AXES:
        raise SpeccatError(f"unknown axis kind {axis!r}; choose from {', '.join(AXES)}")
    ctype, quantity, velref = AXES[axis]
    freq = spectrum.freq_hz[::-1] if descending else spectrum.freq_hz
    linear_in = "freq" if ctype.startswith("FELO") else quantity
    values = axis_values(freq, linear_in, spectrum.rest_freq_hz)
    if ctype.startswith("FELO"):
        crval_f, cdelt_f = _linear_axis(values, "frequency")
        rest = float(spectrum.rest_freq_hz or 0.0)
        crval = C_MS * (rest - crval_f) / crval_f
        cdelt = -cdelt_f * rest * C_MS / crval_f**2  # dv/df at the reference, Paper III §5.3
    else:
        crval, cdelt = _linear_axis(values, quantity)
    cards: dict[str, Any] = {
        "CTYPE1": ctype,
        "CRVAL1": crval,
        "CDELT1": cdelt,
        "CRPIX1": 1.0,
        "CUNIT1": _UNITS.get(quantity, "m/s"),
    }
    if velref is not None:
        cards["VELREF"] = velref
    return cards


def _metadata_cards(spectrum: Spectrum) -> dict[str, Any]:
    cards: dict[str, Any] = {"OBJECT": spectrum.source, "BUNIT": spectrum.intensity_unit}
    if spectrum.telescope:
        cards["TELESCOP"] = spectrum.telescope
    if spectrum.obs_time is not None:
        cards["DATE-OBS"] = spectrum.obs_time.astimezone(UTC).replace(tzinfo=None).isoformat()
        cards["TIMESYS"] = "UTC"
    if spectrum.ra_deg is not None and spectrum.dec_deg is not None:
        cards.update(RA=spectrum.ra_deg, DEC=spectrum.dec_deg, RADESYS="ICRS")
    if spectrum.site is not None:
        cards.update(
            SITELONG=spectrum.site.lon_deg,
            SITELAT=spectrum.site.lat_deg,
            SITEELEV=spectrum.site.height_m,
        )
    if spectrum.rest_freq_hz is not None:
        cards["RESTFRQ"] = spectrum.rest_freq_hz
    if spectrum.specsys:
        cards["SPECSYS"] = spectrum.specsys
    if spectrum.velosys_ms is not None:
        cards["VELOSYS"] = spectrum.velosys_ms
    if spectrum.z_source is not None:
        cards["ZSOURCE"] = spectrum.z_source
    return cards


def _stokes_cards(labels: Sequence[str], axis_number: int) -> dict[str, Any]:
    codes = [STOKES_NUMBERS[s] for s in labels]
    step = codes[1] - codes[0] if len(codes) > 1 else 1
    if any(b - a != step for a, b in itertools.pairwise(codes)) or step == 0:
        raise SpeccatError(f"Stokes products {', '.join(labels)} are not evenly spaced codes")
    n = axis_number
    return {
        f"CTYPE{n}": "STOKES",
        f"CRVAL{n}": float(codes[0]),
        f"CDELT{n}": float(step),
        f"CRPIX{n}": 1.0,
    }


def _save(path: str | Path, data: bytes, overwrite: bool) -> None:
    target = Path(path)
    if target.exists() and not overwrite:
        raise SpeccatError(f"{target}: file exists (pass overwrite=True to replace it)")
    if target.name.lower().endswith(".gz"):
        buf = io.BytesIO()
        with gzip.GzipFile(filename="", mode="wb", fileobj=buf, mtime=0, compresslevel=9) as gz:
            gz.write(data)
        data = buf.getvalue()
    tmp = target.with_name(f".{target.name}.part{os.getpid()}")
    tmp.write_bytes(data)
    os.replace(tmp, target)


def write_fits_image(
    path: str | Path,
    spectrum: Spectrum,
    *,
    axis: str = "FREQ",
    descending: bool = False,
    stokes_axis: bool | None = None,
    extension: bool = False,
    sky_axes: bool = False,
    dtype: str = "float64",
    extra_cards: dict[str, Any] | None = None,
    overwrite: bool = False,
) -> None:
    """Write ``spectrum`` as a FITS image: axis 1 spectral (``axis`` kind, see AXES; velocity
    kinds need ``rest_freq_hz`` and channels evenly spaced in that velocity), a STOKES axis when
    there are several products (or ``stokes_axis=True``), degenerate RA/DEC axes when
    ``sky_axes``, in an IMAGE extension after an empty primary HDU when ``extension``;
    ``extra_cards`` adds or replaces header cards (a None value drops the card)."""
    from astropy.io import fits

    labels = list(spectrum.intensity)
    with_stokes = len(labels) > 1 if stokes_axis is None else stokes_axis
    if len(labels) > 1 and not with_stokes:
        raise SpeccatError("several Stokes products need stokes_axis=True")
    rows = np.vstack([spectrum.intensity[s] for s in labels]).astype(dtype)
    if descending:
        rows = rows[:, ::-1]
    cards = _spectral_cards(spectrum, axis, descending)
    shape: tuple[int, ...] = (spectrum.n_channels,)
    axis_no = 2
    if sky_axes and spectrum.ra_deg is not None and spectrum.dec_deg is not None:
        cards.update(CTYPE2="RA---SIN", CRVAL2=spectrum.ra_deg, CDELT2=-0.01, CRPIX2=1.0)
        cards.update(CTYPE3="DEC--SIN", CRVAL3=spectrum.dec_deg, CDELT3=0.01, CRPIX3=1.0)
        shape, axis_no = (1, 1, *shape), 4
    if with_stokes:
        cards.update(_stokes_cards(labels, axis_no))
        data = rows.reshape((len(labels), *shape))
    else:
        data = rows.reshape(shape)
    meta = _metadata_cards(spectrum)
    if sky_axes:
        meta.pop("RA", None)
        meta.pop("DEC", None)
    header = fits.Header()
    for key, value in {**cards, **meta, **(extra_cards or {})}.items():
        if value is not None:  # None in extra_cards drops a card
            header[key] = value
    image = (fits.ImageHDU if extension else fits.PrimaryHDU)(data=data, header=header)
    hdus = [fits.PrimaryHDU(), image] if extension else [image]
    buf = io.BytesIO()
    fits.HDUList(hdus).writeto(buf, output_verify="exception")
    _save(path, buf.getvalue(), overwrite)


def write_fits_table(
    path: str | Path,
    spectra: Sequence[Spectrum],
    *,
    axis_in_header: bool = False,
    dtype: str = "float64",
    overwrite: bool = False,
) -> None:
    """Write spectra as rows of a binary table (column DATA, channels x products via TDIM; per-row
    CRVAL1/CDELT1/CRPIX1/CTYPE1/OBJECT/... columns). ``axis_in_header`` puts the axis keywords
    in the table header instead (all spectra must then share one axis)."""
    from astropy.io import fits

    if not spectra:
        raise SpeccatError("no spectra to write")
    n = spectra[0].n_channels
    labels = list(spectra[0].intensity)
    if any(s.n_channels != n or list(s.intensity) != labels for s in spectra):
        raise SpeccatError("table rows must share the channel count and the Stokes products")
    axes = [_spectral_cards(s, "FREQ", False) for s in spectra]
    metas = [_metadata_cards(s) for s in spectra]
    header = fits.Header()
    header["EXTNAME"] = "SPECTRA"
    cols = []
    data = np.stack([np.vstack([s.intensity[k] for k in labels]) for s in spectra]).astype(dtype)
    code = "D" if dtype == "float64" else "E"
    cols.append(
        fits.Column(
            name="DATA",
            format=f"{n * len(labels)}{code}",
            dim=f"({n},{len(labels)})",
            unit=spectra[0].intensity_unit,
            array=data,
        )
    )
    if len(labels) > 1 or labels != ["I"]:
        for key, value in _stokes_cards(labels, 2).items():
            header[key] = value
    if axis_in_header:
        if any(a != axes[0] for a in axes):
            raise SpeccatError("axis_in_header needs every spectrum on the same axis")
        for key, value in axes[0].items():
            header[key] = value
        axes = [{} for _ in axes]
    for key in sorted({k for d in [*axes, *metas] for k in d}, key=_key_order):
        values = [{**a, **m}.get(key) for a, m in zip(axes, metas, strict=True)]
        cols.append(_column(key, values))
    table = fits.BinTableHDU.from_columns(cols, header=header)
    buf = io.BytesIO()
    fits.HDUList([fits.PrimaryHDU(), table]).writeto(buf, output_verify="exception")
    _save(path, buf.getvalue(), overwrite)


def _key_order(key: str) -> tuple[int, str]:
    order = ("CTYPE1", "CRVAL1", "CDELT1", "CRPIX1", "CUNIT1", "OBJECT")
    return (order.index(key), key) if key in order else (len(order), key)


def _column(key: str, values: list[Any]) -> Any:
    from astropy.io import fits

    if all(isinstance(v, str) for v in values if v is not None) and any(
        isinstance(v, str) for v in values
    ):
        texts = ["" if v is None else v for v in values]
        width = max(1, *(len(t) for t in texts))
        return fits.Column(name=key, format=f"{width}A", array=np.array(texts))
    if all(isinstance(v, int) for v in values if v is not None) and None not in values:
        return fits.Column(name=key, format="J", array=np.array(values, dtype=np.int32))
    arr = np.array([np.nan if v is None else float(v) for v in values])
    return fits.Column(name=key, format="D", array=arr)


def write_csv(
    path: str | Path,
    spectrum: Spectrum,
    *,
    axis: str = "freq_mhz",
    intensity_column: str | None = None,
    digits: int | None = None,
    overwrite: bool = False,
) -> None:
    """Write ``spectrum`` as CSV: ``# KEY = value`` metadata, a header row, one row per channel.

    ``axis`` is freq_hz/freq_khz/freq_mhz/freq_ghz or vrad_kms/vopt_kms/vrel_kms/vel_kms
    (vel_kms is written radio with CTYPE1 = VRAD). Products are columns named by their lower-case
    label, or ``intensity_column`` (e.g. ``flux_jy``) for a single product. Values are written
    with full precision (round trip exact), or ``digits`` significant digits for intensities.
    """
    scale = {"freq_hz": 1.0, "freq_khz": 1e3, "freq_mhz": 1e6, "freq_ghz": 1e9}
    conventions = {
        "vrad_kms": Convention.RADIO,
        "vel_kms": Convention.RADIO,
        "vopt_kms": Convention.OPTICAL,
        "vrel_kms": Convention.RELATIVISTIC,
    }
    if axis in scale:
        x = spectrum.freq_hz / scale[axis]
    elif axis in conventions:
        x = axis_values(spectrum.freq_hz, conventions[axis].value, spectrum.rest_freq_hz) / 1e3
    else:
        raise SpeccatError(f"unknown CSV axis {axis!r}")
    labels = list(spectrum.intensity)
    if intensity_column and len(labels) != 1:
        raise SpeccatError("intensity_column names the single product of a one-product spectrum")
    lines = [f"# {k} = {_csv_value(v)}" for k, v in _metadata_cards(spectrum).items()]
    if axis == "vel_kms":
        lines.append("# CTYPE1 = VRAD")
    names = [intensity_column] if intensity_column else [s.lower() for s in labels]
    lines.append(",".join([axis, *names]))
    fmt = repr if digits is None else (lambda v: f"{v:.{digits}g}")
    ys = [spectrum.intensity[s] for s in labels]
    for k in range(spectrum.n_channels):
        lines.append(",".join([repr(float(x[k])), *(fmt(float(y[k])) for y in ys)]))
    _save(path, ("\n".join(lines) + "\n").encode("utf-8"), overwrite)


def _csv_value(value: Any) -> str:
    return f"'{value}'" if isinstance(value, str) else repr(value)
