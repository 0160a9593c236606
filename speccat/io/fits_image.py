"""FITS image HDUs (primary or extension) -> Spectrum.

The spectral axis is the one whose CTYPEi is a spectral type (see :mod:`speccat.io.axis`);
degenerate axes (NAXISi = 1) are dropped, their celestial CRVALs giving the position; a STOKES
axis gives the products of one Spectrum. The same code serves binary-table rows, whose cells
are small images described by per-row keywords.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from speccat.io.axis import (
    CELESTIAL_PREFIXES,
    angle_axis_value,
    check_frequencies,
    classify,
    spectral_axis,
    stokes_labels,
)
from speccat.io.keywords import (
    Keys,
    ReadProblem,
    celestial_position,
    declared_frame,
    observation_time,
    observing_site,
)
from speccat.model import Origin, Spectrum

NAME = "fits-image"


class NoSpectralAxis(ReadProblem):
    """The HDU has no spectral axis (other HDUs of the file may still hold spectra)."""


@dataclass(frozen=True)
class _Axes:
    """Which FITS axes (1-based) are spectral and Stokes, and the celestial CRVALs."""

    spectral: int
    stokes: int | None
    celestial: dict[str, float]


def _find_axes(keys: Keys, naxes: list[int]) -> _Axes:
    ndim = len(naxes)
    spectral = stokes = None
    celestial: dict[str, float] = {}
    extra = []
    top = max([ndim] + [i for i in range(1, 10) if f"CTYPE{i}" in keys])
    for i in range(1, top + 1):
        n = naxes[i - 1] if i <= ndim else 1
        ctype = keys.text(f"CTYPE{i}") or ""
        kind = classify(ctype)
        if kind == "spectral" and spectral is None and n > 1:
            spectral = i
        elif kind == "stokes":
            stokes = i
        elif kind == "celestial":
            value = angle_axis_value(keys, i)
            prefix = CELESTIAL_PREFIXES.get(ctype.strip().upper()[:4])
            if value is not None and prefix:
                celestial[prefix] = value
            if n > 1:
                extra.append(i)
        elif n > 1:
            extra.append(i)
    if spectral is None:
        unknown = [keys.text(f"CTYPE{i}") for i in extra]
        unknown = [u for u in unknown if u and classify(u) == "other"]
        if unknown:
            raise ReadProblem(f"unknown spectral CTYPE {unknown[0]!r}")
        raise NoSpectralAxis("no spectral axis")
    if extra:
        shape = "x".join(str(naxes[i - 1]) for i in extra)
        raise ReadProblem(f"not a single spectrum: {shape} positions besides the spectral axis")
    return _Axes(spectral, stokes, celestial)


def spectra_from_array(
    data: np.ndarray, keys: Keys, origin: Origin, fmt: str, unit: str | None = None
) -> Spectrum:
    """One Spectrum from an N-d array whose FITS axis i is numpy axis ndim - i.

    ``keys`` holds the WCS and metadata keywords; keywords of axes beyond ``data.ndim``
    (e.g. per-row RA/DEC axes of a table) describe degenerate axes.
    """
    ndim = data.ndim
    naxes = [data.shape[ndim - i] for i in range(1, ndim + 1)]
    if any(n == 0 for n in naxes):
        raise ReadProblem("zero-length axis")
    axes = _find_axes(keys, naxes)
    axis = spectral_axis(keys, axes.spectral, naxes[axes.spectral - 1])
    check_frequencies(axis.freq_hz)
    labels = ["I"]
    if axes.stokes is not None:
        n_stokes = naxes[axes.stokes - 1] if axes.stokes <= ndim else 1
        labels = stokes_labels(keys, axes.stokes, n_stokes)
    arr = _as_products(data, axes.spectral, axes.stokes, len(labels))
    freq = axis.freq_hz
    if freq[0] > freq[-1]:
        freq = freq[::-1].copy()
        arr = arr[:, ::-1]
    ra, dec = celestial_position(keys, axes.celestial)
    intensity = _products(arr, labels)
    meta = {"format": fmt, "ctype": axis.ctype}
    if len(intensity) < len(labels):
        meta["dropped_all_nan"] = ",".join(k for k in labels if k not in intensity)
    for key in ("SSYSOBS", "SSYSSRC", "OBSERVER", "LINE", "VSOURCE"):
        text = keys.text(key)
        if text:
            meta[key.lower()] = text
    return Spectrum(
        freq_hz=freq,
        intensity=intensity,
        intensity_unit=unit if unit is not None else (keys.text("BUNIT") or ""),
        source=keys.text("OBJECT") or "",
        origin=origin,
        ra_deg=ra,
        dec_deg=dec,
        obs_time=observation_time(keys),
        site=observing_site(keys),
        telescope=keys.text("TELESCOP") or "",
        specsys=declared_frame(keys, axis.ctype),
        rest_freq_hz=axis.rest_freq_hz,
        velocity_convention=axis.convention,
        velosys_ms=keys.number("VELOSYS"),
        z_source=keys.number("ZSOURCE"),
        meta=meta,
    )


def _as_products(data: np.ndarray, spectral: int, stokes: int | None, n_prod: int) -> np.ndarray:
    """(n_products, n_channels) float64 view of the data, degenerate axes taken at index 0."""
    ndim = data.ndim
    index: list[Any] = [0] * ndim
    index[ndim - spectral] = slice(None)
    if stokes is not None and stokes <= ndim:
        index[ndim - stokes] = slice(None)
    arr = np.asarray(data[tuple(index)], dtype=np.float64)
    if stokes is not None and stokes <= ndim and stokes < spectral:
        arr = arr.T  # numpy order puts the higher FITS axis first
    return arr.reshape(n_prod, -1)


def _products(arr: np.ndarray, labels: list[str]) -> dict[str, np.ndarray]:
    """Products keyed by label; +-inf become NaN; all-NaN products dropped, all NaN is an error."""
    out: dict[str, np.ndarray] = {}
    for label, row in zip(labels, arr, strict=True):
        values = np.array(row, dtype=np.float64)
        values[np.isinf(values)] = np.nan
        if not np.all(np.isnan(values)):
            out[label] = values
    if not out:
        raise ReadProblem("data all NaN")
    return out


def from_array(data: np.ndarray, header: dict[str, Any], index: int, path: str) -> list[Spectrum]:
    """The spectrum of an image HDU's data array and keywords."""
    return [spectra_from_array(data, Keys.upper(header), Origin(path, hdu=index), NAME)]
