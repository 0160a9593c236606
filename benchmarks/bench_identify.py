"""Identification speed and accuracy on the synthetic night (tests/synthetic_night.py).

Figures: identifications (detections) per second and time per spectrum of
``speccat.identify.identify``, on ideal measurements of the synthetic night, against a naive
baseline that gives each detection the highest-prior catalogue line in the Galactic velocity
window (no widths, no joint assignment); and both methods' top-1 accuracy. Times are CPU
time of this process (the machine is shared, so wall time says little).
"""

from __future__ import annotations

import importlib.util
import sys
import time
from functools import cache
from pathlib import Path
from typing import Any

import numpy as np

from speccat.catalogue import builtin
from speccat.identify import identify
from speccat.model import C_KMS
from speccat.physics.doppler import lsrk_correction


@cache
def _synthetic_night() -> Any:
    """tests/synthetic_night.py, loaded by path (it lives with the tests, not in a package)."""
    path = Path(__file__).resolve().parent.parent / "tests" / "synthetic_night.py"
    spec = importlib.util.spec_from_file_location("synthetic_night", path)
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = module  # dataclasses look their module up while being built
    spec.loader.exec_module(module)
    return module


def _naive(truth: Any, meas: Any, cat: Any) -> list[str | None]:
    factor = lsrk_correction(truth.spectrum).factor
    out: list[str | None] = []
    for fit in meas.lines:
        f = fit.center_hz * factor
        found = cat.between(f / (1 + 400 / C_KMS), f / (1 - 400 / C_KMS))
        out.append(max(found, key=lambda ln: ln.prior).name if found else None)
    return out


def _accuracy(night: list[Any], measured: list[Any], names: list[list[str | None]]) -> float:
    sn = _synthetic_night()
    ok = total = 0
    for truth, meas, got in zip(night, measured, names, strict=True):
        for line, i in sn.match(truth, meas.lines):
            if line.name and i is not None:
                total += 1
                ok += got[i] == line.name
    return ok / max(total, 1)


def run(quick: bool) -> list[dict[str, Any]]:
    sn = _synthetic_night()
    cat = builtin()
    night = sn.night(cat, lambda s: lsrk_correction(s).factor)
    rng = np.random.default_rng(3)
    measured = [sn.ideal_measurement(t, rng) for t in night]
    n_det = sum(len(m.lines) for m in measured)
    identify(night[0].spectrum, measured[0], cat)  # warm the catalogue arrays
    repeats = 1 if quick else 5
    t0 = time.process_time()
    for _ in range(repeats):
        results = [identify(t.spectrum, m, cat) for t, m in zip(night, measured, strict=True)]
    t_id = (time.process_time() - t0) / repeats
    t0 = time.process_time()
    for _ in range(repeats):
        naive = [_naive(t, m, cat) for t, m in zip(night, measured, strict=True)]
    t_naive = (time.process_time() - t0) / repeats
    names = [[d.line.name if d.line else None for d in r.detections] for r in results]
    acc, acc_naive = _accuracy(night, measured, names), _accuracy(night, measured, naive)
    rate, rate_naive = n_det / t_id, n_det / t_naive
    return [
        {"figure": f"identify: detections/s ({len(night)} spectra, {n_det} lines)",
         "value": rate, "unit": "ids/cpu-s", "baseline": rate_naive, "ratio": rate / rate_naive},
        {"figure": "identify: time per spectrum", "value": 1e3 * t_id / len(night), "unit": "cpu-ms"},
        {"figure": "identify: top-1 accuracy, synthetic night", "value": 100 * acc,
         "unit": "%", "baseline": 100 * acc_naive, "ratio": acc / max(acc_naive, 1e-9)},
    ]  # fmt: skip
