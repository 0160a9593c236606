"""Plain functions the browser calls (in worker threads): filters, export, detail assembly.

Nothing here touches a widget; each function is testable on its own against an archive.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from speccat.model import C_KMS

if TYPE_CHECKING:
    from speccat.tui.browse_screen import ExportJob


def warm_up() -> None:
    """Import what the inspector needs (catalogue, fitting, physics) ahead of first use."""
    import speccat.physics.derived
    import speccat.reduce  # noqa: F401
    from speccat.catalogue import builtin

    builtin()


def parse_filters(values: dict[str, str]) -> Any:
    """The archive's ``Filters.parse`` (raises FilterError with a one-line message)."""
    from speccat.archive import Filters

    return Filters.parse(values)


def archive_label(archive: Any) -> str:
    """A short name for the archive in the title bar: a SQLite file's name, or the URL
    with any password hidden."""
    text = str(getattr(archive, "url", "") or getattr(archive, "target", "") or "the archive")
    if "://" not in text:
        return Path(text).name
    if "@" in text:
        scheme, rest = text.split("://", 1)
        text = f"{scheme}://…@{rest.rsplit('@', 1)[1]}"
    return text if len(text) <= 60 else "…" + text[-59:]


def export(archive: Any, job: ExportJob) -> int:
    """Write the job's marked rows, or every match of its filter, to ``job.path``.

    Returns the number of rows written. The file is replaced only when ``job.overwrite`` (the
    user said yes to the question); otherwise an existing file raises ExportError. The format
    follows the suffix, as in ``speccat export``.
    """
    from speccat import export as ex

    if job.rows is None:
        return int(
            ex.export(
                archive,
                job.filters,
                job.path,
                force=job.overwrite,
                sort=job.sort,
                descending=job.descending,
            )
        )
    fmt = ex.format_for(job.path)
    meta = ex.provenance(archive.url, job.filters)
    meta["selection"] = f"{len(job.rows)} detections marked in speccat browse"
    columns = ex.export_columns(False)
    records = sorted(job.rows, key=lambda r: r["detection_id"])
    rows = [[rec.get(col.name) for col in columns] for rec in records]
    with ex.atomic_output(Path(job.path), job.overwrite) as out:
        return int(ex.WRITERS[fmt](out, rows, columns, meta))


@dataclass(frozen=True, eq=False)
class Detail:
    """Everything the inspector shows for one detection (built off the UI thread).

    Arrays are on the file's own frequency axis, ``freq_hz``; ``y`` and ``model`` are above the
    fitted baseline, in ``row["intensity_unit"]``. ``markers`` are (name, expected observed
    frequency in the file's frame, Hz) of catalogue lines in the band at the detection's
    velocity. ``rest_hz`` is the identified line's rest frequency (None when unidentified).
    """

    row: dict[str, Any]
    freq_hz: np.ndarray
    y: np.ndarray
    model: np.ndarray | None
    lsrk_factor: float
    rest_hz: float | None
    center_hz: float
    fwhm_hz: float
    markers: tuple[tuple[str, float], ...]
    candidates: list[dict[str, Any]]
    derived: dict[str, float | None]
    spectrum_flags: tuple[str, ...] = ()
    notes: list[str] = field(default_factory=list)


def build_detail(archive: Any, row: dict[str, Any]) -> Detail:
    """Load and assemble one detection's spectrum, model, markers, candidates and physics."""
    stored = archive.spectrum(row["spectrum_id"])
    notes: list[str] = []
    stokes = row.get("stokes") or next(iter(stored.intensity))
    data = np.asarray(stored.intensity.get(stokes, next(iter(stored.intensity.values()))), float)
    y = data - stored.baseline.evaluate()
    model = _model(stored, stokes, notes)
    factor = float(stored.lsrk_factor or 1.0)
    rest_hz = row["rest_freq_mhz"] * 1e6 if row.get("rest_freq_mhz") else None
    center_hz = float(row["obs_freq_mhz"]) * 1e6
    fwhm_kms = row.get("fwhm_kms") or 0.0
    fwhm_hz = (
        abs(fwhm_kms) / C_KMS * center_hz if fwhm_kms else stored_chan_width_hz(stored.freq_hz) * 3
    )
    markers = _markers(stored.freq_hz, factor, row.get("v_lsr_kms"), notes)
    try:
        candidates = list(archive.candidates(row["detection_id"]))
    except Exception as exc:  # shown, not fatal: the rest of the view is still useful
        candidates, notes = [], [*notes, f"candidates unavailable: {exc}"]
    derived = _derived(row, notes)
    return Detail(
        row=row,
        freq_hz=np.asarray(stored.freq_hz, float),
        y=y,
        model=model,
        lsrk_factor=factor,
        rest_hz=rest_hz,
        center_hz=center_hz,
        fwhm_hz=fwhm_hz,
        markers=markers,
        candidates=candidates,
        derived=derived,
        spectrum_flags=tuple(stored.flags),
        notes=notes,
    )


def stored_chan_width_hz(freq_hz: np.ndarray) -> float:
    """Median channel spacing, Hz (1 Hz for a single channel)."""
    freq = np.asarray(freq_hz, float)
    return float(np.median(np.abs(np.diff(freq)))) if freq.size > 1 else 1.0


def _model(stored: Any, stokes: str, notes: list[str]) -> np.ndarray | None:
    fits = [
        f
        for f, d in zip(stored.fits, stored.detections, strict=False)
        if d.get("stokes", stokes) == stokes
    ]
    if not fits:
        return None
    from speccat.reduce import line_model

    return np.asarray(line_model(np.asarray(stored.freq_hz, float), fits), float)


def _markers(
    freq_hz: np.ndarray, factor: float, v_kms: float | None, notes: list[str]
) -> tuple[tuple[str, float], ...]:
    """Catalogue lines whose expected observed frequency (at ``v_kms``) falls in the band."""
    from speccat.catalogue import builtin
    from speccat.physics.doppler import freq_from_velocity

    v = float(v_kms) if v_kms is not None and math.isfinite(v_kms) else 0.0
    shift = float(freq_from_velocity(v, 1.0, "radio"))  # f_lsrk / rest, radio convention
    f_lo, f_hi = float(np.min(freq_hz)) * factor, float(np.max(freq_hz)) * factor
    lines = builtin().between(f_lo / shift, f_hi / shift)
    return tuple((ln.name, ln.rest_freq_hz * shift / factor) for ln in lines)


def _derived(row: dict[str, Any], notes: list[str]) -> dict[str, float | None]:
    from speccat.physics.derived import derived_quantities

    try:
        return dict(derived_quantities(row))
    except Exception as exc:  # a physics domain error is information, not a crash
        notes.append(f"derived quantities: {exc}")
        return {}
