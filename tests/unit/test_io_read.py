"""The readers: every input convention, its metadata, and one clear error per kind of bad file."""

from __future__ import annotations

import gzip
from datetime import UTC, datetime
from pathlib import Path

import numpy as np
import pytest
from astropy.io import fits

from speccat.errors import SpectrumReadError
from speccat.io import SUFFIXES, read

N = 64
F0, DF = 1.6650e9, 5.0e3


def _cards(**extra: object) -> fits.Header:
    h = fits.Header()
    h["CTYPE1"], h["CRVAL1"], h["CDELT1"], h["CRPIX1"] = "FREQ", F0, DF, 1.0
    for key, value in extra.items():
        h[key.replace("_", "-")] = value
    return h


def _write(path: Path, data: np.ndarray, header: fits.Header) -> Path:
    fits.PrimaryHDU(data=data, header=header).writeto(path)
    return path


def _ramp(n: int = N) -> np.ndarray:
    return np.arange(n, dtype=float) * 0.5 - 3.0


def test_suffixes_cover_the_documented_forms() -> None:
    for suffix in (".fits", ".fit", ".fts", ".fits.gz", ".fit.gz", ".csv", ".csv.gz"):
        assert suffix in SUFFIXES


def test_primary_image_with_metadata(tmp_path: Path) -> None:
    h = _cards(
        OBJECT="BRO-Nebula 7",
        BUNIT="K",
        TELESCOP="Test dish",
        DATE_OBS="2026-03-14T23:10:05.25",
        RA=150.5,
        DEC=-12.25,
        RESTFRQ=1.6654018e9,
        SPECSYS="TOPOCENT",
        VELOSYS=-1234.5,
        ZSOURCE=0.001,
        SITELONG=-3.5,
        SITELAT=52.0,
        SITEELEV=95.0,
    )
    s = read(_write(tmp_path / "a.fits", _ramp(), h))[0]
    np.testing.assert_array_equal(s.freq_hz, F0 + np.arange(N) * DF)
    np.testing.assert_array_equal(s.intensity["I"], _ramp())
    assert (s.source, s.intensity_unit, s.telescope, s.specsys) == (
        "BRO-Nebula 7",
        "K",
        "Test dish",
        "TOPOCENT",
    )
    assert s.obs_time == datetime(2026, 3, 14, 23, 10, 5, 250000, tzinfo=UTC)
    assert (s.ra_deg, s.dec_deg) == (150.5, -12.25)  # no EQUINOX/RADESYS: ICRS as given
    assert s.rest_freq_hz == 1.6654018e9 and s.velosys_ms == -1234.5 and s.z_source == 0.001
    assert s.site is not None and (s.site.lon_deg, s.site.lat_deg, s.site.height_m) == (
        -3.5,
        52.0,
        95.0,
    )
    assert s.origin.path == str(tmp_path / "a.fits") and s.origin.hdu == 0 and s.origin.row is None
    assert s.velocity_convention is None


def test_degenerate_axes_and_stokes_axis(tmp_path: Path) -> None:
    h = _cards()
    h["CTYPE2"], h["CRVAL2"], h["CDELT2"], h["CRPIX2"] = "RA---SIN", 10.0, -0.01, 1.0
    h["CTYPE3"], h["CRVAL3"], h["CDELT3"], h["CRPIX3"] = "DEC--SIN", 20.0, 0.01, 1.0
    h["CTYPE4"], h["CRVAL4"], h["CDELT4"], h["CRPIX4"] = "STOKES", -1.0, -1.0, 1.0
    data = np.stack([_ramp(), 2 * _ramp()]).reshape(2, 1, 1, N)
    s = read(_write(tmp_path / "s.fits", data, h))[0]
    assert s.stokes == ("RR", "LL")  # FITS WCS Paper I Table 7: -1 RR, -2 LL
    np.testing.assert_array_equal(s.intensity["LL"], 2 * _ramp())
    assert (s.ra_deg, s.dec_deg) == (10.0, 20.0)


