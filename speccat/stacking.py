"""Stack the recombination lines of one source from the archive, measure and store the stack.

For each distinct (spectrum, line) among the source's identified detections of the chosen
species (alpha lines by default, or a line-name glob): the stored primary product minus its
fitted baseline, on the LSRK axis (``f * lsrk_factor``) as radio velocity relative to that
line's rest frequency, within ``window_kms`` of the lines' median v_LSR. Segments finer than
the grid are first boxcar-averaged to it (rms / sqrt(k)); then ``physics.stacking.stack``
takes the 1/rms² weighted mean (common practice). The stacked spectrum is an LSRK spectrum at
the rest frequency of the reference line (the line carrying the largest total weight), measured
with ``reduce.measure`` and identified with the built-in catalogue like any other.

Stacks stored with ``store_stack`` are file entries whose path starts with ``stack:``; they are
never taken as input to another stack.
"""

from __future__ import annotations

import fnmatch
import hashlib
import json
from collections.abc import Sequence
from dataclasses import dataclass, replace
from datetime import datetime
from typing import TYPE_CHECKING, Any

import numpy as np

from speccat.errors import SpeccatError
from speccat.model import FileResult, SpectrumResult

if TYPE_CHECKING:
    from speccat.archive import Archive, StoredSpectrum
    from speccat.catalogue import Catalogue
    from speccat.physics.stacking import StackResult

STACK_PREFIX = "stack:"
MIN_CHANNELS = 8  # a segment needs this many channels inside the window


class StackError(SpeccatError):
    """A stack cannot be made from what the archive holds (too few lines, mixed units...)."""


@dataclass(frozen=True)
class Segment:
    """One input line: its detection, spectrum, line name, rest frequency and weights."""

    detection_id: int
    spectrum_id: int
    line: str
    rest_freq_hz: float
    rms: float  # stored rms of the spectrum, intensity_unit (per original channel)
    snr: float  # S/N of the single detection
    v_lsr_kms: float
    night: str


@dataclass(frozen=True, eq=False)
class StackOutcome:
    """The stacked spectrum measured and identified, with the segments that went in.

    ``skipped`` lists (detection_id, reason) of matching detections left out.
    """

    source: str
    species: str
    reference_line: str
    window_kms: float
    stack: StackResult
    result: SpectrumResult
    segments: tuple[Segment, ...]
    skipped: tuple[tuple[int, str], ...]
    night: str

    @property
    def spectrum(self) -> Any:
        return self.result.spectrum

    @property
    def best_single_snr(self) -> float:
        return max(s.snr for s in self.segments)

    def main_detection(self) -> Any:
        """The stack's detection identified as the reference line (highest S/N), else the
        strongest detection, else None."""
        dets = self.result.detections
        ref = [d for d in dets if d.line is not None and d.line.name == self.reference_line]
        pool = ref or list(dets)
        return max(pool, key=lambda d: d.fit.snr) if pool else None

    def label(self) -> str:
        lines = ",".join(sorted({s.line for s in self.segments}, key=_line_order))
        return f"{STACK_PREFIX}{self.source}:{self.species}:{lines}"


def _line_order(name: str) -> tuple[int, str]:
    digits = "".join(ch for ch in name if ch.isdigit())
    return (int(digits) if digits else 0, name)


# --------------------------------------------------------------------------- selection


def _wanted_line(name: str, catalogue: Catalogue, line_glob: str | None, dn: int | None) -> bool:
    try:
        line = catalogue.by_name(name)
    except SpeccatError:
        return False
    if line.line_class != "recombination":
        return False
    if line_glob is not None and not fnmatch.fnmatchcase(name.lower(), line_glob.lower()):
        return False
    return dn is None or line.dn == dn


def select_records(
    archive: Archive,
    source: str,
    species: str,
    line_glob: str | None,
    dn: int | None,
    catalogue: Catalogue,
) -> list[dict[str, Any]]:
    """Emission detections of ``source`` identified as a wanted recombination line of
    ``species``, one per (spectrum, line) (the highest S/N), stacks excluded."""
    from speccat.archive import Filters

    filters = Filters.parse({"source": source, "species": species, "kind": "emission"})
    records = [
        r
        for r in archive.iter_detections(filters, sort="snr", descending=True)
        if not str(r["file"]).startswith(STACK_PREFIX)
        and r["line"]
        and _wanted_line(str(r["line"]), catalogue, line_glob, dn)
    ]
    names = sorted({str(r["source"]) for r in records})
    if len(names) > 1:
        shown = ", ".join(names[:5])
        raise StackError(f"--source {source!r} matches several sources ({shown}); name one")
    seen: set[tuple[int, str]] = set()
    out = []
    for r in records:
        key = (int(r["spectrum_id"]), str(r["line"]))
        if key not in seen:
            seen.add(key)
            out.append(r)
    return out


# --------------------------------------------------------------------------- segments


