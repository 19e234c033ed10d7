"""The results of a gain-schedule design (:mod:`damper.analysis.schedule`): the schedule itself,
the point sets it is designed and verified on, and the design and verification records."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..model.airframe import Derivatives
from ..quantities import quantity

@dataclass(frozen=True)
class Schedule:
    """A gain schedule.

    Attributes
    ----------
    variables : tuple of str
    form : str
        ``table`` or ``inverse_dynamic_pressure``.
    breakpoints : tuple of ndarray
        Per variable, ascending, in the variable's SI unit.
    gains : ndarray
        Breakpoint gains, s: shape (n1,) or (n1, n2).
    k_ref, q_ref : float or None
        Inverse-dynamic-pressure law: K = k_ref q_ref / q (s, Pa).
    """

    variables: tuple
    form: str
    breakpoints: tuple
    gains: np.ndarray
    k_ref: float | None = quantity("s", default=None)
    q_ref: float | None = quantity("Pa", default=None)

    def gain_at(self, values) -> np.ndarray:
        """Scheduled gain (s) at variable values (sequence of arrays, one per variable)."""
        if self.form == "inverse_dynamic_pressure":
            return self.k_ref * self.q_ref / np.asarray(values[0], dtype=float)
        if len(self.variables) == 1:
            return np.interp(values[0], self.breakpoints[0], self.gains)
        return bilinear(self.breakpoints[0], self.breakpoints[1], self.gains, values[0], values[1])


def bilinear(x, y, z, xq, yq):
    """Bilinear interpolation of table z[x, y] at (xq, yq), clamped at the table edges."""
    x = np.asarray(x, float)
    y = np.asarray(y, float)
    xq = np.clip(np.asarray(xq, float), x[0], x[-1])
    yq = np.clip(np.asarray(yq, float), y[0], y[-1])
    if x.size == 1 and y.size == 1:
        return np.full(np.broadcast(xq, yq).shape, z[0, 0])
    i = np.clip(np.searchsorted(x, xq, side="right") - 1, 0, max(x.size - 2, 0))
    j = np.clip(np.searchsorted(y, yq, side="right") - 1, 0, max(y.size - 2, 0))
    i1 = np.minimum(i + 1, x.size - 1)
    j1 = np.minimum(j + 1, y.size - 1)
    tx = np.where(i1 > i, (xq - x[i]) / np.where(i1 > i, x[i1] - x[i], 1.0), 0.0)
    ty = np.where(j1 > j, (yq - y[j]) / np.where(j1 > j, y[j1] - y[j], 1.0), 0.0)
    return (
        z[i, j] * (1 - tx) * (1 - ty) + z[i1, j] * tx * (1 - ty) + z[i, j1] * (1 - tx) * ty + z[i1, j1] * tx * ty
    )


@dataclass(frozen=True)
class PointSet:
    """Points where the loop is evaluated (1-D arrays).

    Attributes
    ----------
    derivatives : Derivatives
    values : ndarray, shape (n_variables, n)
        Schedule-variable values.
    altitude, airspeed : ndarray
        m, m/s.
    configuration : ndarray of int
    labels : tuple of str
    kind : ndarray of str
        ``design``, ``breakpoint``, ``between``, ``corner``, ``grid`` or ``condition``.
    mass, pitch_inertia : ndarray
        kg, kg m^2 (a configuration's, or interpolated between two conditions).
    """

    derivatives: Derivatives
    values: np.ndarray
    altitude: np.ndarray = quantity("m")
    airspeed: np.ndarray = quantity("m/s")
    configuration: np.ndarray
    labels: tuple
    kind: np.ndarray
    mass: np.ndarray = quantity("kg")
    pitch_inertia: np.ndarray = quantity("kg m^2")


@dataclass(frozen=True)
class BreakpointDesign:
    """Per breakpoint (flattened over a 2-D table): gain, whether feasible, design points, binding.

    Attributes
    ----------
    gains : ndarray
        s.
    feasible : ndarray of bool
    worst_slack : ndarray
        Least normalised slack (negative: missed).
    binding : tuple of str
    points : ndarray of int
    """

    gains: np.ndarray = quantity("s", key="gain_s")
    feasible: np.ndarray
    worst_slack: np.ndarray = quantity("")
    binding: tuple
    points: np.ndarray  # number of design points per breakpoint


@dataclass(frozen=True)
class Verification:
    """Schedule verification results at every verification point.

    Attributes
    ----------
    points : PointSet
    gains : ndarray
        The scheduled gain at each point, s.
    passed : ndarray of bool
    worst_slack : ndarray
        Least normalised slack (negative: missed).
    binding : tuple of str
    damping_ratio : ndarray
        By the requirements' damping measure.
    smallest_margin_db : ndarray
        Smallest gain margin, dB (NaN: unbounded).
    criteria_names : tuple of str
    """

    points: PointSet
    gains: np.ndarray = quantity("s", key="gain_s")
    passed: np.ndarray
    worst_slack: np.ndarray = quantity("")
    binding: tuple
    damping_ratio: np.ndarray = quantity("")
    smallest_margin_db: np.ndarray = quantity("dB", key="smallest_gain_margin_db")
    criteria_names: tuple


@dataclass(frozen=True)
class ScheduleResult:
    """A designed and verified schedule.

    Attributes
    ----------
    schedule : Schedule
    design : BreakpointDesign
    verification : Verification
    passed : bool
    rounds : int
        Design-verify rounds (1 + refinements).
    history : tuple of (int, int)
        Per round: number of breakpoints (total) and failing verification points.
    message : str
    source : str
        ``envelope`` or ``conditions``.
    configurations : tuple of str
    warnings : tuple of str
        Things the user should know about how the schedule was checked.
    """

    schedule: Schedule
    design: BreakpointDesign
    verification: Verification
    passed: bool
    rounds: int
    history: tuple
    message: str
    source: str
    configurations: tuple = field(default=())
    warnings: tuple = field(default=())
