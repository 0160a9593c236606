"""Catalogue speed: building the built-in catalogue and window / name queries.

Targets (issue 3): build < 100 ms, window query < 1 ms. Baselines, measured in the same run:
- build: every line made eagerly through the frozen dataclass constructor and sorted in Python
  (the obvious implementation);
- window query: a linear scan over all lines (the brute force the tests compare against).
"""

from __future__ import annotations

import statistics
import subprocess
import sys
import time
from collections.abc import Callable
from typing import Any

import numpy as np


def _median_ms(fn: Callable[[], object], repeats: int) -> float:
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        times.append((time.perf_counter() - t0) * 1e3)
    return statistics.median(times)


def _eager_build() -> list[Any]:
    from speccat.catalogue import CatalogueLine
    from speccat.catalogue.lines import recombination_line
    from speccat.catalogue.loader import curated_lines, recombination_series

    lines = list(curated_lines())
    for s in recombination_series():
        for n, dn, f in zip(s.n.tolist(), s.dn.tolist(), s.freq_hz.tolist(), strict=True):
            fast = recombination_line(s.element, n, dn, f)
            lines.append(CatalogueLine(**fast.__dict__))  # through the frozen __init__
    return sorted(lines, key=lambda line: (line.rest_freq_hz, line.name))


def run(quick: bool) -> list[dict[str, Any]]:
    from speccat.catalogue import Catalogue, builtin
    from speccat.catalogue.loader import curated_lines, recombination_series

    repeats = 5 if quick else 20
    n_queries = 2_000 if quick else 20_000
    rows: list[dict[str, Any]] = []

    builtin()  # warm imports (astropy.constants) so the figure is the build itself
    build_ms = _median_ms(
        lambda: Catalogue(curated_lines(), computed=recombination_series()), repeats
    )
    eager_ms = _median_ms(_eager_build, max(2, repeats // 4))
    rows.append(
        {"figure": "catalogue build (target < 100 ms)", "value": round(build_ms, 2), "unit": "ms",
         "baseline": round(eager_ms, 2), "ratio": round(eager_ms / build_ms, 1)}
    )  # fmt: skip

    cat = Catalogue(curated_lines(), computed=recombination_series())
    all_ms = _median_ms(
        lambda: Catalogue(curated_lines(), computed=recombination_series()).lines, 3
    )
    rows.append({"figure": "catalogue build + every line materialised", "value": round(all_ms, 2),
                 "unit": "ms"})  # fmt: skip

    rng = np.random.default_rng(3)
    centres = np.exp(rng.uniform(np.log(1e8), np.log(1e12), n_queries))
    halves = centres * 400.0 / 299_792.458  # +-400 km/s windows, as identification uses
    t0 = time.perf_counter()
    hits = 0
    for c, h in zip(centres.tolist(), halves.tolist(), strict=True):
        hits += len(cat.between(c - h, c + h))
    query_ms = (time.perf_counter() - t0) * 1e3 / n_queries
    lines = cat.lines
    n_brute = max(20, n_queries // 100)
    t0 = time.perf_counter()
    for c, h in zip(centres[:n_brute].tolist(), halves[:n_brute].tolist(), strict=True):
        [line for line in lines if c - h <= line.rest_freq_hz <= c + h]
    brute_ms = (time.perf_counter() - t0) * 1e3 / n_brute
    rows.append(
        {"figure": "catalogue window query +-400 km/s (target < 1 ms)", "value": round(query_ms, 4),
         "unit": "ms", "baseline": round(brute_ms, 3), "ratio": round(brute_ms / query_ms, 1),
         "note": f"{hits / n_queries:.1f} lines per window on average"}
    )  # fmt: skip

    names = ["H109alpha", "OH 1667", "NH3 (1,1)", "21cm", "13CO(2-1)", "He166α"]
    t0 = time.perf_counter()
    for _ in range(max(1, n_queries // len(names))):
        for name in names:
            cat.by_name(name)
    name_us = (time.perf_counter() - t0) * 1e6 / (max(1, n_queries // len(names)) * len(names))
    rows.append({"figure": "catalogue by_name (mixed spellings)", "value": round(name_us, 2),
                 "unit": "us"})  # fmt: skip

    if not quick:
        code = (
            "import time; t=time.perf_counter(); import speccat.catalogue as c; c.builtin(); "
            "print((time.perf_counter()-t)*1e3)"
        )
        out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
        if out.returncode == 0:
            rows.append({"figure": "catalogue cold start (import + build, new process)",
                         "value": round(float(out.stdout.strip()), 1), "unit": "ms"})  # fmt: skip
    return rows


if __name__ == "__main__":
    for row in run(quick="--full" not in sys.argv):
        print(row)