def test_stokes_axis_before_spectral_axis(tmp_path: Path) -> None:
    h = fits.Header()
    h["CTYPE1"], h["CRVAL1"], h["CDELT1"], h["CRPIX1"] = "STOKES", 1.0, 3.0, 1.0
    h["CTYPE2"], h["CRVAL2"], h["CDELT2"], h["CRPIX2"] = "FREQ", F0, -DF, 1.0
    data = np.stack([_ramp(), -_ramp()], axis=1)  # numpy (freq, stokes)
    s = read(_write(tmp_path / "s.fits", data, h))[0]
    assert s.stokes == ("I", "V")
    np.testing.assert_array_equal(s.intensity["V"], (-_ramp())[::-1])  # descending -> reversed


def test_image_extension_and_several_hdus(tmp_path: Path) -> None:
    one = fits.ImageHDU(data=_ramp(), header=_cards(OBJECT="first"))
    two = fits.ImageHDU(data=-_ramp(), header=_cards(OBJECT="second"))
    mask = fits.ImageHDU(data=np.zeros((3, 3)))
    path = tmp_path / "m.fits"
    fits.HDUList([fits.PrimaryHDU(), one, mask, two]).writeto(path)
    spectra = read(path)
    assert [(s.source, s.origin.hdu) for s in spectra] == [("first", 1), ("second", 3)]


def test_integer_data_scaled_and_blank_is_nan(tmp_path: Path) -> None:
    raw = np.arange(N, dtype=np.int16)
    raw[5] = -32768
    path = tmp_path / "i.fits"
    hdu = fits.PrimaryHDU(data=raw, header=_cards())
    hdu.header["BSCALE"], hdu.header["BZERO"], hdu.header["BLANK"] = 0.5, 10.0, -32768
    hdu.writeto(path)
    values = read(path)[0].intensity["I"]
    # FITS standard 4.0 §5.3: physical = BZERO + BSCALE x stored; BLANK marks undefined pixels.
    assert np.isnan(values[5])
    np.testing.assert_array_equal(values[6:], 10.0 + 0.5 * np.arange(6, N))


def test_nan_channels_kept(tmp_path: Path) -> None:
    data = _ramp()
    data[[3, 9]] = np.nan
    s = read(_write(tmp_path / "n.fits", data, _cards()))[0]
    assert np.isnan(s.intensity["I"][[3, 9]]).all() and np.isfinite(s.intensity["I"]).sum() == N - 2


@pytest.mark.parametrize(
    "ctype,velref,specsys",
    [
        ("VELO-LSR", None, "LSRK"),
        ("VELO-HEL", None, "BARYCENT"),
        ("VELO-OBS", None, "TOPOCENT"),
        ("VELO", 257, "LSRK"),
        ("VELO", 2, "BARYCENT"),
        ("VELO", 259, "TOPOCENT"),
        ("FREQ", None, ""),
    ],
)
def test_legacy_frames(tmp_path: Path, ctype: str, velref: int | None, specsys: str) -> None:
    h = _cards(RESTFREQ=1.6654018e9)
    h["CTYPE1"] = ctype
    if ctype != "FREQ":
        h["CRVAL1"], h["CDELT1"] = -1.0e4, 200.0
    if velref is not None:
        h["VELREF"] = velref
    s = read(_write(tmp_path / "l.fits", _ramp(), h))[0]
    assert s.specsys == specsys  # Paper III §7.1 (legacy VELREF convention); unknown stays ""


