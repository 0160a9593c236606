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


def build_report(conn: Connection, night: str | None) -> dict[str, Any]:
    """A JSON-ready summary of ``night`` (the latest night when None)."""
    label = night if night is not None else _latest_night(conn)
    if label is None:
        raise FilterError("the archive holds no nights yet; run speccat ingest first")
    d, s = detections.c, spectra.c
    n_files = conn.execute(
        select(func.count()).select_from(files).where(files.c.night == label)
    ).scalar_one()
    fail_rows = conn.execute(
        select(failures.c.path, failures.c.reason)
        .where(
            or_(
                failures.c.night == label,
                and_(
                    failures.c.night.is_(None),
                    failures.c.run_id.in_(select(files.c.run_id).where(files.c.night == label)),
                ),
            )
        )
        .order_by(failures.c.id)
    ).all()
    if n_files == 0 and not fail_rows:
        raise FilterError(f"--night: no data for night {label[:40]!r} in the archive")
    n_spectra = conn.execute(
        select(func.count()).select_from(spectra).where(s.night == label)
    ).scalar_one()
    n_det = conn.execute(
        select(func.count()).select_from(detections).where(d.night == label)
    ).scalar_one()
    n_unid = conn.execute(
        select(func.count()).select_from(detections).where(d.night == label, d.line.is_(None))
    ).scalar_one()
    src_spec: dict[str, int] = dict(
        conn.execute(
            select(s.source, func.count()).where(s.night == label).group_by(s.source)
        ).all()
    )
    src_det: dict[str, int] = dict(
        conn.execute(
            select(d.source, func.count()).where(d.night == label).group_by(d.source)
        ).all()
    )
    per_line = conn.execute(
        select(d.species, d.line, func.count(), func.max(d.snr))
        .where(d.night == label, d.line.is_not(None))
        .group_by(d.species, d.line)
        .order_by(func.count().desc(), d.line)
    ).all()
    det_flags = _split_flags(
        conn.execute(select(d.flags, func.count()).where(d.night == label).group_by(d.flags))
    )
    spec_flags = _split_flags(
        conn.execute(select(s.flags, func.count()).where(s.night == label).group_by(s.flags))
    )
    frame_flags = conn.execute(
        select(s.frame_flag, func.count())
        .where(s.night == label, s.frame_flag.is_not(None))
        .group_by(s.frame_flag)
    ).all()
    for flag, n in frame_flags:
        spec_flags[str(flag)] += int(n)
    base = record_select().where(d.night == label)
    strongest = conn.execute(base.order_by(d.snr.desc(), d.id.desc()).limit(TOP_N)).all()
    unidentified = conn.execute(
        base.where(d.line.is_(None)).order_by(d.snr.desc(), d.id.desc()).limit(TOP_N)
    ).all()
    return {
        "night": label,
        "files": int(n_files),
        "spectra": int(n_spectra),
        "detections": int(n_det),
        "identified": int(n_det - n_unid),
        "unidentified": int(n_unid),
        "sources": [
            {
                "source": name,
                "spectra": int(src_spec[name]),
                "detections": int(src_det.get(name, 0)),
            }
            for name in sorted(src_spec)
        ],
        "lines": [
            {"species": sp, "line": ln, "detections": int(n), "max_snr": mx}
            for sp, ln, n, mx in per_line
        ],
        "strongest": [to_record(r) for r in strongest],
        "unidentified_features": [to_record(r) for r in unidentified],
        "detection_flags": dict(sorted(det_flags.items(), key=lambda kv: (-kv[1], kv[0]))),
        "spectrum_flags": dict(sorted(spec_flags.items(), key=lambda kv: (-kv[1], kv[0]))),
        "failures": [{"path": p, "reason": r} for p, r in fail_rows],
    }
