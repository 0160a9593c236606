"""Synthetic FileResults and the two-engine archive fixture for the archive/export tests.

Test modules import what they need: ``from archive_fixtures import archive_url, make_file``
(``tests/`` is on sys.path through its conftest). Every value here is invented test data, not a
check value: the tests compare what goes in with what comes out.
"""

from __future__ import annotations

import hashlib
import os
import uuid
from collections.abc import Iterator
from datetime import UTC, datetime, timedelta
from typing import Any

import numpy as np
import pytest

from speccat.model import (
    BaselineModel,
    Candidate,
    Detection,
    FileResult,
    Kind,
    LineFit,
    Measurement,
    Origin,
    Site,
    Spectrum,
    SpectrumResult,
)

PG_ENV = "SPECCAT_TEST_PG_URL"
SOURCES = ("Nebula-A", "nebula-b", "Cloud [7]", "Quelle-ä", "Dark_Lane%1")
LINES = (
    # name, species, transition, rest frequency (Hz; invented-for-test values, not checks)
    ("H109a", "H", "109 alpha", 5.008922e9),
    ("He109a", "He", "109 alpha", 5.010963e9),
    ("OH1667", "OH", "2Pi3/2 J=3/2 F=2-2", 1.667359e9),
    ("HI", "HI", "21 cm", 1.420405752e9),
    ("H2O22", "H2O", "6(1,6)-5(2,3)", 2.2235080e10),
)


def _fit(rng: np.random.Generator, center_hz: float, kind: Kind, flags: tuple[str, ...]) -> LineFit:
    peak = float(rng.uniform(0.05, 5.0)) * (1 if kind == Kind.EMISSION else -1)
    return LineFit(
        center_hz=center_hz,
        center_err_hz=float(rng.uniform(100, 5e3)),
        peak=peak,
        peak_err=float(rng.uniform(0.001, 0.1)),
        fwhm_hz=float(rng.uniform(1e4, 5e5)),
        fwhm_err_hz=float(rng.uniform(10, 1e4)),
        integral_fit_hz=float(rng.normal(1e5, 3e4)),
        integral_fit_err_hz=float(rng.uniform(1, 1e3)),
        integral_sum_hz=float(rng.normal(1e5, 3e4)),
        integral_sum_err_hz=float(rng.uniform(1, 1e3)),
        center_chan=float(rng.uniform(0, 512)),
        fwhm_chan=float(rng.uniform(1, 40)),
        snr=float(rng.choice([rng.uniform(3, 200), 10.0])),
        chi2_red=float(rng.uniform(0.5, 2)),
        kind=kind,
        profile="gaussian" if rng.random() < 0.8 else "voigt",
        lorentz_fwhm_hz=None if rng.random() < 0.7 else float(rng.uniform(1e3, 1e4)),
        w50_hz=float(rng.uniform(1e4, 5e5)),
        w20_hz=None if rng.random() < 0.3 else float(rng.uniform(1e4, 5e5)),
        moment1_hz=center_hz + float(rng.normal(0, 1e3)),
        moment2_hz=None if rng.random() < 0.3 else float(rng.uniform(1e3, 1e5)),
        blend=int(rng.integers(0, 3)),
        flags=flags,
    )


def _detection(rng: np.random.Generator, identified: bool) -> Detection:
    name, species, transition, rest = LINES[int(rng.integers(len(LINES)))]
    v = float(np.round(rng.uniform(-150, 150), 3))
    kind = Kind.EMISSION if rng.random() < 0.75 else Kind.ABSORPTION
    flags = tuple(f for f in ("blended", "edge") if rng.random() < 0.2)
    fit = _fit(rng, rest * (1 - v / 299_792.458), kind, flags)
    cands = tuple(
        Candidate(n, sp, tr, r, float(rng.uniform(-200, 200)), float(rng.uniform(0, 1)))
        for n, sp, tr, r in LINES[: int(rng.integers(1, 4))]
    )
    line = (
        Candidate(name, species, transition, rest, v, float(rng.uniform(0.05, 1)))
        if identified
        else None
    )
    return Detection(
        fit=fit,
        stokes="I",
        candidates=(line, *cands) if line is not None else cands,
        line=line,
        v_lsr_kms=v if identified else None,
        v_lsr_err_kms=float(rng.uniform(0.01, 2)) if identified else None,
        fwhm_kms=float(rng.uniform(0.5, 40)),
        fwhm_err_kms=float(rng.uniform(0.01, 2)),
        integral_kms=float(rng.normal(5, 2)),
        integral_err_kms=float(rng.uniform(0.01, 1)),
        flags=() if identified else ("frame-unknown",) if rng.random() < 0.3 else (),
    )


def make_spectrum_result(
    rng: np.random.Generator, path: str, index: int, n_channels: int = 64, n_det: int = 2
) -> SpectrumResult:
    freq = np.sort(rng.uniform(1.4e9, 1.5e9, n_channels))
    stokes = ("I", "V") if rng.random() < 0.5 else ("I",)
    intensity = {s: rng.normal(0, 1, n_channels).astype(np.float32) for s in stokes}
    start = datetime(2026, 3, 14, 20, 0, tzinfo=UTC) + timedelta(minutes=int(rng.integers(0, 2000)))
    spectrum = Spectrum(
        freq_hz=freq,
        intensity=intensity,
        intensity_unit=str(rng.choice(["K", "Jy"])),
        source=str(rng.choice(SOURCES)),
        origin=Origin(path, hdu=0, row=index),
        ra_deg=float(rng.uniform(0, 360)),
        dec_deg=float(rng.uniform(-60, 60)),
        obs_time=start,
        site=Site(12.5, 45.25, 310.0),
        telescope="Invented 12m",
        specsys="TOPOCENT",
    )
    measurement = Measurement(
        stokes="I",
        rms=float(rng.uniform(0.01, 0.2)),
        continuum=float(rng.uniform(0, 3)),
        baseline=BaselineModel(n_channels, tuple(rng.normal(0, 1, 3)), 0.1, 37.5, 0.25),
        lines=(),
        flags=("ripple",) if rng.random() < 0.2 else (),
    )
    dets = tuple(_detection(rng, identified=rng.random() < 0.8) for _ in range(n_det))
    return SpectrumResult(spectrum, measurement, dets, lsrk_factor=1.0000123, frame_flag=None)


