"""The sample night: every file reads (or fails as documented), nothing is modified, and the
generator reproduces it byte for byte."""

from __future__ import annotations

import hashlib
import importlib.util
import sys
from pathlib import Path

import numpy as np
import pytest

from speccat.errors import SpectrumReadError
from speccat.io import SUFFIXES, read

ROOT = Path(__file__).resolve().parents[2]
ARCHIVE = ROOT / "sample_archive"
BROKEN = {
    "broken_truncated.fits": "file truncated",
    "broken_no_intensity.csv": "no intensity column",
}


def _files() -> list[Path]:
    return sorted(p for p in ARCHIVE.iterdir() if p.name.lower().endswith(SUFFIXES))


def _digest(paths: list[Path]) -> dict[str, str]:
    return {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in paths}


def test_archive_size_and_count() -> None:
    files = _files()
    assert 30 <= len(files) <= 60
    assert sum(p.stat().st_size for p in ARCHIVE.iterdir()) < 5_000_000
    names = {p.name for p in files}
    assert {".fits.gz", ".csv", ".csv.gz", ".fit", ".fts"} <= {
        s for s in SUFFIXES for n in names if n.endswith(s)
    }


def test_every_file_reads_or_fails_as_documented() -> None:
    files = _files()
    before = _digest(files)
    kinds = set()
    for path in files:
        if path.name in BROKEN:
            with pytest.raises(SpectrumReadError, match=BROKEN[path.name]):
                read(path)
            continue
        spectra = read(path)
        assert spectra, path.name
        for s in spectra:
            assert s.source.startswith("QRO-") and s.telescope == "Quillmere 24m"
            assert s.obs_time is not None and s.site is not None and s.ra_deg is not None
            assert np.all(np.diff(s.freq_hz) > 0) and 512 <= s.n_channels <= 4096
            kinds.add((s.meta["format"], s.stokes, s.specsys))
    assert _digest(files) == before  # readers never modify their input
    formats = {k[0] for k in kinds}
    assert formats == {"fits-image", "fits-table", "csv"}
    assert {("I", "V"), ("RR", "LL")} <= {k[1] for k in kinds}
    assert {"LSRK", "TOPOCENT", "BARYCENT"} <= {k[2] for k in kinds}


def test_readme_lists_every_file() -> None:
    readme = (ARCHIVE / "README.md").read_text(encoding="utf-8")
    for path in _files():
        assert f"`{path.name}`" in readme


@pytest.mark.slow
def test_generator_reproduces_the_archive_byte_for_byte(tmp_path: Path) -> None:
    spec = importlib.util.spec_from_file_location(
        "make_sample", ROOT / "scripts" / "make_sample_archive.py"
    )
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = module  # dataclasses look their module up there
    try:
        spec.loader.exec_module(module)
    finally:
        sys.modules.pop(spec.name, None)
    assert module.main(["--out", str(tmp_path)]) == 0
    expected = _digest(sorted(ARCHIVE.iterdir()))
    assert _digest(sorted(tmp_path.iterdir())) == expected
