"""Inputs of the time responses: pilot inputs (doublet, step, pulse) and vertical gusts.

The pilot command is positive nose-up (docs/theory.md section 1); it reaches the actuator
input as ``sign(M_delta)`` times itself in :mod:`damper.analysis.simulation`. A gust is
an angle-of-attack disturbance ``alpha_g = w_g / V`` with ``w_g`` positive upward.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..model.batch import map_arrays
from ..quantities import quantity

#: Input kinds (case-file words).
PILOT_KINDS = ("doublet", "step", "pulse")
GUST_KINDS = ("gust_sharp", "gust_one_minus_cosine")
KINDS = PILOT_KINDS + GUST_KINDS

#: An input's edge counts as passed within this much time, s (so that a doublet
#: written as start 0.2 s, half-period 0.4 s switches at t = 0.6 s despite rounding).
EDGE_TOL = 1e-12


@dataclass(frozen=True)
class Input:
    """A pilot input or a vertical gust. Numeric fields broadcast against the batch.

    Attributes
    ----------
    kind : str
        ``doublet``, ``step``, ``pulse``, ``gust_sharp`` or ``gust_one_minus_cosine``.
    amplitude : ndarray
        Pilot command, rad of surface, positive nose-up (a pull is positive, whatever the
        sign of ``M_delta``): it reaches the actuator input as ``sign(M_delta)`` times
        itself (:func:`damper.model.airframe.nose_up_surface`). A doublet is
        ``+amplitude`` for one half-period then ``-amplitude`` for the next.
    start : ndarray
        Time the input begins, s.
    half_period : ndarray
        Doublet: duration of each half, s.
    duration : ndarray
        Pulse: duration, s.
    gust_velocity : ndarray
        Gust: vertical velocity w_g, m/s, positive upward (raises alpha). For the
        1-cosine gust, the peak velocity.
    gust_length : ndarray
        1-cosine gust: length L, m, over which the gust rises and falls,
        ``w = w_g/2 (1 - cos(2 pi x / L))`` for ``0 <= x <= L``, ``x = V (t - start)``
        (L is twice the "gradient distance" of the usual certification wording).
    name : str
        Label for tables and files.
    """

    kind: str
    amplitude: np.ndarray = quantity("rad", default=0.0)
    start: np.ndarray = quantity("s", default=0.5)
    half_period: np.ndarray = quantity("s", default=0.5)
    duration: np.ndarray = quantity("s", default=0.5)
    gust_velocity: np.ndarray = quantity("m/s", default=0.0)
    gust_length: np.ndarray = quantity("m", default=0.0)
    name: str = ""

    def __post_init__(self):
        if self.kind not in KINDS:
            raise ValueError(f"input kind must be one of {', '.join(KINDS)}, not {self.kind!r}")

    @property
    def label(self) -> str:
        return self.name or self.kind

    @property
    def is_gust(self) -> bool:
        return self.kind in GUST_KINDS

    @property
    def persistent(self) -> bool:
        """The input does not end (step, sharp-edged gust)."""
        return self.kind in ("step", "gust_sharp")


def _f(x):
    return np.asarray(x, dtype=float)


def pilot_command(inp: Input, t):
    """Pilot command, rad, positive nose-up, at times `t` (s).

    `t` broadcasts against the input's parameters (give it a trailing axis of
    length 1 per batch axis when the parameters are batched). A jump at time
    ``t0`` takes its new value at ``t >= t0`` (within :data:`EDGE_TOL`).
    """
    t = _f(t) + EDGE_TOL
    a, t0 = _f(inp.amplitude), _f(inp.start)
    if inp.kind == "doublet":
        hp = _f(inp.half_period)
        return np.where((t >= t0) & (t < t0 + hp), a, 0.0) - np.where((t >= t0 + hp) & (t < t0 + 2 * hp), a, 0.0)
    if inp.kind == "step":
        return np.where(t >= t0, a, 0.0)
    if inp.kind == "pulse":
        return np.where((t >= t0) & (t < t0 + _f(inp.duration)), a, 0.0)
    return np.zeros(np.broadcast_shapes(t.shape, a.shape))


def gust_velocity(inp: Input, t, airspeed):
    """Vertical gust velocity w_g, m/s (positive upward), at times `t` (s).

    Parameters
    ----------
    airspeed : array_like
        True airspeed V, m/s (the 1-cosine gust is crossed at V).
    """
    t = _f(t)
    u, t0 = _f(inp.gust_velocity), _f(inp.start)
    if inp.kind == "gust_sharp":
        return np.where(t + EDGE_TOL >= t0, u, 0.0)
    if inp.kind == "gust_one_minus_cosine":
        length = _f(inp.gust_length)
        with np.errstate(invalid="ignore", divide="ignore"):
            x = _f(airspeed) * (t - t0) / length
        return np.where((x >= 0) & (x <= 1), 0.5 * u * (1.0 - np.cos(2.0 * np.pi * x)), 0.0)
    return np.zeros(np.broadcast_shapes(t.shape, u.shape, np.shape(airspeed)))


def gust_angle(inp: Input, t, airspeed):
    """Gust angle of attack ``alpha_g = w_g / V``, rad."""
    return gust_velocity(inp, t, airspeed) / _f(airspeed)


def input_end(inp: Input, airspeed):
    """Time the input ends, s (the start for a step or sharp-edged gust)."""
    t0 = _f(inp.start)
    if inp.kind == "doublet":
        return t0 + 2.0 * _f(inp.half_period)
    if inp.kind == "pulse":
        return t0 + _f(inp.duration)
    if inp.kind == "gust_one_minus_cosine":
        return t0 + _f(inp.gust_length) / _f(airspeed)
    return t0 + 0.0 * _f(airspeed)


def flat_input(inp: Input, shape):
    """`inp` with numeric fields broadcast to `shape` and raveled."""
    return map_arrays(inp, lambda a: np.ascontiguousarray(np.broadcast_to(a, shape)).reshape(-1))

