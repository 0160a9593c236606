"""What one night brought: the data behind ``speccat report``."""

from __future__ import annotations

from collections import Counter
from typing import Any

from sqlalchemy import and_, func, or_, select
from sqlalchemy.engine import Connection

from speccat.archive.records import record_select, to_record
from speccat.archive.schema import detections, failures, files, spectra
from speccat.errors import FilterError

TOP_N = 10
REPORT_KEYS = ("night", "files", "spectra", "detections", "identified", "unidentified")


def _latest_night(conn: Connection) -> str | None:
    """The night of the most recently stored file (else of the latest failure)."""
    night = conn.execute(select(files.c.night).order_by(files.c.id.desc()).limit(1)).scalar()
    if night is None:
        night = conn.execute(
            select(failures.c.night)
            .where(failures.c.night.is_not(None))
            .order_by(failures.c.id.desc())
            .limit(1)
        ).scalar()
    return None if night is None else str(night)


def _split_flags(rows: Any) -> Counter[str]:
    counts: Counter[str] = Counter()
    for flags, n in rows:
        for flag in (flags or "").split(";"):
            if flag:
                counts[flag] += int(n)
    return counts


def _count(conn: Connection, table: Any, *where: Any) -> int:
    return int(conn.execute(select(func.count()).select_from(table).where(*where)).scalar_one())


def _failures(conn: Connection, label: str) -> list[dict[str, str]]:
    """Failures labelled with the night, or unlabelled ones of a run that stored its files."""
    f = failures.c
    runs_of_night = select(files.c.run_id).where(files.c.night == label)
    stmt = (
        select(f.path, f.reason)
        .where(or_(f.night == label, and_(f.night.is_(None), f.run_id.in_(runs_of_night))))
        .order_by(f.id)
    )
    return [{"path": p, "reason": r} for p, r in conn.execute(stmt)]


def _sources(conn: Connection, label: str) -> list[dict[str, Any]]:
    d, s = detections.c, spectra.c
    per_spec: dict[str, int] = dict(
        conn.execute(
            select(s.source, func.count()).where(s.night == label).group_by(s.source)
        ).all()
    )
    per_det: dict[str, int] = dict(
        conn.execute(
            select(d.source, func.count()).where(d.night == label).group_by(d.source)
        ).all()
    )
    return [
        {"source": n, "spectra": int(per_spec[n]), "detections": int(per_det.get(n, 0))}
        for n in sorted(per_spec)
    ]


def _flags(conn: Connection, label: str) -> tuple[dict[str, int], dict[str, int]]:
    """Flag counts over the night's detections and over its spectra (+ frame flags)."""
    d, s = detections.c, spectra.c
    det = _split_flags(
        conn.execute(select(d.flags, func.count()).where(d.night == label).group_by(d.flags))
    )
    spec = _split_flags(
        conn.execute(select(s.flags, func.count()).where(s.night == label).group_by(s.flags))
    )
    frames = select(s.frame_flag, func.count()).where(s.night == label, s.frame_flag.is_not(None))
    for flag, n in conn.execute(frames.group_by(s.frame_flag)):
        spec[str(flag)] += int(n)

    def ordered(c: Counter[str]) -> dict[str, int]:
        return dict(sorted(c.items(), key=lambda kv: (-kv[1], kv[0])))

    return ordered(det), ordered(spec)


def build_report(conn: Connection, night: str | None) -> dict[str, Any]:
    """A JSON-ready summary of ``night`` (the latest night when None)."""
    label = night if night is not None else _latest_night(conn)
    if label is None:
        raise FilterError("the archive holds no nights yet; run speccat ingest first")
    d = detections.c
    n_files = _count(conn, files, files.c.night == label)
    fails = _failures(conn, label)
    if n_files == 0 and not fails:
        raise FilterError(f"--night: no data for night {label[:40]!r} in the archive")
    n_det = _count(conn, detections, d.night == label)
    n_unid = _count(conn, detections, d.night == label, d.line.is_(None))
    per_line = conn.execute(
        select(d.species, d.line, func.count(), func.max(d.snr))
        .where(d.night == label, d.line.is_not(None))
        .group_by(d.species, d.line)
        .order_by(func.count().desc(), d.line)
    ).all()
    det_flags, spec_flags = _flags(conn, label)
    top = record_select().where(d.night == label).order_by(d.snr.desc(), d.id.desc()).limit(TOP_N)
    return {
        "night": label,
        "files": n_files,
        "spectra": _count(conn, spectra, spectra.c.night == label),
        "detections": n_det,
        "identified": n_det - n_unid,
        "unidentified": n_unid,
        "sources": _sources(conn, label),
        "lines": [
            {"species": sp, "line": ln, "detections": int(n), "max_snr": mx}
            for sp, ln, n, mx in per_line
        ],
        "strongest": [to_record(r) for r in conn.execute(top)],
        "unidentified_features": [to_record(r) for r in conn.execute(top.where(d.line.is_(None)))],
        "detection_flags": det_flags,
        "spectrum_flags": spec_flags,
        "failures": fails,
    }
