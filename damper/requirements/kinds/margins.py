"""Stability-margin criteria (not met where the closed loop is unstable)."""

from __future__ import annotations

import numpy as np

from .. import presets
from ..kind import NO_PRESET, CriterionKind

INF = float("inf")


def _gain_margin(m, which):
    up = np.where(np.isnan(m.margins.gain_margin_db), INF, m.margins.gain_margin_db)
    down = np.where(np.isnan(m.margins.gain_margin_low_db), INF, -m.margins.gain_margin_low_db)
    both = np.minimum(up, down)
    return np.where(np.isinf(both), np.nan, both)


def _phase_margin(m, which):
    # distance of the phase from -180 deg in either direction at the nearest gain
    # crossing: a crossing with leading phase (e.g. the washout's low one, signed PM
    # near -170) tolerates that much phase change
    return m.margins.phase_margin_deg


def _delay_margin(m, which):
    return m.margins.delay_margin_s


def _disk_margin(m, which):
    return m.margins.disk_margin


GAIN_MARGIN = CriterionKind(
    "gain_margin", "gain margin", "dB", 1.0, True, _gain_margin,
    doc="gain margin, dB (applies up and down)", band_kind="number", preset_source=presets.MIL_9490D,
    needs_stability=True,
)
PHASE_MARGIN = CriterionKind(
    "phase_margin", "phase margin", "deg", 5.0, True, _phase_margin,
    doc="phase margin, deg", band_kind="number", preset_source=presets.MIL_9490D, needs_stability=True,
)
DELAY_MARGIN = CriterionKind(
    "delay_margin", "delay margin", "s", 0.01, True, _delay_margin,
    doc="delay margin, s", band_kind="time", preset_source=NO_PRESET, needs_stability=True,
)
DISK_MARGIN = CriterionKind(
    "disk_margin", "disk margin", "-", 0.1, False, _disk_margin,
    doc="symmetric disk margin alpha", band_kind="number", preset_source=NO_PRESET, needs_stability=True,
    needs_disk_margin=True,
)
