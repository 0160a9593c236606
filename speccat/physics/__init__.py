"""Physics for speccat: Doppler conventions and frames, kinematic distances, line diagnostics.

Pure functions on floats and numpy arrays (astropy only where a reference frame or a unit is
needed). Submodules are imported on demand so that ``import speccat.physics`` stays cheap:
``doppler``, ``kinematic``, ``diagnostics``, ``zeeman``, ``stacking``, ``derived``.
"""

from __future__ import annotations
