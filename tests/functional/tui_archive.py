"""A small deterministic archive for the browser's tests, built through ``Archive.store_file``.

Invented sources at an invented observatory; the rest frequencies are only labels here (this
data is never a check value). Fixed seeds, so every build is byte-for-byte the same rows.
"""

from __future__ import annotations

from datetime import UTC, datetime, timedelta
from pathlib import Path

import numpy as np

from speccat.model import (
    C_KMS,
    BaselineModel,
    Candidate,
    Detection,
    FileResult,
    Kind,
    LineFit,
    Measurement,
    Origin,
    Spectrum,
    SpectrumResult,
)

#: (line name, species, transition, rest frequency Hz, kind) used to dress the synthetic rows.
LINES = (
    ("H109a", "H", "109-108", 5008.922e6, Kind.EMISSION),
    ("He109a", "He", "109-108", 5011.0e6, Kind.EMISSION),
    ("OH1667", "OH", "F=2-2", 1667.359e6, Kind.ABSORPTION),
    ("HI", "HI", "F=1-0", 1420.405751768e6, Kind.EMISSION),
)
SOURCES = ("Lantern-7", "Cinder-12", "Wisp-3", "Ember-41", "Halo-9")
NIGHTS = ("2031-04-02", "2031-04-03")
N_CHAN = 512


def _gauss(freq: np.ndarray, centre: float, fwhm: float, peak: float) -> np.ndarray:
    return peak * np.exp(-4.0 * np.log(2.0) * ((freq - centre) / fwhm) ** 2)


def _file(i: int, rng: np.random.Generator) -> tuple[FileResult, str]:
    name, species, transition, rest, kind = LINES[i % len(LINES)]
    source = SOURCES[i % len(SOURCES)]
    v_kms = float(-60.0 + 7.5 * (i % 17))
    fwhm_kms = 25.0 if species in ("H", "He") else 4.0 + (i % 5)
    centre = rest * (1.0 - v_kms / C_KMS)
    fwhm_hz = fwhm_kms / C_KMS * rest
    chan = fwhm_hz / 6.0
    freq = centre + (np.arange(N_CHAN) - N_CHAN / 2 + (i % 7)) * chan
    rms = 0.01 * (1 + i % 3)
    peak = rms * (6.0 + 3.7 * (i % 11)) * (-1.0 if kind is Kind.ABSORPTION else 1.0)
    base = 0.2 + 0.01 * i
    data = base + _gauss(freq, centre, fwhm_hz, peak) + rng.normal(0.0, rms, N_CHAN)
    fit = LineFit(
        center_hz=centre,
        center_err_hz=chan * 0.05,
        peak=peak,
        peak_err=rms * 0.4,
        fwhm_hz=fwhm_hz,
        fwhm_err_hz=fwhm_hz * 0.03,
        integral_fit_hz=1.0645 * peak * fwhm_hz,
        integral_fit_err_hz=abs(0.05 * peak * fwhm_hz),
        integral_sum_hz=1.0645 * peak * fwhm_hz,
        integral_sum_err_hz=abs(0.06 * peak * fwhm_hz),
        center_chan=float(N_CHAN / 2 - (i % 7)),
        fwhm_chan=6.0,
        snr=abs(peak) / rms,
        chi2_red=1.0,
        kind=kind,
        flags=("edge",) if i % 9 == 4 else (),
    )
    identified = i % 6 != 5
    cands = (
        Candidate(name, species, transition, rest, v_kms, 0.8),
        Candidate("X" + name, "X", "?", rest * 1.0001, v_kms + 30.0, 0.1),
    )
    det = Detection(
        fit=fit,
        stokes="I",
        candidates=cands if identified else (),
        line=cands[0] if identified else None,
        v_lsr_kms=v_kms if identified else None,
        v_lsr_err_kms=0.3 if identified else None,
        fwhm_kms=fwhm_kms,
        fwhm_err_kms=fwhm_kms * 0.03,
        integral_kms=1.0645 * peak * fwhm_kms,
        integral_err_kms=abs(0.05 * peak * fwhm_kms),
    )
    path = f"/data/night/{source.lower()}-{i:04d}.fits"
    spectrum = Spectrum(
        freq_hz=freq,
        intensity={"I": data},
        intensity_unit="K",
        source=source,
        origin=Origin(path),
        ra_deg=10.0 + i,
        dec_deg=-20.0 + i * 0.5,
        obs_time=datetime(2031, 4, 2, 22, 0, tzinfo=UTC) + timedelta(minutes=7 * i),
        specsys="LSRK",
    )
    meas = Measurement(
        stokes="I",
        rms=rms,
        continuum=base,
        baseline=BaselineModel(N_CHAN, (base,)),
        lines=(fit,),
    )
    result = SpectrumResult(spectrum, meas, (det,))
    night = NIGHTS[0] if i < 24 else NIGHTS[1]
    return FileResult(path, 1000 + i, f"{i:064x}", (result,)), night


def build_archive(path: Path, n_files: int = 40) -> Path:
    """Create a SQLite archive at ``path`` with ``n_files`` one-detection spectra."""
    from speccat.archive import Archive

    rng = np.random.default_rng(20310402)
    archive = Archive.open(str(path), create=True)
    try:
        run = archive.begin_run({"purpose": "tui tests"})
        for i in range(n_files):
            result, night = _file(i, rng)
            archive.store_file(run, result, night)
        archive.finish_run(run, {"files": n_files})
    finally:
        archive.close()
    return path


def archive_fixture(tmp_path_factory: object) -> Path:
    """Build the test archive once per test session (``tmp_path_factory`` from pytest)."""
    folder = tmp_path_factory.mktemp("tui")  # type: ignore[attr-defined]
    return build_archive(folder / "night.sqlite")
