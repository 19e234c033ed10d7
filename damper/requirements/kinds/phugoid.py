"""Phugoid criteria of the four-state longitudinal model (MIL-F-8785C 3.2.1.2)."""

from __future__ import annotations

from .. import presets
from ..kind import CriterionKind


def _phugoid_damping_ratio(m, which):
    return m.modes.phugoid.damping_ratio


def _phugoid_time_to_double(m, which):
    return m.modes.phugoid.time_to_double


PHUGOID_DAMPING_RATIO = CriterionKind(
    "phugoid_damping_ratio", "phugoid damping ratio (closed loop)", "-", 0.05, False, _phugoid_damping_ratio,
    doc="closed-loop phugoid damping ratio (model: longitudinal only)", band_kind="number",
    preset_source=presets.MIL_8785C_PHUGOID, longitudinal_only=True,
)
PHUGOID_TIME_TO_DOUBLE = CriterionKind(
    "phugoid_time_to_double", "phugoid time to double amplitude (closed loop; none when stable)", "s", 10.0, True,
    _phugoid_time_to_double,
    doc="closed-loop phugoid time to double amplitude, s; a stable phugoid meets any minimum (model: longitudinal only)",
    band_kind="time", preset_source=presets.MIL_8785C_PHUGOID, longitudinal_only=True,
)
