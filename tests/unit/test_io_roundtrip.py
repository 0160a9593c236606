"""Writers and readers agree: one spectrum as FITS image, table row and CSV reads back identically."""

from __future__ import annotations

import tempfile
from datetime import UTC, datetime
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from speccat.errors import SpeccatError
from speccat.io import read
from speccat.io.writers import write_csv, write_fits_image, write_fits_table
from speccat.model import Origin, Site, Spectrum

PRODUCTS = [("I",), ("I", "V"), ("RR", "LL"), ("I", "Q", "U", "V"), ("XX", "YY")]


def _spectrum(n: int, crval: float, cdelt: float, products: tuple[str, ...], seed: int) -> Spectrum:
    """Channels exactly on the reader's own linear formula (crval + (p - 1) cdelt, p = 1..n)."""
    freq = crval + (np.arange(1.0, n + 1.0) - 1.0) * cdelt
    rng = np.random.default_rng(seed)
    intensity = {p: rng.normal(size=n) for p in products}
    intensity[products[0]][rng.integers(0, n)] = np.nan
    return Spectrum(
        freq_hz=freq,
        intensity=intensity,
        intensity_unit="Jy",
        source="BRO-Test 3",
        origin=Origin("memory"),
        ra_deg=201.5,
        dec_deg=-41.25,
        obs_time=datetime(2026, 3, 14, 21, 30, 15, 125000, tzinfo=UTC),
        site=Site(-2.5, 51.75, 210.0),
        telescope="Test dish",
        specsys="LSRK",
        rest_freq_hz=1_420_405_751.768,
        velosys_ms=-1523.25,
    )


def _same(a: Spectrum, b: Spectrum) -> None:
    np.testing.assert_array_equal(a.freq_hz, b.freq_hz)
    assert a.stokes == b.stokes
    for k in a.stokes:
        np.testing.assert_array_equal(a.intensity[k], b.intensity[k])
    for attr in ("intensity_unit", "source", "ra_deg", "dec_deg", "obs_time", "site", "telescope"):
        assert getattr(a, attr) == getattr(b, attr), attr
    for attr in ("specsys", "rest_freq_hz", "velosys_ms"):
        assert getattr(a, attr) == getattr(b, attr), attr


@settings(max_examples=25, deadline=None)
@given(
    n=st.integers(2, 300),
    crval=st.integers(10**8, 3 * 10**11),
    cdelt_units=st.integers(1, 2**20),
    sign=st.sampled_from([1.0, -1.0]),
    products=st.sampled_from(PRODUCTS),
    seed=st.integers(0, 2**32 - 1),
)
def test_image_table_csv_read_back_identical(n, crval, cdelt_units, sign, products, seed) -> None:
    # Dyadic channel widths keep every channel exactly representable, so "identical" is exact.
    cdelt = sign * cdelt_units / 64.0
    if crval + (n - 1) * cdelt <= 0:
        cdelt = -cdelt
    original = _spectrum(n, float(crval), cdelt, products, seed)
    with tempfile.TemporaryDirectory() as tmp:
        d = Path(tmp)
        write_fits_image(d / "s.fits", original, descending=cdelt < 0)
        write_fits_table(d / "t.fits.gz", [original, original])
        write_csv(d / "s.csv", original, axis="freq_hz")
        image = read(d / "s.fits")[0]
        rows = read(d / "t.fits.gz")
        text = read(d / "s.csv")[0]
    assert len(rows) == 2
    ascending = original if cdelt > 0 else _reversed(original)
    for got in (image, rows[0], rows[1], text):
        _same(ascending, got)


def _reversed(s: Spectrum) -> Spectrum:
    return Spectrum(
        freq_hz=s.freq_hz[::-1],
        intensity={k: v[::-1] for k, v in s.intensity.items()},
        intensity_unit=s.intensity_unit,
        source=s.source,
        origin=s.origin,
        ra_deg=s.ra_deg,
        dec_deg=s.dec_deg,
        obs_time=s.obs_time,
        site=s.site,
        telescope=s.telescope,
        specsys=s.specsys,
        rest_freq_hz=s.rest_freq_hz,
        velosys_ms=s.velosys_ms,
    )


