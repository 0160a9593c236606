"""Array <-> blob codecs for the spectrum_data table.

A blob holds the little-endian bytes *byte-shuffled* into planes (all first bytes of every value,
then all second bytes, ...; cf. the HDF5 "shuffle" filter, common practice). The upper planes
(sign, exponent, leading mantissa) repeat a lot and are ``zlib``-compressed; the lower mantissa
planes of measured float32 intensities are noise that zlib cannot shrink, so they are stored as
they are, which makes encoding several times faster at nearly the same size. Layout: uint32 LE
length of the compressed part, the compressed upper planes, the raw lower planes. Decoding does
not need to know how many planes were left raw. Round trips are bit-exact.

A night's spectra usually share one frequency axis, so the last few encoded axes are kept and an
identical axis is not compressed again.
"""

from __future__ import annotations

import struct
import zlib

import numpy as np

_LEVEL = 1  # fastest zlib level: ingest throughput matters more than the last few percent
# itemsize -> low-order planes stored uncompressed: of float32 intensities only the top byte
# (sign and exponent) compresses well (the next holds the mantissa's leading bits: noise in a
# noisy spectrum); the float64 axis is usually linear, and all its planes compress (~20x)
_RAW_PLANES = {4: 3, 8: 0}
_AXIS_CACHE: list[tuple[np.ndarray, bytes]] = []  # most recent first
_AXIS_CACHE_SIZE = 4


def _pack(values: np.ndarray, dtype: str) -> bytes:
    arr = np.ascontiguousarray(values, dtype=dtype).reshape(-1)
    size = arr.dtype.itemsize
    planes = np.ascontiguousarray(arr.view(np.uint8).reshape(-1, size).T)
    raw = _RAW_PLANES[size]
    packed = zlib.compress(planes[raw:].tobytes(), _LEVEL)
    return struct.pack("<I", len(packed)) + packed + planes[:raw].tobytes()


def _unpack(blob: bytes, dtype: str) -> np.ndarray:
    size = np.dtype(dtype).itemsize
    (n_packed,) = struct.unpack_from("<I", blob)
    upper = zlib.decompress(blob[4 : 4 + n_packed])
    lower = blob[4 + n_packed :]
    planes = np.frombuffer(lower + upper, dtype=np.uint8).reshape(size, -1)
    return np.ascontiguousarray(planes.T).view(dtype).reshape(-1).copy()


def encode_freq(freq_hz: np.ndarray) -> bytes:
    """The frequency axis as float64 (exact); an axis equal to a recent one reuses its blob."""
    axis = np.ascontiguousarray(freq_hz, dtype="<f8").reshape(-1)
    bits = axis.view("<u8")  # compare bit patterns: -0.0 and NaN payloads must stay exact
    for i, (seen, blob) in enumerate(_AXIS_CACHE):
        if seen.shape == bits.shape and np.array_equal(seen, bits):
            if i:
                _AXIS_CACHE.insert(0, _AXIS_CACHE.pop(i))
            return blob
    blob = _pack(axis, "<f8")
    _AXIS_CACHE.insert(0, (bits.copy(), blob))
    del _AXIS_CACHE[_AXIS_CACHE_SIZE:]
    return blob


def decode_freq(blob: bytes) -> np.ndarray:
    return _unpack(blob, "<f8").astype(np.float64, copy=False)


def encode_data(intensity: dict[str, np.ndarray]) -> bytes:
    """All products as float32, concatenated in the dict's order."""
    parts = [np.asarray(v, dtype="<f4").reshape(-1) for v in intensity.values()]
    return _pack(np.concatenate(parts) if parts else np.zeros(0, "<f4"), "<f4")


def decode_data(blob: bytes, stokes: list[str], n_channels: int) -> dict[str, np.ndarray]:
    flat = _unpack(blob, "<f4").astype(np.float32, copy=False)
    if flat.size != len(stokes) * n_channels:
        raise ValueError(f"data blob holds {flat.size} values, expected {len(stokes)}x{n_channels}")
    return {s: flat[i * n_channels : (i + 1) * n_channels] for i, s in enumerate(stokes)}
