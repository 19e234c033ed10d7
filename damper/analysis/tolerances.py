"""Tolerances of the measures that the documents state beside their results.

Re-exported here so output (which never imports the model or the measures) states the same
values the measures use.

* ``DAMPING_TOLERANCE`` (-) and ``FREQUENCY_TOLERANCE`` (relative, -): how far the two-state
  short-period model may be from the four-state model before it is called different
  (:func:`damper.measures.modes.approximation_differs`).
"""

from __future__ import annotations

from ..measures.modes import DAMPING_TOLERANCE, FREQUENCY_TOLERANCE

__all__ = ["DAMPING_TOLERANCE", "FREQUENCY_TOLERANCE"]
