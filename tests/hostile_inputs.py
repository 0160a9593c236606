"""A generator of corrupt and odd spectrum files for the robustness tests (issue 11).

``generate(folder)`` writes well over a thousand inputs into ``folder`` and returns one
:class:`HostileInput` per entry, each with what a correct ingest must do with it:

* ``"reject"``: no correct reader can make a spectrum of it (truncated data, no spectral axis,
  CDELT = 0, all-NaN data, negative frequencies, random bytes, a folder, a link loop, ...);
  it must be listed as a failure with a one-line reason and leave nothing in the archive;
* ``"either"``: odd but perhaps readable (one mutated header card, a NaN channel, an extra CSV
  column, ...): it may be stored or rejected, but never crash anything;
* ``"accept"``: the valid base files themselves (controls: they must be stored).

Everything is made from a few valid base files written with plain astropy and the CSV
convention of DESIGN.md, then damaged at the byte level, with a fixed seed. Source and telescope
names are invented.
"""

from __future__ import annotations

import gzip
import hashlib
import io
import os
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Literal

import numpy as np
from astropy.io import fits

Expect = Literal["reject", "either", "accept"]

N_CHAN = 256
CARD = 80
BLOCK = 2880


@dataclass(frozen=True)
class HostileInput:
    """One generated input: where it is, what it is, what an ingest must do with it."""

    path: Path
    kind: str
    expect: Expect

    @property
    def sha256(self) -> str | None:
        """SHA-256 of the bytes behind the path (None for folders, links that lead nowhere, ...)."""
        try:
            if not self.path.is_file():
                return None
            return hashlib.sha256(self.path.read_bytes()).hexdigest()
        except OSError:
            return None


# --------------------------------------------------------------------------- valid bases


def _profile(rng: np.random.Generator) -> np.ndarray:
    chan = np.arange(N_CHAN, dtype=float)
    line = 2.0 * np.exp(-0.5 * ((chan - 120.0) / 4.0) ** 2)
    return (1.0 + line + rng.normal(0.0, 0.05, N_CHAN)).astype(np.float32)


def _common_cards(header: fits.Header, source: str) -> None:
    header["BUNIT"] = "K"
    header["OBJECT"] = source
    header["DATE-OBS"] = "2026-03-01T22:00:00"
    header["TELESCOP"] = "ROBUST-DISH-12"
    header["RA"] = 83.5
    header["DEC"] = -5.25
    header["SPECSYS"] = "LSRK"
    header["RESTFRQ"] = 1.420405751768e9


def _to_bytes(hdul: fits.HDUList) -> bytes:
    buf = io.BytesIO()
    hdul.writeto(buf)
    return buf.getvalue()


def base_image_1d(rng: np.random.Generator) -> bytes:
    """A 256-channel FREQ spectrum in the primary HDU, a Gaussian line near channel 120."""
    hdu = fits.PrimaryHDU(_profile(rng))
    h = hdu.header
    h["CTYPE1"] = "FREQ"
    h["CRVAL1"] = 1.4190e9
    h["CDELT1"] = 1.0e4
    h["CRPIX1"] = 1.0
    h["CUNIT1"] = "Hz"
    _common_cards(h, "RB-SRC-1")
    return _to_bytes(fits.HDUList([hdu]))


def base_image_4d(rng: np.random.Generator) -> bytes:
    """FREQ x RA x DEC x STOKES (I, V) cube with degenerate celestial axes."""
    data = np.stack([_profile(rng), (0.01 * rng.normal(size=N_CHAN)).astype(np.float32)])
    hdu = fits.PrimaryHDU(data.reshape(2, 1, 1, N_CHAN))
    h = hdu.header
    for i, (ctype, crval, cdelt, crpix) in enumerate(
        [
            ("FREQ", 1.6640e9, 1.0e3, 1.0),
            ("RA---SIN", 83.5, -0.01, 1.0),
            ("DEC--SIN", -5.25, 0.01, 1.0),
            ("STOKES", 1.0, 3.0, 1.0),
        ],
        1,
    ):
        h[f"CTYPE{i}"] = ctype
        h[f"CRVAL{i}"] = crval
        h[f"CDELT{i}"] = cdelt
        h[f"CRPIX{i}"] = crpix
    h["CUNIT1"] = "Hz"
    _common_cards(h, "RB-SRC-2")
    h["RESTFRQ"] = 1.665401e9
    return _to_bytes(fits.HDUList([hdu]))


