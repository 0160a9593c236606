"""CSV spectra: ``# KEY = value`` metadata lines, a header row, one row per channel.

The metadata keywords are the FITS ones (OBJECT, DATE-OBS, RA, DEC, RESTFREQ, SPECSYS,
TELESCOP, BUNIT, OBSGEO-X...). The spectral column is one of ``freq_hz``, ``freq_khz``,
``freq_mhz``, ``freq_ghz`` or a velocity column ``vel_kms`` (convention from CTYPE1 =
VRAD/VOPT/VELO, or VELREF >= 256 for radio; radio when nothing says otherwise, the radio
astronomers' common practice), ``vrad_kms``, ``vopt_kms``, ``vrel_kms`` (relativistic).
Intensity columns are Stokes/polarization labels (``i``, ``q``, ``u``, ``v``, ``rr``, ``ll``,
``xx``, ``yy``, ...), optionally with a unit (``i_jy``, ``v_mjy``), or one plain intensity column
(``flux_jy``, ``ta_k``, ``tb_k``, ``tmb_k``, ``intensity``) taken as Stokes I. Other columns
(``channel``, ``weight``...) are ignored. Delimiter: comma, tab or semicolon, one per file.
"""

from __future__ import annotations

import re

import numpy as np

from speccat.io.axis import C_MS, STOKES_NUMBERS, check_frequencies
from speccat.io.keywords import (
    Keys,
    ReadProblem,
    celestial_position,
    declared_frame,
    observation_time,
    observing_site,
    rest_frequency_hz,
)
from speccat.model import Convention, Origin, Spectrum

NAME = "csv"
FREQ_COLUMNS = {"freq_hz": 1.0, "freq_khz": 1e3, "freq_mhz": 1e6, "freq_ghz": 1e9}
VEL_COLUMNS = {
    "vrad_kms": Convention.RADIO,
    "vopt_kms": Convention.OPTICAL,
    "vrel_kms": Convention.RELATIVISTIC,
    "vel_kms": None,
}
UNITS = {"jy": "Jy", "mjy": "mJy", "k": "K", "mk": "mK"}
PLAIN_INTENSITY = ("flux", "ta", "tb", "tmb", "tant", "t", "s", "intensity", "tastar")
_META = re.compile(r"^#\s*([A-Za-z][A-Za-z0-9_-]{0,15})\s*=\s*(.*?)\s*$")
_DELIMITERS = (",", "\t", ";")


def _value(text: str) -> str | float:
    """A metadata value: quoted string, number, or bare string; trailing ``/ comment`` dropped."""
    if text[:1] in "'\"" and len(text) >= 2:
        end = text.find(text[0], 1)
        return text[1:end] if end > 0 else text[1:]
    text = text.split(" /", 1)[0].strip()
    try:
        return float(text)
    except ValueError:
        return text


def _split_lines(text: str) -> tuple[dict[str, str | float], list[str], int]:
    meta: dict[str, str | float] = {}
    lines = text.splitlines()
    for number, line in enumerate(lines):
        stripped = line.strip()
        if not stripped:
            continue
        if stripped.startswith("#"):
            m = _META.match(stripped)
            if m:
                meta[m.group(1).upper()] = _value(m.group(2))
            continue
        return meta, lines[number:], number + 1
    raise ReadProblem("no header row (file has only comments or is empty)")


def _delimiter(header: str) -> str:
    found = [d for d in _DELIMITERS if d in header]
    if len(found) > 1:
        raise ReadProblem("mixed delimiters in the header row")
    return found[0] if found else ","


def _intensity_columns(names: list[str], bunit: str) -> list[tuple[int, str, str]]:
    """(column index, product label, unit) for each intensity column."""
    stokes, plain = [], []
    for idx, name in enumerate(names):
        label, _, unit_part = name.partition("_")
        unit = UNITS.get(unit_part) if unit_part else bunit
        if unit is None:
            continue
        if label.upper() in STOKES_NUMBERS:
            stokes.append((idx, label.upper(), unit))
        elif label in PLAIN_INTENSITY:
            plain.append((idx, "I", unit))
    if stokes:
        return stokes
    if len(plain) > 1:
        raise ReadProblem("several intensity columns: " + ", ".join(names[i] for i, _, _ in plain))
    if not plain:
        raise ReadProblem("no intensity column (expected i, v, flux_jy, ta_k, ...)")
    return plain