def test_time_forms(tmp_path: Path) -> None:
    cases = [
        ({"DATE_OBS": "2026-03-15"}, datetime(2026, 3, 15, tzinfo=UTC)),
        (
            {"DATE_OBS": "2026-03-15", "TIME_OBS": "01:02:03"},
            datetime(2026, 3, 15, 1, 2, 3, tzinfo=UTC),
        ),
        ({"DATE_OBS": "15/03/96", "UT": "04:00:00"}, datetime(1996, 3, 15, 4, tzinfo=UTC)),
        ({"MJD_OBS": 61114.0}, datetime(2026, 3, 15, tzinfo=UTC)),
    ]
    for k, (cards, expected) in enumerate(cases):
        s = read(_write(tmp_path / f"t{k}.fits", _ramp(), _cards(**cards)))[0]
        assert s.obs_time == expected


def test_sexagesimal_ra_dec(tmp_path: Path) -> None:
    s = read(_write(tmp_path / "r.fits", _ramp(), _cards(RA="10:30:00", DEC="-05:15:00")))[0]
    assert s.ra_deg == pytest.approx(157.5) and s.dec_deg == pytest.approx(-5.25)


def _table(path: Path, header_axis: bool) -> Path:
    rows = 3
    data = np.arange(rows * N, dtype=float).reshape(rows, N)
    cols = [fits.Column(name="DATA", format=f"{N}E", unit="Jy", array=data)]
    cols.append(fits.Column(name="OBJECT", format="12A", array=np.array(["s0", "s1", "s2"])))
    cols.append(
        fits.Column(name="DATE-OBS", format="19A", array=np.array(["2026-03-14T22:00:00"] * 3))
    )
    h = fits.Header()
    if header_axis:
        for key, value in _cards().items():
            h[key] = value
    else:
        cols.append(fits.Column(name="CTYPE1", format="4A", array=np.array(["FREQ"] * 3)))
        cols.append(
            fits.Column(name="CRVAL1", format="D", array=np.array([F0, F0 + 1e6, F0 + 2e6]))
        )
        cols.append(fits.Column(name="CDELT1", format="D", array=np.array([DF, -DF, DF])))
        cols.append(fits.Column(name="CRPIX1", format="D", array=np.ones(3)))
    h["TELESCOP"] = "Test dish"
    fits.HDUList([fits.PrimaryHDU(), fits.BinTableHDU.from_columns(cols, header=h)]).writeto(path)
    return path


@pytest.mark.parametrize("header_axis", [False, True])
def test_binary_table_rows(tmp_path: Path, header_axis: bool) -> None:
    spectra = read(_table(tmp_path / "t.fits", header_axis))
    assert [s.source for s in spectra] == ["s0", "s1", "s2"]
    assert [s.origin.row for s in spectra] == [0, 1, 2]
    assert all(
        s.origin.hdu == 1 and s.intensity_unit == "Jy" and s.telescope == "Test dish"
        for s in spectra
    )
    if header_axis:
        np.testing.assert_array_equal(spectra[1].freq_hz, F0 + np.arange(N) * DF)
    else:
        np.testing.assert_array_equal(spectra[1].freq_hz, (F0 + 1e6 - np.arange(N) * DF)[::-1])
        np.testing.assert_array_equal(spectra[1].intensity["I"], np.arange(N, 2 * N)[::-1])


def test_csv_with_metadata_and_stokes(tmp_path: Path) -> None:
    text = (
        "# OBJECT = 'BRO-Galaxy 12'\n# DATE-OBS = 2026-03-15T01:00:00\n# RESTFREQ = 1420405751.768\n"
        "# SPECSYS = LSRK\n# a free comment line\nfreq_mhz,i_jy,v_jy,channel\n"
        + "".join(f"{1420.0 + 0.01 * k},{k},{-k},{k}\n" for k in range(N))
    )
    path = tmp_path / "c.csv"
    path.write_text(text)
    s = read(path)[0]
    assert (s.source, s.specsys, s.intensity_unit, s.stokes) == (
        "BRO-Galaxy 12",
        "LSRK",
        "Jy",
        ("I", "V"),
    )
    np.testing.assert_allclose(s.freq_hz, (1420.0 + 0.01 * np.arange(N)) * 1e6, rtol=1e-15)
    np.testing.assert_array_equal(s.intensity["V"], -np.arange(N))


