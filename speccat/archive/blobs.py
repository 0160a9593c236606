"""Array <-> blob codecs for the spectra table.

A blob is ``zlib`` of the little-endian bytes *byte-shuffled* (all first bytes of every value,
then all second bytes, ...), which lets zlib find the repeated exponent bytes of smooth or noisy
float data (common practice, cf. the HDF5 "shuffle" filter). Round trips are bit-exact.
"""

from __future__ import annotations

import zlib

import numpy as np

_LEVEL = 1  # fastest zlib level: ingest throughput matters more than the last few percent


def _pack(values: np.ndarray, dtype: str) -> bytes:
    arr = np.ascontiguousarray(values, dtype=dtype)
    size = arr.dtype.itemsize
    shuffled = arr.view(np.uint8).reshape(-1, size).T
    return zlib.compress(np.ascontiguousarray(shuffled).tobytes(), _LEVEL)


def _unpack(blob: bytes, dtype: str) -> np.ndarray:
    raw = np.frombuffer(zlib.decompress(blob), dtype=np.uint8)
    size = np.dtype(dtype).itemsize
    unshuffled = np.ascontiguousarray(raw.reshape(size, -1).T)
    return unshuffled.view(dtype).reshape(-1).copy()


def encode_freq(freq_hz: np.ndarray) -> bytes:
    """The frequency axis as float64 (exact)."""
    return _pack(freq_hz, "<f8")


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
