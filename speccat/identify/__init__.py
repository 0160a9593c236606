"""Automatic line identification: which transition is each measured feature, at what velocity.

For every fitted line of a spectrum:

1. its centre goes to the LSRK frame (``speccat.physics.doppler.lsrk_correction``; when the
   declared frame cannot be established the velocities stay in the declared frame and every
   detection carries the correction's flag, e.g. ``frame-unknown``);
2. candidates are the catalogue lines whose implied velocity lies in a plausible window:
   Galactic (±``vel_window_kms``), around a systemic velocity the header (``z_source``) or
   earlier nights (``known_velocities``) supply, and, for HI only, extragalactic recession
   velocities when the profile is as wide as a galaxy's;
3. each (line, candidate) pair gets a base score, the product of small named terms
   (``terms.py``, ``candidates.py``): catalogue prior, width plausibility, emission/absorption,
   a missing stronger companion (He/C without H, NH3 satellites without the main line), and
   the line the header's rest frequency (RESTFRQ) names;
4. the joint assignment: the source's velocity is unknown, so every pair's velocity is taken in
   turn as a hypothesis for it. Under a hypothesis each line either shares that velocity (within
   a class-dependent spread: H/He/C recombination lines a few km/s, maser spikes tens of km/s,
   galaxy profiles hundreds; more often within one family such as all recombination lines or
   one molecule) or is an independent Galactic feature. Every detection also has a "none of
   these" alternative (an uncatalogued line, interference, an artefact; likelier for fits the
   reducer flags ``rfi-spike``). Hypotheses are
   weighted by how well they explain all detections together, and a candidate's score is its
   probability averaged over hypotheses; scores of a detection's candidates plus "none" sum to 1.

A detection's primary identification is its best candidate when that beats "none of these" and
scores at least ``threshold``; otherwise the detection stays unidentified (never forced).
Velocities are LSRK, radio convention, relative to the identified rest frequency.

Modules: ``core`` (``identify``), ``candidates`` (LSRK features, catalogue arrays, candidate
search, companions), ``terms`` (scoring terms and their tuning constants), ``joint`` (the
hypothesis average).
"""

from __future__ import annotations

from speccat.identify.core import identify
from speccat.identify.terms import MAX_CANDIDATES

__all__ = ["MAX_CANDIDATES", "identify"]