def _numbers(rows: list[str], delim: str, width: int, first_line: int) -> np.ndarray:
    """The data rows as a (rows, width) float64 array; ReadProblem names the first bad line."""
    try:
        table = np.loadtxt(rows, delimiter=delim, dtype=np.float64, ndmin=2, comments=None)
    except ValueError:
        table = None
    if table is not None and table.shape == (len(rows), width):
        return table
    for k, row in enumerate(rows):
        parts = row.split(delim)
        if len(parts) != width:
            if any(d != delim and d in row for d in _DELIMITERS):
                raise ReadProblem(f"line {first_line + k}: mixed delimiters")
            raise ReadProblem(f"line {first_line + k}: {len(parts)} fields, expected {width}")
        for cell in parts:
            try:
                float(cell)
            except ValueError:
                raise ReadProblem(
                    f"line {first_line + k}: {cell.strip()[:20]!r} is not a number"
                ) from None
    raise ReadProblem("unreadable numbers")


def read_text(text: str, path: str) -> list[Spectrum]:
    """The one Spectrum of a CSV file's text."""
    meta, body, header_line = _split_lines(text)
    delim = _delimiter(body[0])
    names = [n.strip().lower().strip('"') for n in body[0].split(delim)]
    rows = [r for r in body[1:] if r.strip() and not r.lstrip().startswith("#")]
    if not rows:
        raise ReadProblem("zero-length axis (no data rows)")
    keys = Keys(meta)
    spec_idx = next((i for i, n in enumerate(names) if n in FREQ_COLUMNS or n in VEL_COLUMNS), None)
    if spec_idx is None:
        raise ReadProblem("no spectral column (expected freq_mhz, freq_ghz, freq_hz or vel_kms)")
    products = _intensity_columns(names, keys.text("BUNIT") or "")
    table = _numbers(rows, delim, len(names), header_line + 1)
    naxis1 = keys.number("NAXIS1")
    if naxis1 is not None and int(naxis1) != len(table):
        raise ReadProblem(f"NAXIS1 = {int(naxis1)} but {len(table)} data rows")
    freq, convention, ctype = _frequencies(names[spec_idx], table[:, spec_idx], keys)
    check_frequencies(freq)
    order = slice(None, None, -1) if freq[0] > freq[-1] else slice(None)
    intensity: dict[str, np.ndarray] = {}
    for idx, label, _ in products:
        values = np.array(table[order, idx], dtype=np.float64)
        values[np.isinf(values)] = np.nan
        if label in intensity:
            raise ReadProblem(f"two columns give Stokes {label}")
        if not np.all(np.isnan(values)):
            intensity[label] = values
    if not intensity:
        raise ReadProblem("data all NaN")
    ra, dec = celestial_position(keys, {})
    info = {"format": NAME, "ctype": ctype}
    if len(intensity) < len(products):
        info["dropped_all_nan"] = ",".join(p[1] for p in products if p[1] not in intensity)
    return [
        Spectrum(
            freq_hz=np.ascontiguousarray(freq[order]),
            intensity=intensity,
            intensity_unit=products[0][2],
            source=keys.text("OBJECT") or "",
            origin=Origin(path),
            ra_deg=ra,
            dec_deg=dec,
            obs_time=observation_time(keys),
            site=observing_site(keys),
            telescope=keys.text("TELESCOP") or "",
            specsys=declared_frame(keys, ctype),
            rest_freq_hz=rest_frequency_hz(keys),
            velocity_convention=convention,
            velosys_ms=keys.number("VELOSYS"),
            z_source=keys.number("ZSOURCE"),
            meta=info,
        )
    ]


def _frequencies(
    name: str, values: np.ndarray, keys: Keys
) -> tuple[np.ndarray, Convention | None, str]:
    if name in FREQ_COLUMNS:
        return values * FREQ_COLUMNS[name], None, keys.text("CTYPE1") or "FREQ"
    convention = VEL_COLUMNS[name]
    ctype = (keys.text("CTYPE1") or "").upper()
    if convention is None:
        velref = keys.number("VELREF")
        if ctype.startswith("VOPT") or ctype.startswith("FELO"):
            convention = Convention.OPTICAL
        elif ctype.startswith("VELO") and velref is None and len(ctype) == 4:
            convention = Convention.RELATIVISTIC
        elif ctype.startswith("VELO") and velref is not None and velref < 256:
            convention = Convention.OPTICAL
        else:
            convention = Convention.RADIO
    rest = rest_frequency_hz(keys)
    if rest is None:
        raise ReadProblem(f"velocity column {name!r} without RESTFREQ")
    beta = values * 1e3 / C_MS
    with np.errstate(all="ignore"):
        if convention is Convention.RADIO:
            freq = rest * (1.0 - beta)
        elif convention is Convention.OPTICAL:
            freq = rest / (1.0 + beta)
        else:
            freq = rest * np.sqrt((1.0 - beta) / (1.0 + beta))
    label = {"radio": "VRAD", "optical": "VOPT", "relativistic": "VELO"}[convention.value]
    return freq, convention, ctype or label
