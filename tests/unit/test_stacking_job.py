"""``speccat.stacking``: selecting, smoothing, weighting and storing a stack of archived lines.

Synthetic spectra (invented sources, lines injected at a known LSRK velocity with known noise).
Noise checks use the variance of a mean of independent samples, σ²/k, and of an inverse-variance
weighted mean, (Σ 1/σ²)^-1 (common practice).
"""

from __future__ import annotations

import math
from datetime import UTC, datetime
from pathlib import Path

import numpy as np
import pytest

from speccat.archive import Archive
from speccat.catalogue import builtin
from speccat.config import Settings
from speccat.io.writers import write_fits_image
from speccat.model import C_KMS, Origin, Spectrum
from speccat.pipeline import ingest
from speccat.stacking import StackError, smooth_to, stack_source, store_stack

V0 = -12.0
NOISE = 0.01


def _write(folder: Path, name: str, line: str, seed: int, *, dv: float = 1.0,
           unit: str = "K", source: str = "Quill-3", specsys: str = "LSRK") -> Path:  # fmt: skip
    rest = builtin().by_name(line).rest_freq_hz
    v = V0 + 350.0 - dv * np.arange(int(700 / dv) + 1)
    sigma = 22.0 / math.sqrt(8 * math.log(2))
    rng = np.random.default_rng(seed)
    y = 1.0 + 0.1 * np.exp(-0.5 * ((v - V0) / sigma) ** 2) + rng.normal(0, NOISE, v.size)
    spec = Spectrum(
        freq_hz=rest * (1 - v / C_KMS),
        intensity={"I": y},
        intensity_unit=unit,
        source=source,
        origin=Origin("synthetic"),
        ra_deg=12.0,
        dec_deg=40.0,
        obs_time=datetime(2032, 1, 3, 2, 0, tzinfo=UTC),
        specsys=specsys,
    )
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / f"{name}.fits"
    write_fits_image(path, spec)
    return path


def _archive(tmp_path: Path, files: list[Path]) -> Archive:
    archive = Archive.open(str(tmp_path / "a.sqlite"), create=True)
    ingest(files, archive, Settings(jobs=1), night="n1", jobs=1)
    return archive


def test_smooth_to_averages_k_channels_and_scales_rms(rng: np.random.Generator) -> None:
    v = np.arange(4000) * 0.5
    y = rng.normal(0.0, 1.0, v.size)
    v2, y2, rms2 = smooth_to(v, y, 1.0, 2.0)
    assert rms2 == pytest.approx(0.5)  # k = 4 channels: σ/√k
    assert np.median(np.diff(v2)) == pytest.approx(0.5)  # running mean, same sampling
    assert np.std(y2[::4]) == pytest.approx(0.5, rel=0.1)  # independent blocks
    same = smooth_to(v, y, 1.0, 0.6)  # not 1.5x coarser: untouched
    assert same[0] is v and same[2] == 1.0


def test_four_equal_lines_gain_two(tmp_path: Path) -> None:
    lines = ["H100a", "H101a", "H102a", "H103a"]
    files = [_write(tmp_path / "in", n, n, 10 + i) for i, n in enumerate(lines)]
    with _archive(tmp_path, files) as archive:
        singles = archive.page(None)
        out = stack_source(archive, "Quill-3")
    assert sorted(s.line for s in out.segments) == lines
    det = out.main_detection()
    mean_single = float(np.mean([r["snr"] for r in singles if r["line"] in lines]))
    # √N law for equal-quality independent lines (common practice), within 15 %
    assert det.fit.snr / mean_single == pytest.approx(2.0, rel=0.15)
    assert abs(det.v_lsr_kms - V0) < 3 * det.v_lsr_err_kms
    assert out.stack.n.min() == 4


def test_mixed_channel_widths_use_the_coarsest_grid(tmp_path: Path) -> None:
    files = [
        _write(tmp_path / "in", "fine", "H109a", 1, dv=0.5),
        _write(tmp_path / "in", "coarse", "H110a", 2, dv=1.0),
    ]
    with _archive(tmp_path, files) as archive:
        out = stack_source(archive, "Quill-3")
    assert np.median(np.diff(out.stack.v_kms)) == pytest.approx(1.0, rel=1e-6)
    # fine segment smoothed to σ/√2, then (2/σ² + 1/σ²)^-1/2 = σ/√3 (inverse-variance mean)
    assert out.result.measurement.rms == pytest.approx(NOISE / math.sqrt(3), rel=0.15)
    with Archive.open(str(tmp_path / "a.sqlite")) as archive:
        wide = stack_source(archive, "Quill-3", channel_kms=2.0)
        with pytest.raises(StackError, match="one element"):
            stack_source(archive, "Quill-3", species="H*")
    assert np.median(np.diff(wide.stack.v_kms)) == pytest.approx(2.0, rel=1e-6)
    # both segments smoothed to 2 km/s: σ/2 and σ/√2, combined (4/σ² + 2/σ²)^-1/2 = σ/√6
    assert wide.result.measurement.rms == pytest.approx(NOISE / math.sqrt(6), rel=0.15)


def test_selection_rules_and_refusals(tmp_path: Path) -> None:
    files = [
        _write(tmp_path / "in", "a", "H109a", 1),
        _write(tmp_path / "in", "b", "H110a", 2, unit="Jy"),
        _write(tmp_path / "in", "c", "H109a", 3, source="Quill-4"),
        _write(tmp_path / "in", "d", "H137b", 4, source="Quill-4"),
        _write(tmp_path / "in", "e", "H111a", 5, source="Quill-4", specsys=""),
    ]
    with _archive(tmp_path, files) as archive:
        with pytest.raises(StackError, match="different intensity units"):
            stack_source(archive, "Quill-3")
        with pytest.raises(StackError, match="several sources"):
            stack_source(archive, "Quill-*")
        with pytest.raises(StackError, match=r"at least 2 usable segments.*frame not"):
            stack_source(archive, "Quill-4")  # alpha only: H109a, and H111a has no frame
        out = stack_source(archive, "Quill-4", dn=None)  # beta allowed
        assert sorted(s.line for s in out.segments) == ["H109a", "H137b"]
        assert [why for _, why in out.skipped] == ["frame not established (frame-unknown)"]
        globbed = stack_source(archive, "quill-4", line_glob="h1??*", dn=None)
        assert [s.detection_id for s in globbed.segments] == [s.detection_id for s in out.segments]
        with pytest.raises(StackError, match="window"):
            stack_source(archive, "Quill-4", dn=None, window_kms=-1.0)


def test_stored_stack_is_not_restacked(tmp_path: Path) -> None:
    files = [_write(tmp_path / "in", n, n, i) for i, n in enumerate(["H109a", "H110a"])]
    with _archive(tmp_path, files) as archive:
        first = stack_source(archive, "Quill-3")
        assert store_stack(archive, first) is True
        n_after = archive.count(None)
        second = stack_source(archive, "Quill-3")
        assert [s.detection_id for s in second.segments] == [s.detection_id for s in first.segments]
        assert store_stack(archive, second) is False
        assert archive.count(None) == n_after
        stored = [r for r in archive.page(None) if r["file"] == first.label()]
        assert stored and {r["night"] for r in stored} == {"n1"}