@pytest.mark.parametrize("axis", ["FREQ", "VRAD", "VELO-LSR", "FREQ-LSR", "FELO-HEL"])
@pytest.mark.parametrize("options", [{}, {"descending": True, "sky_axes": True, "extension": True}])
def test_axis_kinds_round_trip(tmp_path: Path, axis: str, options: dict) -> None:
    original = _spectrum(512, 1.4185e9, 1.0e4, ("I", "V"), 7)
    write_fits_image(tmp_path / "a.fits", original, axis=axis, **options)
    got = read(tmp_path / "a.fits")[0]
    np.testing.assert_allclose(got.freq_hz, original.freq_hz, rtol=1e-13)
    np.testing.assert_array_equal(got.intensity["V"], original.intensity["V"])
    assert got.source == original.source and got.stokes == ("I", "V")


@pytest.mark.parametrize(
    "axis", ["freq_mhz", "freq_ghz", "vrad_kms", "vel_kms", "vopt_kms", "vrel_kms"]
)
def test_csv_axes_round_trip(tmp_path: Path, axis: str) -> None:
    original = _spectrum(256, 1.4185e9, 1.0e4, ("I",), 3)
    write_csv(tmp_path / "a.csv", original, axis=axis)
    got = read(tmp_path / "a.csv")[0]
    np.testing.assert_allclose(got.freq_hz, original.freq_hz, rtol=1e-14)
    assert got.obs_time == original.obs_time


def test_writers_refuse_to_overwrite(tmp_path: Path) -> None:
    s = _spectrum(16, 1.42e9, 1e4, ("I",), 1)
    for name, write in (
        ("a.fits", lambda p, **kw: write_fits_image(p, s, **kw)),
        ("b.fits", lambda p, **kw: write_fits_table(p, [s], **kw)),
        ("c.csv", lambda p, **kw: write_csv(p, s, **kw)),
    ):
        path = tmp_path / name
        path.write_bytes(b"keep me")
        with pytest.raises(SpeccatError, match="file exists"):
            write(path)
        assert path.read_bytes() == b"keep me"
        write(path, overwrite=True)
        assert read(path)[0].n_channels == 16


def test_gzip_output_is_deterministic(tmp_path: Path) -> None:
    s = _spectrum(64, 1.42e9, 1e4, ("I",), 1)
    write_fits_image(tmp_path / "a.fits.gz", s)
    write_fits_image(tmp_path / "b.fits.gz", s)
    assert (tmp_path / "a.fits.gz").read_bytes() == (tmp_path / "b.fits.gz").read_bytes()


def test_uneven_velocity_axis_refused(tmp_path: Path) -> None:
    s = _spectrum(512, 1.0e9, 2.0e7, ("I",), 1)  # wide band: not linear in optical velocity
    with pytest.raises(SpeccatError, match="not evenly spaced"):
        write_fits_image(tmp_path / "a.fits", s, axis="VOPT")
    assert not (tmp_path / "a.fits").exists()


def test_table_rows_with_unknown_metadata(tmp_path: Path) -> None:
    known = _spectrum(32, 1.42e9, 1e4, ("I",), 1)
    unknown = Spectrum(
        freq_hz=known.freq_hz,
        intensity=known.intensity,
        intensity_unit="Jy",
        source="",
        origin=Origin("memory"),
    )
    write_fits_table(tmp_path / "t.fits", [known, unknown])
    first, second = read(tmp_path / "t.fits")
    assert first.ra_deg == known.ra_deg and first.obs_time == known.obs_time
    assert second.ra_deg is None and second.obs_time is None and second.site is None
    assert second.specsys == "" and second.velosys_ms is None
