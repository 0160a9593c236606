"""Run every ``benchmarks/bench_*.py`` and print one table of figures.

Each module exposes ``run(quick: bool) -> list[dict]``; a row has ``figure``, ``value``, ``unit``
and optionally ``baseline`` (same unit, measured in the same run) and ``ratio``. The results also
go to ``benchmarks/results/<UTC date>.json`` with the machine they ran on.
"""

from __future__ import annotations

import argparse
import importlib
import json
import os
import pkgutil
import platform
import sys
import time
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

HERE = Path(__file__).resolve().parent


def machine() -> dict[str, Any]:
    import numpy

    return {
        "python": platform.python_version(),
        "numpy": numpy.__version__,
        "cpu_count": os.cpu_count(),
        "machine": platform.machine(),
        "processor": platform.processor() or "unknown",
        "system": f"{platform.system()} {platform.release()}",
    }


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="python -m benchmarks", description=__doc__)
    mode = parser.add_mutually_exclusive_group()
    mode.add_argument("--quick", action="store_true", help="small sizes, under 2 minutes (CI)")
    mode.add_argument("--full", action="store_true", help="archive-scale sizes, for the record")
    parser.add_argument("--only", metavar="NAME", help="run only bench_NAME")
    parser.add_argument("--no-save", action="store_true", help="do not write results/<date>.json")
    args = parser.parse_args(argv)
    quick = not args.full
    names = sorted(m.name for m in pkgutil.iter_modules([str(HERE)]) if m.name.startswith("bench_"))
    if args.only:
        names = [n for n in names if n == f"bench_{args.only}"]
    rows: list[dict[str, Any]] = []
    for name in names:
        t0 = time.perf_counter()
        module = importlib.import_module(f"benchmarks.{name}")
        for row in module.run(quick):
            rows.append({"bench": name.removeprefix("bench_"), **row})
        print(f"[{name}: {time.perf_counter() - t0:.1f} s]", file=sys.stderr)
    print(f"{'figure':<58} {'value':>12} {'unit':<10} {'baseline':>12} {'ratio':>8}")
    for r in rows:
        base = r.get("baseline")
        ratio = r.get("ratio")
        print(
            f"{r['figure'][:58]:<58} {r['value']:>12.4g} {r.get('unit', ''):<10} "
            f"{'' if base is None else f'{base:.4g}':>12} {'' if ratio is None else f'{ratio:.3g}':>8}"
        )
    if not args.no_save:
        out = (
            HERE
            / "results"
            / f"{datetime.now(UTC).date().isoformat()}-{'quick' if quick else 'full'}.json"
        )
        out.parent.mkdir(exist_ok=True)
        out.write_text(
            json.dumps(
                {
                    "machine": machine(),
                    "mode": "quick" if quick else "full",
                    "time": datetime.now(UTC).isoformat(),
                    "rows": rows,
                },
                indent=1,
            )
        )
        print(f"written {out}", file=sys.stderr)
    return 0


if __name__ == "__main__":
    sys.exit(main())