@pytest.mark.parametrize(
    "column,unit", [("flux_jy", "Jy"), ("ta_k", "K"), ("tb_k", "K"), ("intensity", "mK")]
)
def test_csv_single_intensity_column(tmp_path: Path, column: str, unit: str) -> None:
    body = "".join(f"{22.235 + 1e-5 * k}\t{k}\n" for k in range(N))
    path = tmp_path / "c.csv.gz"
    path.write_bytes(gzip.compress(f"# BUNIT = mK\nfreq_ghz\t{column}\n{body}".encode()))
    s = read(path)[0]
    assert s.stokes == ("I",) and s.intensity_unit == unit


# ---------------------------------------------------------------- broken files, one reason each


def _fits_bytes(data: np.ndarray, header: fits.Header) -> bytes:
    from io import BytesIO

    buf = BytesIO()
    fits.PrimaryHDU(data=data, header=header).writeto(buf)
    return buf.getvalue()


def _broken_cases() -> list[tuple[str, bytes, str]]:
    good = _fits_bytes(_ramp(1000), _cards())
    nan = _fits_bytes(np.full(N, np.nan), _cards())
    zero = _cards()
    zero["CDELT1"] = 0.0
    neg = _cards()
    neg["CRVAL1"] = -1.0e6
    unknown = _cards()
    unknown["CTYPE1"] = "XYZ"
    no_axis = _cards()
    del no_axis["CTYPE1"]
    velo = _cards()
    velo["CTYPE1"] = "VRAD"
    table = fits.BinTableHDU.from_columns([fits.Column(name="TSYS", format="D", array=np.ones(2))])
    from io import BytesIO

    tbuf = BytesIO()
    fits.HDUList([fits.PrimaryHDU(), table]).writeto(tbuf)
    naxis = bytearray(good)
    at = naxis.index(b"NAXIS1  =")
    naxis[at : at + 80] = b"NAXIS2  = ".ljust(80)
    csv_head = "freq_mhz,ta_k\n"
    return [
        ("x.fits", b"this is not a FITS file at all", "not a FITS file"),
        ("x.fits", good[: 2880 + 2000], "file truncated"),
        ("x.fits", _fits_bytes(_ramp(), no_axis), "no spectral axis"),
        ("x.fits", _fits_bytes(_ramp(), zero), "CDELT1 is zero"),
        ("x.fits", nan, "data all NaN"),
        ("x.fits", _fits_bytes(_ramp(), unknown), "unknown spectral CTYPE 'XYZ'"),
        ("x.fits", _fits_bytes(_ramp(), neg), "not positive"),
        ("x.fits", _fits_bytes(_ramp(), velo), "without RESTFRQ"),
        ("x.fits", tbuf.getvalue(), "no intensity column"),
        ("x.fits", bytes(naxis), "NAXIS1 missing"),
        ("x.fits", b"", "empty file"),
        ("x.fits.gz", b"\x1f\x8b\x08\x00" + b"\xff" * 40, "gzip data corrupt"),
        ("x.fits.gz", gzip.compress(good)[:500], "gzip file truncated"),
        ("x.csv", b"freq_mhz,weight\n1,2\n3,4\n", "no intensity column"),
        ("x.csv", b"# OBJECT = caf\xe9\nfreq_mhz,ta_k\n1,2\n", "not UTF-8"),
        ("x.csv", b"freq_mhz,ta_k;i\n1,2;3\n", "mixed delimiters"),
        ("x.csv", csv_head.encode(), "zero-length axis"),
        ("x.csv", f"# NAXIS1 = 5\n{csv_head}1,2\n3,4\n".encode(), "NAXIS1 = 5 but 2 data rows"),
        ("x.csv", f"{csv_head}1,2\n3,abc\n".encode(), "'abc' is not a number"),
        ("x.csv", f"{csv_head}1,2\n3\n".encode(), "1 fields, expected 2"),
        ("x.csv", f"{csv_head}-1,2\n3,4\n".encode(), "not positive"),
        ("x.csv", f"{csv_head}1,2\n1,4\n".encode(), "not strictly monotonic"),
        ("x.dat", b"hello", "not a spectrum file speccat knows"),
    ]