def segment_axis(
    stored: StoredSpectrum, stokes: str, rest_freq_hz: float
) -> tuple[np.ndarray, np.ndarray]:
    """Radio velocity (km/s, LSRK, relative to ``rest_freq_hz``) and baseline-subtracted
    intensity of one stored spectrum's product ``stokes``."""
    from speccat.physics.doppler import velocity_from_freq

    product = stokes if stokes in stored.intensity else next(iter(stored.intensity))
    y = np.asarray(stored.intensity[product], dtype=float) - stored.baseline.evaluate()
    f_lsrk = np.asarray(stored.freq_hz, dtype=float) * stored.lsrk_factor
    v = np.asarray(velocity_from_freq(f_lsrk, rest_freq_hz, "radio"), dtype=float)
    return v, y


def smooth_to(
    v_kms: np.ndarray, y: np.ndarray, rms: float, step_kms: float
) -> tuple[np.ndarray, np.ndarray, float]:
    """Boxcar-average a segment to about ``step_kms`` per channel when its own channels are
    at least 1.5 times finer: k = round(step/dv) channels, rms / sqrt(k) (independent noise)."""
    dv = float(np.median(np.abs(np.diff(v_kms))))
    k = round(step_kms / dv) if dv > 0 else 1
    if k < 2 or step_kms < 1.5 * dv or k > v_kms.size // 2:
        return v_kms, y, rms
    kernel = np.full(k, 1.0 / k)
    return (
        np.convolve(v_kms, kernel, mode="valid"),
        np.convolve(y, kernel, mode="valid"),
        rms / np.sqrt(k),
    )


def _clip(v: np.ndarray, y: np.ndarray, lo: float, hi: float) -> tuple[np.ndarray, np.ndarray]:
    keep = (v >= lo) & (v <= hi) & np.isfinite(y)
    return v[keep], y[keep]


@dataclass
class _Inputs:
    segments: list[Segment]
    velocities: list[np.ndarray]
    intensities: list[np.ndarray]
    rms: list[float]
    skipped: list[tuple[int, str]]
    unit: str
    ra_dec: tuple[float | None, float | None]
    latest: datetime | None


def _gather(
    archive: Archive,
    records: Sequence[dict[str, Any]],
    catalogue: Catalogue,
    centre_kms: float,
    window_kms: float,
) -> _Inputs:
    units = sorted({str(r["intensity_unit"]) for r in records})
    if len(units) > 1:
        raise StackError(f"the lines to stack have different intensity units ({', '.join(units)})")
    out = _Inputs([], [], [], [], [], units[0] if units else "", (None, None), None)
    cache: dict[int, StoredSpectrum] = {}
    for r in records:
        det_id, sid = int(r["detection_id"]), int(r["spectrum_id"])
        stored = cache.get(sid) or cache.setdefault(sid, archive.spectrum(sid))
        if stored.frame_flag:
            out.skipped.append((det_id, f"frame not established ({stored.frame_flag})"))
            continue
        if not (stored.rms is not None and np.isfinite(stored.rms) and stored.rms > 0):
            out.skipped.append((det_id, "spectrum has no rms"))
            continue
        rest = float(catalogue.by_name(str(r["line"])).rest_freq_hz)
        v, y = segment_axis(stored, str(r["stokes"]), rest)
        v, y = _clip(v, y, centre_kms - window_kms, centre_kms + window_kms)
        if v.size < MIN_CHANNELS:
            out.skipped.append((det_id, f"fewer than {MIN_CHANNELS} channels in the window"))
            continue
        out.velocities.append(v)
        out.intensities.append(y)
        out.rms.append(float(stored.rms))
        out.segments.append(
            Segment(
                det_id,
                sid,
                str(r["line"]),
                rest,
                float(stored.rms),
                float(r["snr"] or 0.0),
                float(r["v_lsr_kms"]),
                str(r["night"] or ""),
            )
        )
        if out.ra_dec == (None, None):
            out.ra_dec = (stored.ra_deg, stored.dec_deg)
        if stored.obs_time is not None and (out.latest is None or stored.obs_time > out.latest):
            out.latest = stored.obs_time
    return out


def _reference(segments: Sequence[Segment]) -> Segment:
    """The line carrying the largest total weight Σ 1/rms² (ties: the lower n, then name)."""
    weight: dict[str, float] = {}
    for s in segments:
        weight[s.line] = weight.get(s.line, 0.0) + 1.0 / s.rms**2
    best = min(weight, key=lambda name: (-weight[name], _line_order(name)))
    return next(s for s in segments if s.line == best)


# --------------------------------------------------------------------------- the stack