def base_table(rng: np.random.Generator) -> bytes:
    """A binary table, one spectrum per row, axis keywords in the header and per row."""
    data = np.stack([_profile(rng) for _ in range(3)])
    cols = fits.ColDefs(
        [
            fits.Column(name="OBJECT", format="16A", array=np.array(["RB-SRC-3"] * 3)),
            fits.Column(name="CRVAL1", format="D", array=np.array([1.4190e9] * 3)),
            fits.Column(name="DATA", format=f"{N_CHAN}E", array=data),
        ]
    )
    hdu = fits.BinTableHDU.from_columns(cols)
    h = hdu.header
    h["CTYPE1"] = "FREQ"
    h["CDELT1"] = 1.0e4
    h["CRPIX1"] = 1.0
    h["CUNIT1"] = "Hz"
    _common_cards(h, "RB-SRC-3")
    h.remove("OBJECT")
    return _to_bytes(fits.HDUList([fits.PrimaryHDU(), hdu]))


def base_csv(rng: np.random.Generator) -> str:
    """CSV: ``# KEY = value`` lines, a header row, freq_mhz and i columns."""
    freq_mhz = 1419.0 + 0.01 * np.arange(N_CHAN)
    inten = _profile(rng)
    lines = [
        "# OBJECT = RB-SRC-4",
        "# DATE-OBS = 2026-03-01T23:00:00",
        "# TELESCOP = ROBUST-DISH-12",
        "# RA = 83.5",
        "# DEC = -5.25",
        "# SPECSYS = LSRK",
        "# BUNIT = K",
        "# RESTFRQ = 1420405751.768",
        "freq_mhz,i",
    ]
    lines += [f"{f:.6f},{v:.6f}" for f, v in zip(freq_mhz, inten, strict=True)]
    return "\n".join(lines) + "\n"


# --------------------------------------------------------------------------- byte surgery