def make_file(seed: int, n_spectra: int = 2, n_det: int = 2, n_channels: int = 64) -> FileResult:
    """A deterministic synthetic FileResult; different seeds give different SHA-256s."""
    rng = np.random.default_rng(seed)
    path = f"night1/obs_{seed:04d}.fits"
    spectra = tuple(make_spectrum_result(rng, path, i, n_channels, n_det) for i in range(n_spectra))
    sha = hashlib.sha256(f"synthetic-{seed}".encode()).hexdigest()
    return FileResult(path=path, size_bytes=1000 + seed, sha256=sha, spectra=spectra)


def _pg_database(base_url: str) -> Iterator[str]:
    from sqlalchemy import create_engine, text
    from sqlalchemy.engine import make_url

    name = f"speccat_test_{uuid.uuid4().hex[:12]}"
    admin = create_engine(base_url, isolation_level="AUTOCOMMIT")
    with admin.connect() as conn:
        conn.execute(text(f'CREATE DATABASE "{name}"'))
    try:
        yield make_url(base_url).set(database=name).render_as_string(hide_password=False)
    finally:
        with admin.connect() as conn:
            conn.execute(text(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)'))
        admin.dispose()


@pytest.fixture(params=["sqlite", "postgresql"])
def archive_url(request: pytest.FixtureRequest, tmp_path: object) -> Iterator[str]:
    """A URL of a fresh, not yet created archive on each engine (PG only when configured)."""
    if request.param == "sqlite":
        yield str(tmp_path) + "/test.sqlite"  # type: ignore[operator]
        return
    base = os.environ.get(PG_ENV)
    if not base:
        pytest.skip(f"PostgreSQL tests need ${PG_ENV}")
    yield from _pg_database(base)


NIGHTS = ("2026-03-14", "2026-03-15", "2026-03-16")


def fill_archive(url: str, seeds: range, **kwargs: int) -> tuple[Any, list[FileResult]]:
    """A created archive holding ``make_file(seed)`` for each seed (nights in rotation)."""
    from speccat.archive import Archive

    archive = Archive.open(url, create=True)
    run_id = archive.begin_run({"test": True})
    results = [make_file(seed, **kwargs) for seed in seeds]
    for i, result in enumerate(results):
        assert archive.store_file(run_id, result, NIGHTS[i % len(NIGHTS)])
    archive.finish_run(run_id, {"files": len(results)})
    return archive, results


def input_rows(results: list[FileResult]) -> list[dict[str, Any]]:
    """The stored detections as plain dicts, in insertion order (= detection id order)."""
    rows: list[dict[str, Any]] = []
    for i, result in enumerate(results):
        for sres in result.spectra:
            stamp = sres.spectrum.obs_time
            naive = None if stamp is None else stamp.astimezone(UTC).replace(tzinfo=None)
            for det in sres.detections:
                rows.append(
                    {
                        "id": len(rows) + 1,
                        "source": sres.spectrum.source,
                        "species": None if det.line is None else det.line.species,
                        "line": None if det.line is None else det.line.name,
                        "v_lsr_kms": det.v_lsr_kms,
                        "center_hz": det.fit.center_hz,
                        "snr": det.fit.snr,
                        "night": NIGHTS[i % len(NIGHTS)],
                        "kind": str(det.fit.kind),
                        "obs_time": naive,
                        "file": result.path,
                        "det": det,
                        "spectrum": sres,
                    }
                )
    return rows


def table_checksums(archive: Any) -> dict[str, tuple[int, str]]:
    """(row count, sha256 of every row in id order) for every table of the archive."""
    from sqlalchemy import select

    from speccat.archive.schema import metadata

    out = {}
    with archive._reader.connect() as conn:
        for table in metadata.sorted_tables:
            order = table.c.id if "id" in table.c else table.c[next(iter(table.c.keys()))]
            digest = hashlib.sha256()
            n = 0
            for row in conn.execute(select(table).order_by(order)):
                digest.update(repr(tuple(row)).encode())
                n += 1
            out[table.name] = (n, digest.hexdigest())
    return out


@pytest.fixture(scope="module", params=["sqlite", "postgresql"])
def filled_archive(
    request: pytest.FixtureRequest, tmp_path_factory: pytest.TempPathFactory
) -> Iterator[tuple[Any, list[dict[str, Any]]]]:
    """A module-wide archive of 40 synthetic files (240 detections) and its input rows, on
    each engine; tests must not write to it."""
    if request.param == "sqlite":
        urls: Iterator[str] = iter([str(tmp_path_factory.mktemp("filled") / "filled.sqlite")])
    else:
        base = os.environ.get(PG_ENV)
        if not base:
            pytest.skip(f"PostgreSQL tests need ${PG_ENV}")
        urls = _pg_database(base)
    url = next(urls)
    archive, results = fill_archive(url, range(40), n_spectra=2, n_det=3)
    try:
        yield archive, input_rows(results)
    finally:
        archive.close()
        for _ in urls:  # finish the PG generator: drops the database
            pass