def stack_source(
    archive: Archive,
    source: str,
    *,
    species: str = "H",
    line_glob: str | None = None,
    dn: int | None = 1,
    window_kms: float = 300.0,
    channel_kms: float | None = None,
    detect_sigma: float = 5.0,
    catalogue: Catalogue | None = None,
) -> StackOutcome:
    """Stack ``source``'s recombination lines of ``species`` (see the module docstring).

    ``dn`` = 1 keeps alpha lines (None: any); ``line_glob`` (e.g. ``H1??a``) restricts the
    names; ``channel_kms`` sets the grid step (default: the coarsest segment's channel).
    Raises StackError when fewer than two segments are usable.
    """
    from speccat.catalogue import builtin
    from speccat.identify import identify
    from speccat.physics.stacking import default_grid, stack, to_spectrum
    from speccat.reduce import ReduceSettings, measure

    if not (np.isfinite(window_kms) and window_kms > 0):
        raise StackError(f"--window must be a positive number of km/s, got {window_kms}")
    if channel_kms is not None and not (np.isfinite(channel_kms) and channel_kms > 0):
        raise StackError(f"--channel must be a positive number of km/s, got {channel_kms}")
    if not species.strip() or any(ch in species for ch in "*?[]"):
        raise StackError(f"--species takes one element name such as H or He, got {species!r}")
    cat = catalogue or builtin()
    records = select_records(archive, source, species, line_glob, dn, cat)
    what = line_glob or (f"dn={dn}" if dn else "any")
    if len(records) < 2:
        raise StackError(
            f"stack needs at least 2 {species} recombination lines ({what}) of source "
            f"{source!r}; the archive has {len(records)}"
        )
    centre = float(np.median([float(r["v_lsr_kms"]) for r in records]))
    got = _gather(archive, records, cat, centre, window_kms)
    if len(got.segments) < 2:
        reasons = "; ".join(sorted({why for _, why in got.skipped}))
        raise StackError(
            f"stack needs at least 2 usable segments, got {len(got.segments)} ({reasons})"
        )
    step = channel_kms or max(float(np.median(np.abs(np.diff(v)))) for v in got.velocities)
    smoothed = [
        smooth_to(v, y, s, step)
        for v, y, s in zip(got.velocities, got.intensities, got.rms, strict=True)
    ]
    vs = [s[0] for s in smoothed]
    overlap = default_grid(vs)
    lo, hi = max(float(v.min()) for v in vs), min(float(v.max()) for v in vs)
    overlap = overlap[(overlap >= lo) & (overlap <= hi)]  # rounding at the ends
    grid = overlap if channel_kms is None else np.arange(overlap[0], overlap[-1] + 1e-9, step)
    labels = [f"{s.line}#{s.detection_id}" for s in got.segments]
    result = stack(vs, [s[1] for s in smoothed], [s[2] for s in smoothed], grid, labels)
    ref = _reference(got.segments)
    outcome_source = str(records[0]["source"])
    spectrum = to_spectrum(result, ref.rest_freq_hz, outcome_source, got.unit, label="stack")
    spectrum = replace(spectrum, ra_deg=got.ra_dec[0], dec_deg=got.ra_dec[1], obs_time=got.latest)
    m = measure(
        spectrum.freq_hz, spectrum.intensity["I"], ReduceSettings(detect_sigma=detect_sigma)
    )
    ident = identify(spectrum, m, cat, known_velocities={outcome_source: centre})
    night = max(s.night for s in got.segments)
    outcome = StackOutcome(
        outcome_source,
        species,
        ref.line,
        float(window_kms),
        result,
        ident,
        tuple(got.segments),
        tuple(got.skipped),
        night,
    )
    path = outcome.label()
    spectrum = replace(spectrum, origin=replace(spectrum.origin, path=path))
    return replace(outcome, result=replace(ident, spectrum=spectrum))


# --------------------------------------------------------------------------- storing


def stack_file_result(outcome: StackOutcome) -> FileResult:
    """The stack as a FileResult: path ``stack:<source>:<species>:<lines>``; the SHA-256
    covers the stacked arrays and the inputs, so the same stack is stored only once."""
    spec = outcome.result.spectrum
    inputs = {
        "source": outcome.source,
        "species": outcome.species,
        "window_kms": outcome.window_kms,
        "segments": sorted([s.detection_id, s.spectrum_id, s.line] for s in outcome.segments),
    }
    h = hashlib.sha256()
    h.update(json.dumps(inputs, sort_keys=True).encode())
    h.update(np.ascontiguousarray(spec.freq_hz, dtype="<f8").tobytes())
    h.update(np.ascontiguousarray(spec.intensity["I"], dtype="<f8").tobytes())
    size = int(spec.freq_hz.nbytes + spec.intensity["I"].nbytes)
    return FileResult(outcome.label(), size, h.hexdigest(), spectra=(outcome.result,))


def store_stack(archive: Archive, outcome: StackOutcome, night: str | None = None) -> bool:
    """Store the stack as its own file entry (night: ``night``, else the latest input night,
    i.e. the greatest label, which for the default ISO-date labels is the latest date).
    Returns False when the same stack is already archived (nothing written)."""
    label = night or outcome.night or "unlabelled"
    file_result = stack_file_result(outcome)
    if archive.has_sha256(file_result.sha256):
        return False
    run_id = archive.begin_run(
        {
            "command": "stack",
            "source": outcome.source,
            "species": outcome.species,
            "window_kms": outcome.window_kms,
            "detections": [s.detection_id for s in outcome.segments],
            "night": label,
        }
    )
    stored = archive.store_file(run_id, file_result, label)
    if stored:
        archive.update_sources([outcome.source])
    archive.finish_run(run_id, {"files_stored": int(stored), "path": file_result.path})
    return stored
