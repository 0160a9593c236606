"""The reduction engine: baseline, robust noise, line finding, fits, widths, quality flags.

``measure(freq_hz, intensity, settings, stokes) -> Measurement`` is the entry point;
``line_model(freq_hz, lines)`` evaluates fitted lines for plotting. Pure numpy/scipy.
"""

from __future__ import annotations

from speccat.reduce.measure import line_model, measure
from speccat.reduce.settings import ReduceError, ReduceSettings

__all__ = ["ReduceError", "ReduceSettings", "line_model", "measure"]