def _header_end(raw: bytes, start: int = 0) -> int:
    """Offset just past the header block that starts at ``start`` (END card padded)."""
    pos = start
    while pos < len(raw):
        if raw[pos : pos + 8] == b"END     ":
            return start + ((pos + CARD - start + BLOCK - 1) // BLOCK) * BLOCK
        pos += CARD
    raise ValueError("no END card")


def _cards(raw: bytes, hdr_start: int = 0) -> list[tuple[int, str]]:
    """(offset, keyword) of every card of the header starting at ``hdr_start``, END excluded."""
    out = []
    pos = hdr_start
    while raw[pos : pos + 8] != b"END     ":
        key = raw[pos : pos + 8].decode("ascii").strip()
        if key:
            out.append((pos, key))
        pos += CARD
    return out


def _card(key: str, value: str) -> bytes:
    text = f"{key:<8}= {value:>20}" if not value.startswith("'") else f"{key:<8}= {value:<20}"
    return text[:CARD].ljust(CARD).encode("ascii")


def _set_card(raw: bytes, key: str, value: str, hdr_start: int = 0) -> bytes:
    """Replace ``key``'s value in place; append the card before END when it is missing."""
    for pos, k in _cards(raw, hdr_start):
        if k == key:
            return raw[:pos] + _card(key, value) + raw[pos + CARD :]
    end = hdr_start + len(_cards(raw, hdr_start)) * CARD
    while raw[end : end + 8] != b"END     ":
        end += CARD
    if raw[end + CARD : end + 2 * CARD].strip():
        raise ValueError("no room for another card")
    return raw[:end] + _card(key, value) + raw[end : end + CARD] + raw[end + 2 * CARD :]


def _delete_card(raw: bytes, pos: int, hdr_start: int = 0) -> bytes:
    """Remove the card at ``pos``, keeping the header's length (a blank card at its end)."""
    end = _header_end(raw, hdr_start)
    rest = raw[pos + CARD : end] + b" " * CARD
    return raw[:pos] + rest + raw[end:]


def _data_span(raw: bytes, hdr_start: int, nbytes: int) -> tuple[int, int]:
    start = _header_end(raw, hdr_start)
    return start, start + nbytes


def _put_data(raw: bytes, offset: int, values: np.ndarray) -> bytes:
    blob = values.astype(">f4").tobytes()
    return raw[:offset] + blob + raw[offset + len(blob) :]


MUTATIONS = ("'abc'", "0", "-1", "1E300", "-1E300", "999999999", "''", "T", "2.5")


# --------------------------------------------------------------------------- the generator


class _Writer:
    def __init__(self, folder: Path) -> None:
        self.folder = folder
        self.items: list[HostileInput] = []
        self.seen: set[str] = set()

    def add(self, name: str, content: bytes, kind: str, expect: Expect) -> None:
        sha = hashlib.sha256(content).hexdigest()
        if sha in self.seen:  # identical bytes would be skipped as already archived
            return
        self.seen.add(sha)
        path = self.folder / name
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_bytes(content)
        self.items.append(HostileInput(path, kind, expect))

    def special(self, name: str, make: Callable[[Path], None], kind: str) -> None:
        path = self.folder / name
        make(path)
        self.items.append(HostileInput(path, kind, "reject"))


def _truncations(w: _Writer, tag: str, raw: bytes, data_end: int, rng: np.random.Generator) -> None:
    header_cuts = list(range(0, min(data_end, BLOCK), CARD))[1::2]
    data_cuts = sorted({int(x) for x in rng.integers(BLOCK, data_end, 60)})
    for cut in header_cuts + data_cuts:
        w.add(f"trunc/{tag}_at{cut}.fits", raw[:cut], "truncated FITS", "reject")
    for cut in sorted({int(x) for x in rng.integers(data_end, len(raw), 4)}):
        w.add(f"trunc/{tag}_pad{cut}.fits", raw[:cut], "truncated in the padding", "either")


def _card_mutations(w: _Writer, tag: str, raw: bytes, hdr_start: int = 0) -> None:
    for pos, key in _cards(raw, hdr_start):
        if key in ("SIMPLE", "XTENSION", "COMMENT", "HISTORY"):
            continue
        for i, value in enumerate(MUTATIONS):
            w.add(
                f"card/{tag}_{key}_{i}.fits",
                raw[:pos] + _card(key, value) + raw[pos + CARD :],
                "one mutated header card",
                "either",
            )
        w.add(
            f"card/{tag}_{key}_del.fits",
            _delete_card(raw, pos, hdr_start),
            "one deleted header card",
            "either",
        )


def _named_fits_cases(w: _Writer, raw: bytes, rng: np.random.Generator) -> None:
    """The named hostile cases of the issue, made from the 1-D image base."""
    data_at, _ = _data_span(raw, 0, 4 * N_CHAN)
    reject = {
        "naxis0": [("NAXIS", "0")],
        "naxis_neg": [("NAXIS", "-1")],
        "naxis1000": [("NAXIS", "1000")],
        "naxis_text": [("NAXIS", "'two'")],
        "naxis1_zero": [("NAXIS1", "0")],
        "naxis1_1e9": [("NAXIS1", "1000000000")],
        "naxis1_2e31": [("NAXIS1", "2147483647")],
        "naxis1_1e12": [("NAXIS1", "1000000000000")],
        "naxis1_neg": [("NAXIS1", "-256")],
        "bitpix0": [("BITPIX", "0")],
        "bitpix7": [("BITPIX", "7")],
        "cdelt_zero": [("CDELT1", "0.0")],
        "cdelt_tiny": [("CDELT1", "1E-300")],
        "ctype_unknown": [("CTYPE1", "'BOGUS'")],
        "ctype_pixel": [("CTYPE1", "'PIXEL'")],
        "ctype_celestial": [("CTYPE1", "'RA---TAN'")],
        "ctype_blank": [("CTYPE1", "''")],
        "crval_1e300": [("CRVAL1", "1E300")],
        "crval_neg": [("CRVAL1", "-1.419E9")],
        "crval_cross_zero": [("CRVAL1", "0.0"), ("CRPIX1", "128.0")],
        "cdelt_neg_below_zero": [("CRVAL1", "1.0E6"), ("CDELT1", "-1.0E5")],
        "crval_text": [("CRVAL1", "'high'")],
        "velo_no_restfrq": [("CTYPE1", "'VRAD'"), ("CUNIT1", "'m/s'"), ("RESTFRQ", "''")],
        "velo_beyond_c": [
            ("CTYPE1", "'VOPT'"),
            ("CUNIT1", "'m/s'"),
            ("CRVAL1", "-4.0E8"),
            ("CDELT1", "1.0E3"),
        ],
    }
    for name, cards in reject.items():
        mutated = raw
        for key, value in cards:
            mutated = _set_card(mutated, key, value)
        w.add(f"named/{name}.fits", mutated, name.replace("_", " "), "reject")
    nan = np.full(N_CHAN, np.nan)
    w.add("named/all_nan.fits", _put_data(raw, data_at, nan), "all-NaN data", "reject")
    w.add("named/all_inf.fits", _put_data(raw, data_at, np.full(N_CHAN, np.inf)), "inf", "reject")
    mixed = np.where(np.arange(N_CHAN) % 2 == 0, np.inf, -np.inf)
    w.add("named/all_pm_inf.fits", _put_data(raw, data_at, mixed), "+-inf data", "reject")
    base = np.frombuffer(raw[data_at : data_at + 4 * N_CHAN], dtype=">f4").astype(float)
    for k in (0, 1, 17, 120, 255):
        for bad, label in ((np.nan, "nan"), (np.inf, "inf"), (-np.inf, "ninf"), (3e38, "huge")):
            odd = base.copy()
            odd[k] = bad
            w.add(
                f"named/{label}_chan{k}.fits",
                _put_data(raw, data_at, odd),
                "one odd channel",
                "either",
            )
    for frac in (0.25, 0.5, 0.9, 0.99):
        odd = base.copy()
        odd[rng.random(N_CHAN) < frac] = np.nan
        w.add(f"named/nan_frac{frac}.fits", _put_data(raw, data_at, odd), "NaN channels", "either")
    w.add("named/all_zero.fits", _put_data(raw, data_at, np.zeros(N_CHAN)), "zero data", "either")
    w.add("named/constant.fits", _put_data(raw, data_at, np.ones(N_CHAN)), "flat data", "either")
    for key, value in (
        ("CRVAL1", "1.0E13"),
        ("CDELT1", "1.0E300"),
        ("CDELT1", "-1.0E4"),
        ("CRPIX1", "1.0E300"),
        ("RESTFRQ", "-1.0"),
        ("RESTFRQ", "1.0E300"),
        ("RA", "1.0E300"),
        ("DEC", "-91.0"),
        ("DATE-OBS", "'2026-13-45T99:99:99'"),
        ("DATE-OBS", "'yesterday'"),
        ("SPECSYS", "'NOWHERE'"),
        ("OBJECT", "''"),
        ("OBJECT", "'" + "x" * 66 + "'"),
        ("BUNIT", "'furlongs'"),
        ("CUNIT1", "'parsec'"),
    ):
        w.add(
            f"named/absurd_{key}_{value.strip(chr(39))[:12]}.fits",
            _set_card(raw, key, value),
            "absurd header value",
            "either",
        )


def _named_4d_cases(w: _Writer, raw: bytes) -> None:
    for name, cards in {
        "naxis4_zero": [("NAXIS4", "0")],
        "naxis2_zero": [("NAXIS2", "0")],
        "naxis_long": [("NAXIS", "5")],
        "stokes_repeat": [("CDELT4", "0.0")],
        "stokes_code": [("CRVAL4", "99.0")],
        "two_freq_axes_none": [("CTYPE1", "'FOO'")],
    }.items():
        mutated = raw
        for key, value in cards:
            mutated = _set_card(mutated, key, value)
        w.add(f"named4d/{name}.fits", mutated, name.replace("_", " "), "reject")
    # NAXIS = 3 leaves a consistent 3-axis cube (the first Stokes plane) plus unused bytes
    w.add("named4d/naxis_short.fits", _set_card(raw, "NAXIS", "3"), "NAXIS too small", "either")


def _gzip_cases(w: _Writer, raw: bytes, rng: np.random.Generator) -> None:
    packed = gzip.compress(raw, mtime=0)
    for cut in sorted({int(x) for x in rng.integers(1, len(packed) // 2, 40)}):
        w.add(f"gz/trunc_at{cut}.fits.gz", packed[:cut], "truncated gzip", "reject")
    for cut in sorted({int(x) for x in rng.integers(len(packed) // 2, len(packed), 10)}):
        w.add(f"gz/tail_at{cut}.fits.gz", packed[:cut], "gzip truncated near its end", "either")
    for i in range(30):
        blob = rng.bytes(int(rng.integers(1, 4000)))
        w.add(f"gz/garbage{i}.fits.gz", blob, "gzip garbage", "reject")
        w.add(
            f"gz/magic{i}.fits.gz", b"\x1f\x8b\x08\x00" + blob, "gzip magic then garbage", "reject"
        )
    for i in range(20):
        inner = rng.bytes(int(rng.integers(1, 6000)))
        w.add(
            f"gz/packed_noise{i}.fits.gz", gzip.compress(inner, mtime=0), "gzip of noise", "reject"
        )
    w.add("gz/packed_empty.fits.gz", gzip.compress(b"", mtime=0), "gzip of nothing", "reject")
    flip = bytearray(packed)
    for i in range(10):
        k = int(rng.integers(20, len(packed) // 2))
        flip2 = bytearray(flip)
        flip2[k] ^= 0xFF
        w.add(f"gz/bitflip{i}.fits.gz", bytes(flip2), "gzip with a flipped byte", "either")


def _random_cases(w: _Writer, rng: np.random.Generator) -> None:
    for i in range(100):
        suffix = (".fits", ".fit", ".FITS")[i % 3]
        w.add(
            f"random/noise{i}{suffix}",
            rng.bytes(int(rng.integers(1, 20000))),
            "random bytes",
            "reject",
        )
    simple = _card("SIMPLE", "T")
    for i in range(30):
        w.add(
            f"random/simple_noise{i}.fits",
            simple + rng.bytes(int(rng.integers(0, 9000))),
            "SIMPLE card then random bytes",
            "reject",
        )
    for name in ("empty.fits", "empty.fit", "empty.fits.gz", "empty.csv", "empty.FIT"):
        w.add(f"random/{name}", b"", "empty file", "reject")
    w.add("random/blank_block.fits", b" " * BLOCK, "a block of blanks", "reject")
    w.add("random/zero_block.fits", b"\0" * BLOCK, "a block of NULs", "reject")
    w.add("random/text.fits", b"this is not a spectrum\n" * 50, "text with a FITS suffix", "reject")


def _csv_cases(w: _Writer, text: str, rng: np.random.Generator) -> None:
    head, body = text.split("freq_mhz,i\n")
    rows = body.splitlines()

    def put(name: str, content: str | bytes, kind: str, expect: Expect) -> None:
        data = content.encode("utf-8") if isinstance(content, str) else content
        w.add(f"csv/{name}.csv", data, kind, expect)

    put(
        "only_freq",
        head + "freq_mhz\n" + "\n".join(r.split(",")[0] for r in rows) + "\n",
        "missing intensity column",
        "reject",
    )
    put(
        "only_intensity",
        head + "i\n" + "\n".join(r.split(",")[1] for r in rows) + "\n",
        "missing spectral column",
        "reject",
    )
    put("no_header_row", head + body, "no header row", "reject")
    put("header_only", head + "freq_mhz,i\n", "header without rows", "reject")
    put("comments_only", head, "comments only", "reject")
    put("unknown_columns", head + "alpha,beta\n" + body, "unknown column names", "reject")
    put(
        "extra_column",
        head + "freq_mhz,i,weather\n" + "\n".join(r + ",1.0" for r in rows) + "\n",
        "extra column",
        "either",
    )
    put(
        "extra_text_column",
        head + "freq_mhz,i,note\n" + "\n".join(r + ",cloudy" for r in rows) + "\n",
        "extra text column",
        "either",
    )
    put(
        "ragged_extra_cells",
        head
        + "freq_mhz,i\n"
        + "\n".join(r + (",9,9" if k % 7 == 0 else "") for k, r in enumerate(rows))
        + "\n",
        "rows with extra cells",
        "either",
    )
    put(
        "missing_cells",
        head
        + "freq_mhz,i\n"
        + "\n".join(r.split(",")[0] if k % 5 == 0 else r for k, r in enumerate(rows))
        + "\n",
        "rows with a missing cell",
        "either",
    )
    for k in sorted({int(x) for x in rng.integers(0, len(rows), 15)}):
        bad = list(rows)
        f, v = bad[k].split(",")
        bad[k] = f"{f},abc"
        put(
            f"text_in_intensity_{k}",
            head + "freq_mhz,i\n" + "\n".join(bad) + "\n",
            "text in the intensity column",
            "either",
        )
        bad[k] = f"abc,{v}"
        put(
            f"text_in_freq_{k}",
            head + "freq_mhz,i\n" + "\n".join(bad) + "\n",
            "text in the spectral column",
            "reject",
        )
    put(
        "all_text_intensity",
        head + "freq_mhz,i\n" + "\n".join(r.split(",")[0] + ",n/a" for r in rows) + "\n",
        "no numbers in the intensity column",
        "reject",
    )
    put(
        "all_nan_intensity",
        head + "freq_mhz,i\n" + "\n".join(r.split(",")[0] + ",nan" for r in rows) + "\n",
        "all-NaN intensity",
        "reject",
    )
    put(
        "semicolon_rows",
        head + "freq_mhz,i\n" + "\n".join(r.replace(",", ";") for r in rows) + "\n",
        "mixed delimiters (comma header, semicolon rows)",
        "reject",
    )
    put(
        "alternating_delims",
        head
        + "freq_mhz,i\n"
        + "\n".join(r.replace(",", ";" if k % 2 else "\t") for k, r in enumerate(rows))
        + "\n",
        "mixed delimiters (semicolon and tab rows)",
        "either",
    )
    put(
        "tab_some_rows",
        head
        + "freq_mhz,i\n"
        + "\n".join(r.replace(",", "\t") if k % 10 == 3 else r for k, r in enumerate(rows))
        + "\n",
        "mixed delimiters (some tab rows)",
        "either",
    )
    put("utf16", (head + "freq_mhz,i\n" + body).encode("utf-16"), "UTF-16 text", "reject")
    put(
        "latin1_object",
        (head.replace("RB-SRC-4", "RB-SRC-\xe9\xf1") + "freq_mhz,i\n" + body).encode("latin-1"),
        "non-UTF-8 metadata (latin-1)",
        "either",
    )
    put(
        "invalid_utf8_rows",
        (head + "freq_mhz,i\n").encode() + b"\xff\xfe\xfa," * 300,
        "invalid UTF-8 rows",
        "reject",
    )
    put("bom", "\ufeff" + text, "UTF-8 byte-order mark", "either")
    put("crlf", text.replace("\n", "\r\n"), "CRLF line ends", "either")
    put("nul_in_row", text.replace(rows[40], rows[40] + "\0"), "NUL byte in a row", "either")
    freqs = [r.split(",")[0] for r in rows]
    vals = [r.split(",")[1] for r in rows]

    def cols(fs: list[str], vs: list[str]) -> str:
        return (
            head
            + "freq_mhz,i\n"
            + "\n".join(f"{a},{b}" for a, b in zip(fs, vs, strict=True))
            + "\n"
        )

    put("negative_freq", cols(["-" + f for f in freqs], vals), "negative frequencies", "reject")
    put("same_freq", cols([freqs[0]] * len(freqs), vals), "one frequency repeated", "reject")
    put("inf_freq", cols(["inf"] * len(freqs), vals), "infinite frequencies", "reject")
    put("nan_freq", cols(["nan"] * len(freqs), vals), "NaN frequencies", "reject")
    put(
        "huge_freq",
        cols([f"{1e300 * (1 + k / 1000):.6e}" for k in range(len(freqs))], vals),
        "absurd frequencies (1e300 MHz)",
        "reject",
    )
    put("one_row", cols(freqs[:1], vals[:1]), "a single channel", "reject")
    put("two_rows", cols(freqs[:2], vals[:2]), "two channels", "either")
    shuffled = list(range(len(freqs)))
    rng.shuffle(shuffled)
    put(
        "shuffled_freq",
        cols([freqs[k] for k in shuffled], [vals[k] for k in shuffled]),
        "unsorted frequencies",
        "either",
    )
    dup = list(freqs)
    dup[10] = dup[11]
    put("duplicate_freq", cols(dup, vals), "one duplicated frequency", "either")
    put(
        "nan_freq_row", cols([*freqs[:50], "nan", *freqs[51:]], vals), "one NaN frequency", "either"
    )
    put("huge_line", head + "freq_mhz,i\n" + "1" * 1_000_000 + "\n", "a 1 MB line", "reject")
    put(
        "bad_meta",
        text.replace("# RA = 83.5", "# RA = north").replace(
            "# DATE-OBS = 2026-03-01T23:00:00", "# DATE-OBS = 2026-13-45"
        ),
        "unparseable metadata values",
        "either",
    )
    put(
        "meta_no_equals",
        text.replace("# OBJECT = RB-SRC-4", "# OBJECT RB-SRC-4 no equals"),
        "comment line without '='",
        "either",
    )
    raw = text.encode()
    first_row = raw.index(b"freq_mhz,i\n") + len(b"freq_mhz,i\n")
    for cut in sorted({int(x) for x in rng.integers(0, first_row, 6)}):
        w.add(f"csv/trunc_meta{cut}.csv", raw[:cut], "CSV cut before its rows", "reject")
    for cut in sorted({int(x) for x in rng.integers(first_row + 40, len(raw), 24)}):
        w.add(f"csv/trunc_rows{cut}.csv", raw[:cut], "CSV cut inside its rows", "either")


def _filesystem_cases(w: _Writer, blocking: bool) -> None:
    def folder_named_like_file(p: Path) -> None:
        p.mkdir(parents=True)
        (p / "readme.txt").write_text("a folder, not a spectrum\n")

    def link_loop(p: Path) -> None:
        p.parent.mkdir(parents=True, exist_ok=True)
        other = p.with_name("loop_b.fits")
        os.symlink(other.name, p)
        os.symlink(p.name, other)

    def self_link(p: Path) -> None:
        p.parent.mkdir(parents=True, exist_ok=True)
        os.symlink(p.name, p)

    def dangling(p: Path) -> None:
        p.parent.mkdir(parents=True, exist_ok=True)
        os.symlink("does-not-exist.fits", p)

    def dir_link(p: Path) -> None:
        p.parent.mkdir(parents=True, exist_ok=True)
        os.symlink(".", p)

    def fifo(p: Path) -> None:
        p.parent.mkdir(parents=True, exist_ok=True)
        os.mkfifo(p)

    def device(p: Path) -> None:
        p.parent.mkdir(parents=True, exist_ok=True)
        os.symlink("/dev/zero", p)

    w.special("fs/x.fits", folder_named_like_file, "a folder named like a file")
    w.special("fs/y.csv", folder_named_like_file, "a folder named like a file")
    w.special("fs/loop_a.fits", link_loop, "a symbolic-link loop")
    w.items.append(HostileInput(w.folder / "fs/loop_b.fits", "a symbolic-link loop", "reject"))
    w.special("fs/self.fits", self_link, "a link to itself")
    w.special("fs/dangling.fits", dangling, "a dangling link")
    w.special("fs/here.fits", dir_link, "a link to its own folder")
    if blocking:
        w.special("fs/pipe.fits", fifo, "a named pipe")
        w.special("fs/zero.fits", device, "a link to /dev/zero")


def bases(seed: int = 11) -> dict[str, bytes]:
    """The valid base files (name -> bytes), deterministic for a seed."""
    rng = np.random.default_rng(seed)
    return {
        "image1d.fits": base_image_1d(rng),
        "image4d.fits": base_image_4d(rng),
        "table.fits": base_table(rng),
        "spectrum.csv": base_csv(rng).encode(),
    }


def generate(folder: Path, seed: int = 11, special_files: bool = True) -> list[HostileInput]:
    """Write every hostile input under ``folder``; return them with their expectations.

    ``special_files=False`` leaves out the named pipe and the /dev/zero link (for callers that
    open every path directly).
    """
    rng = np.random.default_rng(seed)
    w = _Writer(Path(folder))
    b = bases(seed)
    for name, content in b.items():
        w.add(f"valid/{name}", content, "valid base file", "accept")
    img, cube, table, csv_text = (
        b["image1d.fits"],
        b["image4d.fits"],
        b["table.fits"],
        b["spectrum.csv"].decode(),
    )
    _truncations(w, "image1d", img, _header_end(img) + 4 * N_CHAN, rng)
    _truncations(w, "image4d", cube, _header_end(cube) + 8 * N_CHAN, rng)
    ext = _header_end(table)
    _truncations(w, "table", table, _header_end(table, ext) + 3 * (16 + 8 + 4 * N_CHAN), rng)
    _named_fits_cases(w, img, rng)  # before the generic mutations: a duplicate keeps its label
    _named_4d_cases(w, cube)
    _card_mutations(w, "image1d", img)
    _card_mutations(w, "image4d", cube)
    _card_mutations(w, "table", table, ext)
    _gzip_cases(w, img, rng)
    _random_cases(w, rng)
    _csv_cases(w, csv_text, rng)
    _filesystem_cases(w, blocking=special_files)
    return w.items
