"""Systemic velocities of sources learned from their identified lines."""

from __future__ import annotations

from collections import defaultdict
from datetime import datetime
from typing import Any

import numpy as np
from sqlalchemy import func, select
from sqlalchemy.engine import Connection

from speccat.archive.schema import detections, lines, spectra

#: Line classes left out of the systemic velocity when a source has other lines.
EXCLUDED_CLASSES = frozenset({"maser"})
EXCLUDED_LINES = frozenset({"HI"})


def weighted_median(values: np.ndarray, weights: np.ndarray) -> float:
    """The lower weighted median: the smallest value whose cumulative weight reaches half."""
    order = np.argsort(values, kind="stable")
    v, w = values[order], weights[order]
    if not np.any(w > 0):
        w = np.ones_like(v)
    cum = np.cumsum(w)
    idx = int(np.searchsorted(cum, 0.5 * cum[-1]))
    return float(v[min(idx, v.size - 1)])


def compute_sources(
    conn: Connection, names: list[str] | None, now: datetime
) -> list[dict[str, Any]]:
    """One ``sources`` row per source (all, or those in ``names``)."""
    d = detections.c
    ident = (
        select(d.source, d.v_lsr_kms, d.snr, d.line, lines.c.line_class)
        .select_from(detections.outerjoin(lines, lines.c.name == d.line))
        .where(d.line.is_not(None), d.v_lsr_kms.is_not(None))
    )
    first = (
        select(spectra.c.source, func.min(spectra.c.id).label("sid"))
        .where(spectra.c.ra_deg.is_not(None))
        .group_by(spectra.c.source)
    )
    all_names = select(spectra.c.source).distinct()
    if names is not None:
        ident = ident.where(d.source_lc.in_([n.lower() for n in names]), d.source.in_(names))
        first = first.where(spectra.c.source.in_(names))
        all_names = all_names.where(spectra.c.source.in_(names))
    preferred: dict[str, list[tuple[float, float]]] = defaultdict(list)
    other: dict[str, list[tuple[float, float]]] = defaultdict(list)
    for source, v, snr, line, line_class in conn.execute(ident):
        weight = float(snr) if snr is not None and snr > 0 else 0.0
        bucket = other if (line in EXCLUDED_LINES or line_class in EXCLUDED_CLASSES) else preferred
        bucket[source].append((float(v), weight))
    sids = {src: sid for src, sid in conn.execute(first)}
    coords: dict[str, tuple[float | None, float | None]] = {}
    if sids:
        stmt = select(spectra.c.source, spectra.c.ra_deg, spectra.c.dec_deg).where(
            spectra.c.id.in_(list(sids.values()))
        )
        coords = {src: (ra, dec) for src, ra, dec in conn.execute(stmt)}
    rows = []
    for (source,) in conn.execute(all_names):
        pairs = preferred.get(source) or other.get(source) or []
        v_sys = None
        if pairs:
            arr = np.asarray(pairs, dtype=float)
            v_sys = weighted_median(arr[:, 0], arr[:, 1])
        ra, dec = coords.get(source, (None, None))
        rows.append(
            {
                "name": source,
                "ra_deg": ra,
                "dec_deg": dec,
                "v_sys_kms": v_sys,
                "n_lines": len(pairs),
                "updated_utc": now,
            }
        )
    return rows
