"""Criteria on the closed loop's modes and its equivalent system (short period)."""

from __future__ import annotations

import numpy as np

from .. import presets
from ..kind import DAMPING_MEASURE, NO_PRESET, CriterionKind

#: The source of the stability criterion every case has.
STABILITY_SOURCE = "closed loop must be stable (common practice)"


def _stability(m, which):
    return np.max(m.modes.eigenvalues.real, -1)


def _damping_ratio(m, which):
    return m.damping_ratio(which)


def _natural_frequency(m, which):
    return m.natural_frequency(which)


def _cap(m, which):
    return m.cap(which)


def _equivalent_time_delay(m, which):
    return m.equivalent.time_delay


def _equivalent_mismatch(m, which):
    return m.equivalent.mismatch


def _other_mode_damping(m, which):
    return m.modes.other_damping_ratio


STABILITY = CriterionKind(
    "stability", "closed-loop stability (largest real part)", "1/s", 1.0, False, _stability,
    doc="", band_kind="", preset_source=STABILITY_SOURCE,
)
DAMPING_RATIO = CriterionKind(
    "damping_ratio", "short-period damping ratio", "-", 0.1, False, _damping_ratio,
    doc="short-period damping ratio", band_kind="number", preset_source=presets.MIL_8785C,
    which=DAMPING_MEASURE, level=1,
)
NATURAL_FREQUENCY = CriterionKind(
    "natural_frequency", "short-period frequency", "rad/s", 0.5, False, _natural_frequency,
    doc="short-period natural frequency, rad/s", band_kind="rate", preset_source=presets.MIL_8785C,
    which=DAMPING_MEASURE, level=4,
)
CAP = CriterionKind(
    "cap", "control anticipation parameter (CAP)", "(rad/s^2)/g", 0.05, False, _cap,
    doc="control anticipation parameter, (rad/s^2)/g", band_kind="number", preset_source=presets.MIL_8785C_CAP,
    which=DAMPING_MEASURE, level=2,
)
EQUIVALENT_TIME_DELAY = CriterionKind(
    "equivalent_time_delay", "equivalent time delay", "s", 0.02, False, _equivalent_time_delay,
    doc="equivalent time delay, s", band_kind="time", preset_source=presets.MIL_1797A_DELAY,
    which="equivalent", level=3,
)
OTHER_MODE_DAMPING = CriterionKind(
    "other_mode_damping", "damping of the least-damped other mode", "-", 0.05, True, _other_mode_damping,
    doc="damping ratio of every other closed-loop mode", band_kind="number", preset_source=NO_PRESET,
)
EQUIVALENT_MISMATCH = CriterionKind(
    "equivalent_mismatch", "equivalent-system mismatch", "-", 1.0, False, _equivalent_mismatch,
    doc="equivalent-system fit mismatch J, dimensionless", band_kind="number", preset_source=NO_PRESET,
)