@pytest.mark.parametrize(
    "name,content,reason", _broken_cases(), ids=[c[2] for c in _broken_cases()]
)
def test_each_broken_file_has_its_own_one_line_reason(
    tmp_path: Path, name, content, reason
) -> None:
    path = tmp_path / name
    path.write_bytes(content)
    with pytest.raises(SpectrumReadError) as info:
        read(path)
    message = str(info.value)
    assert reason in info.value.reason, message
    assert message.startswith(str(path)) and "\n" not in message
    assert info.value.path == str(path)


def test_broken_reasons_are_distinct(tmp_path: Path) -> None:
    reasons = []
    for k, (name, content, _) in enumerate(_broken_cases()):
        path = tmp_path / f"{k}{name}"
        path.write_bytes(content)
        with pytest.raises(SpectrumReadError) as info:
            read(path)
        reasons.append(info.value.reason)
    # two kinds recur across formats: "not positive" (FITS and CSV), "no intensity column"
    assert len(set(reasons)) >= len(reasons) - 2, reasons


def test_missing_file(tmp_path: Path) -> None:
    with pytest.raises(SpectrumReadError, match="cannot read file"):
        read(tmp_path / "nope.fits")


def test_cube_is_not_a_spectrum(tmp_path: Path) -> None:
    h = _cards()
    h["CTYPE2"], h["CRVAL2"], h["CDELT2"], h["CRPIX2"] = "RA---SIN", 10.0, -0.01, 1.0
    with pytest.raises(SpectrumReadError, match="not a single spectrum"):
        read(_write(tmp_path / "cube.fits", np.ones((4, N)), h))


def test_astropy_fallback_for_heap_tables_and_compressed_images(tmp_path: Path) -> None:
    cells = np.empty(2, dtype=object)
    cells[0], cells[1] = np.ones(N, dtype="f4"), np.arange(N, dtype="f4")
    cols = [
        fits.Column(name="SPECTRUM", format=f"PE({N})", array=cells),
        fits.Column(name="CRVAL1", format="D", array=np.array([F0, F0])),
        fits.Column(name="CDELT1", format="D", array=np.array([DF, -DF])),
        fits.Column(name="CTYPE1", format="4A", array=np.array(["FREQ", "FREQ"])),
    ]
    fits.HDUList([fits.PrimaryHDU(), fits.BinTableHDU.from_columns(cols)]).writeto(
        tmp_path / "h.fits"
    )
    rows = read(tmp_path / "h.fits")
    np.testing.assert_array_equal(rows[1].intensity["I"], np.arange(N)[::-1])
    comp = fits.CompImageHDU(data=_ramp().astype("f4"), header=_cards(OBJECT="packed"))
    fits.HDUList([fits.PrimaryHDU(), comp]).writeto(tmp_path / "c.fits")
    s = read(tmp_path / "c.fits")[0]
    assert s.source == "packed" and s.origin.hdu == 1
    np.testing.assert_array_equal(s.intensity["I"], _ramp())


def test_all_nan_product_dropped_and_noted(tmp_path: Path) -> None:
    h = _cards()
    h["CTYPE2"], h["CRVAL2"], h["CDELT2"], h["CRPIX2"] = "STOKES", 1.0, 3.0, 1.0
    data = np.stack([_ramp(), np.full(N, np.nan)])
    s = read(_write(tmp_path / "v.fits", data, h))[0]
    assert s.stokes == ("I",) and s.meta["dropped_all_nan"] == "V"
