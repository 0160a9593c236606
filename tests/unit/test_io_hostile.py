"""Hostile input: whatever bytes a file holds, read() returns spectra or raises SpectrumReadError,
and it never changes the file."""

from __future__ import annotations

import gzip
import hashlib
import io
import tempfile
from pathlib import Path

import numpy as np
from astropy.io import fits
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from speccat.errors import SpectrumReadError
from speccat.io import read


def _valid_files() -> dict[str, bytes]:
    n = 48
    h = fits.Header()
    h["CTYPE1"], h["CRVAL1"], h["CDELT1"], h["CRPIX1"] = "VRAD", -2.0e4, 500.0, 1.0
    h["CTYPE2"], h["CRVAL2"], h["CDELT2"], h["CRPIX2"] = "STOKES", 1.0, 3.0, 1.0
    h["RESTFRQ"], h["OBJECT"], h["DATE-OBS"] = 1.6673590e9, "BRO-Cloud 2", "2026-03-14T20:00:00"
    h["OBSGEO-X"], h["OBSGEO-Y"], h["OBSGEO-Z"] = 3.8e6, -2.0e5, 5.0e6
    image = io.BytesIO()
    fits.PrimaryHDU(data=np.ones((2, n), dtype=np.float32), header=h).writeto(image)
    cols = [
        fits.Column(name="DATA", format=f"{n}E", array=np.ones((2, n))),
        fits.Column(name="CRVAL1", format="D", array=np.array([1.42e9, 1.43e9])),
        fits.Column(name="CDELT1", format="D", array=np.array([1e4, -1e4])),
        fits.Column(name="CTYPE1", format="4A", array=np.array(["FREQ", "FREQ"])),
    ]
    table = io.BytesIO()
    fits.HDUList([fits.PrimaryHDU(), fits.BinTableHDU.from_columns(cols)]).writeto(table)
    cells = np.empty(2, dtype=object)
    cells[0], cells[1] = np.ones(n, dtype="f4"), np.arange(n, dtype="f4")
    heap_cols = [fits.Column(name="FLUX", format=f"PE({n})", array=cells), *cols[1:]]
    heap = io.BytesIO()  # variable-length column: read through astropy, not the direct path
    fits.HDUList([fits.PrimaryHDU(), fits.BinTableHDU.from_columns(heap_cols)]).writeto(heap)
    csv = "# OBJECT = 'x'\n# RESTFREQ = 1420405751.768\nvel_kms,i,v\n" + "".join(
        f"{-50 + k},{k * 0.1},{-k * 0.01}\n" for k in range(n)
    )
    return {
        "image.fits": image.getvalue(),
        "table.fits": table.getvalue(),
        "heap.fits": heap.getvalue(),
        "image.fits.gz": gzip.compress(image.getvalue(), mtime=0),
        "spec.csv": csv.encode(),
        "spec.csv.gz": gzip.compress(csv.encode(), mtime=0),
    }


VALID = _valid_files()
SUFFIX_NAMES = ["x.fits", "x.fit", "x.fts", "x.fits.gz", "x.csv", "x.csv.gz", "x.dat"]


def _check(path: Path, content: bytes) -> None:
    path.write_bytes(content)
    before = hashlib.sha256(path.read_bytes()).hexdigest()
    try:
        spectra = read(path)
    except SpectrumReadError as exc:
        assert "\n" not in str(exc) and exc.reason
    else:
        for s in spectra:
            assert np.all(np.diff(s.freq_hz) > 0)
            assert all(v.shape == s.freq_hz.shape for v in s.intensity.values())
    assert hashlib.sha256(path.read_bytes()).hexdigest() == before


def test_valid_samples_read() -> None:
    with tempfile.TemporaryDirectory() as tmp:
        for name, content in VALID.items():
            (Path(tmp) / name).write_bytes(content)
            assert read(Path(tmp) / name)


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(name=st.sampled_from(SUFFIX_NAMES), content=st.binary(max_size=6000))
def test_random_bytes_only_raise_spectrum_read_error(name: str, content: bytes) -> None:
    with tempfile.TemporaryDirectory() as tmp:
        _check(Path(tmp) / name, content)


@st.composite
def _mutated(draw: st.DrawFn) -> tuple[str, bytes]:
    name = draw(st.sampled_from(sorted(VALID)))
    data = bytearray(VALID[name])
    for _ in range(draw(st.integers(1, 6))):
        kind = draw(st.sampled_from(["flip", "cut", "insert", "card"]))
        at = draw(st.integers(0, max(0, len(data) - 1)))
        if kind == "flip" and data:
            data[at] = draw(st.integers(0, 255))
        elif kind == "cut":
            del data[at:]
        elif kind == "insert":
            data[at:at] = draw(st.binary(min_size=1, max_size=40))
        elif kind == "card" and not name.endswith(".gz"):
            # overwrite a header value with printable junk (numbers, quotes, huge exponents)
            junk = draw(st.sampled_from(["0", "-1E400", "'XYZ'", "NaN", "T", "1D3", "''", "99999"]))
            start = at - at % 80 + 10  # the value field of the card that holds byte `at`
            data[start : start + 20] = junk.ljust(20).encode()[: len(data[start : start + 20])]
    return name, bytes(data)


@settings(max_examples=250, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(case=_mutated())
def test_mutated_valid_files_only_raise_spectrum_read_error(case: tuple[str, bytes]) -> None:
    name, content = case
    with tempfile.TemporaryDirectory() as tmp:
        _check(Path(tmp) / name, content)


def test_reading_never_changes_the_file(tmp_path: Path) -> None:
    for name, content in VALID.items():
        path = tmp_path / name
        path.write_bytes(content)
        path.chmod(0o444)
        stat_before = path.stat()
        read(path)
        assert path.read_bytes() == content
        assert path.stat().st_mtime_ns == stat_before.st_mtime_ns
