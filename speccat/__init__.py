"""speccat: ingest, measure, identify, browse and export radio spectral-line observations."""

from __future__ import annotations

import os
from importlib.metadata import PackageNotFoundError, version

# speccat's arrays are small (a spectrum, a fit window): a multi-threaded BLAS only adds
# thread hand-offs, and the ingest already runs one worker process per core. Set before
# numpy is first imported; an explicit setting in the environment wins.
for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

try:
    __version__ = version("speccat")
except PackageNotFoundError:  # running from a source tree that was never installed
    __version__ = "0.0.0+unknown"

__all__ = ["__version__"]
