"""``speccat stack`` end to end: ingest synthetic recombination lines, stack, store, query.

The spectra are synthetic (invented source, H alpha lines of different n injected at one
LSRK velocity with known noise). Checks: the inverse-variance weighted mean of N independent
equal-quality lines improves S/N by sqrt(N) (common practice: the variance of a weighted mean is
(Σ 1/σ²)^-1); the stacked velocity agrees with the injected one within its error scale.
"""

from __future__ import annotations

import json
import math
from datetime import UTC, datetime
from pathlib import Path

import numpy as np
import pytest

from speccat.catalogue import builtin
from speccat.cli import main
from speccat.io.writers import write_fits_image
from speccat.model import C_KMS, Origin, Spectrum

V0_KMS = 42.0
FWHM_KMS = 25.0
LINES = ("H109a", "H110a", "H91a")


def _spectrum(
    line: str,
    when: datetime,
    seed: int,
    *,
    peak: float = 0.1,
    noise: float = 0.01,
    dv_kms: float = 1.0,
    unit: str = "K",
    source: str = "Lumen-7",
) -> Spectrum:
    """Channels evenly spaced in radio velocity (dv_kms) around V0, a Gaussian line at V0 on a
    sloping continuum, Gaussian noise of rms ``noise``; LSRK frame."""
    rest = builtin().by_name(line).rest_freq_hz
    v = V0_KMS + 400.0 - dv_kms * np.arange(int(800 / dv_kms) + 1)  # descending v: ascending f
    freq = rest * (1.0 - v / C_KMS)
    rng = np.random.default_rng(seed)
    sigma = FWHM_KMS / math.sqrt(8 * math.log(2))
    y = (
        0.3
        + 0.02 * (v - V0_KMS) / 400.0
        + peak * np.exp(-0.5 * ((v - V0_KMS) / sigma) ** 2)
        + rng.normal(0.0, noise, v.size)
    )
    return Spectrum(
        freq_hz=freq,
        intensity={"I": y},
        intensity_unit=unit,
        source=source,
        origin=Origin("synthetic"),
        ra_deg=281.5,
        dec_deg=-3.9,
        obs_time=when,
        specsys="LSRK",
    )


def _ingest(db: Path, folder: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["--archive", str(db), "ingest", str(folder), "--jobs", "1", "--json"]) == 0
    capsys.readouterr()


def _run_json(db: Path, capsys: pytest.CaptureFixture[str], *args: str) -> dict | list:
    code = main(["--archive", str(db), *args, "--format", "json"])
    out = capsys.readouterr()
    assert code == 0, out.err
    return json.loads(out.out)


@pytest.fixture
def archive(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> Path:
    db = tmp_path / "a.sqlite"
    for i, line in enumerate(LINES):  # one night per line
        folder = tmp_path / f"night{i}"
        folder.mkdir()
        when = datetime(2031, 5, 6 + i, 23, 0, tzinfo=UTC)
        write_fits_image(folder / f"scan_{line}.fits", _spectrum(line, when, 100 + i))
        _ingest(db, folder, capsys)
    return db


def test_stack_gains_sqrt_n_and_keeps_the_velocity(
    archive: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    singles = _run_json(archive, capsys, "query", "--source", "Lumen-7", "--species", "H")
    assert isinstance(singles, list)
    assert sorted(r["line"] for r in singles) == sorted(LINES)
    doc = _run_json(archive, capsys, "stack", "--source", "Lumen-7")
    assert isinstance(doc, dict)
    assert doc["n_segments"] == len(LINES)
    assert sorted(s["line"] for s in doc["segments"]) == sorted(LINES)
    main_lines = [d for d in doc["detections"] if d["line"] == doc["reference_line"]]
    assert len(main_lines) == 1
    det = main_lines[0]
    mean_single = float(np.mean([r["snr"] for r in singles]))
    assert doc["stack_snr"] > doc["best_single_snr"]
    # sqrt(N) law for equal-quality lines (common practice), within 15 %
    assert doc["stack_snr"] / mean_single == pytest.approx(math.sqrt(len(LINES)), rel=0.15)
    # velocity: injected V0 within 3 of its fitted errors (invented data, error scale only)
    assert abs(det["v_lsr_kms"] - V0_KMS) < 3 * det["v_lsr_err_kms"]
    assert det["fwhm_kms"] == pytest.approx(FWHM_KMS, abs=3 * det["fwhm_err_kms"])


def test_store_makes_query_find_the_stack_once(
    archive: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    before = _run_json(archive, capsys, "query", "--source", "Lumen-7")
    doc = _run_json(archive, capsys, "stack", "--source", "Lumen-7", "--store")
    assert isinstance(doc, dict) and doc["stored"] is True
    after = _run_json(archive, capsys, "query", "--source", "Lumen-7", "--limit", "100")
    assert isinstance(before, list) and isinstance(after, list)
    new = [r for r in after if r["file"].startswith("stack:")]
    assert len(after) == len(before) + len(doc["detections"])
    assert {r["file"] for r in new} == {doc["file"]}
    assert doc["file"] == "stack:Lumen-7:H:H91a,H109a,H110a"
    assert {r["night"] for r in new} == {"2031-05-08"}  # latest input night
    stacked = [r for r in new if r["line"] == doc["reference_line"]]
    assert len(stacked) == 1 and stacked[0]["snr"] == pytest.approx(doc["stack_snr"])
    again = _run_json(archive, capsys, "stack", "--source", "Lumen-7", "--store")
    assert isinstance(again, dict) and again["stored"] is False
    assert [s["detection_id"] for s in again["segments"]] == [
        s["detection_id"] for s in doc["segments"]
    ]
    final = _run_json(archive, capsys, "query", "--source", "Lumen-7", "--limit", "100")
    assert isinstance(final, list) and len(final) == len(after)
    out = archive.parent / "stack.json"
    assert main(["--archive", str(archive), "export", "--source", "Lumen-7", "-o", str(out)]) == 0
    capsys.readouterr()
    rows = json.loads(out.read_text())
    assert sum(1 for r in rows if r["file"] == doc["file"]) == len(doc["detections"])


def test_table_output_and_refusals(archive: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["--archive", str(archive), "stack", "--source", "Lumen-7"]) == 0
    out = capsys.readouterr().out
    assert "stack of 3 lines of Lumen-7" in out and "sqrt(N) = 1.73" in out
    code = main(["--archive", str(archive), "stack", "--source", "Lumen-7", "--line", "H91a"])
    err = capsys.readouterr().err
    assert code == 1 and "at least 2" in err and err.count("\n") == 1
    code = main(["--archive", str(archive), "stack", "--source", "Nobody"])
    assert code == 1 and "has 0" in capsys.readouterr().err
