"""The core (model, catalogue, physics, io, reduce, identify) must not pull in the DB or the UI."""

from __future__ import annotations

import subprocess
import sys

CORE = [
    "speccat.model",
    "speccat.catalogue",
    "speccat.physics",
    "speccat.io",
    "speccat.reduce",
    "speccat.identify",
]


def test_core_imports_no_database_or_ui() -> None:
    code = (
        "import importlib, sys\n"
        f"for m in {CORE!r}:\n"
        "    try:\n"
        "        importlib.import_module(m)\n"
        "    except ModuleNotFoundError as e:\n"
        "        if e.name != m: raise\n"
        "bad = sorted(n for n in ('textual', 'sqlalchemy', 'rich') if n in sys.modules)\n"
        "print(','.join(bad))\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "", f"core imported {out.stdout.strip()}"
