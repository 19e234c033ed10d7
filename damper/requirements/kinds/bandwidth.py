"""Pitch-attitude bandwidth criteria (:mod:`damper.measures.bandwidth`)."""

from __future__ import annotations

from ..kind import NO_PRESET, CriterionKind


def _bandwidth(m, which):
    return m.bandwidth.bandwidth


def _phase_delay(m, which):
    return m.bandwidth.phase_delay


BANDWIDTH = CriterionKind(
    "bandwidth", "pitch-attitude bandwidth", "rad/s", 0.5, False, _bandwidth,
    doc="pitch-attitude bandwidth, rad/s", band_kind="rate", preset_source=NO_PRESET,
    needs_bandwidth=True,
)
PHASE_DELAY = CriterionKind(
    "phase_delay", "phase delay", "s", 0.02, False, _phase_delay,
    doc="pitch-attitude phase delay, s", band_kind="time", preset_source=NO_PRESET,
    needs_bandwidth=True,
)
