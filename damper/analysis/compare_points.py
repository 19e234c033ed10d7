"""Where two designs are compared: schedule points on the union of two verification grids,
and gain sweeps of one condition for overlay plots.

Two schedules (of two runs, perhaps of two cases) are compared on the union of both
verification grids (:func:`damper.analysis.schedule.verification_points` with each schedule's
variables and breakpoints), each run on its own case's derivatives there and with its own
schedule's gain (:meth:`damper.analysis.schedule.Schedule.gain_at`, the interpolation of the
schedule's verification). Points are matched by their labels (configuration, altitude,
airspeed); a point only one case's envelope has is evaluated only there.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class ScheduledPoints:
    """One run's schedule evaluated at points.

    Attributes
    ----------
    case : damper.case.model.Case
        The run's case with one condition per point (named by the point's label).
    gains : ndarray, shape (n,)
        The schedule's gain at each point, s.
    kinds : tuple of str
        Each point's kind (``between``, ``grid``, ``corner``, ``condition`` ...).
    result : damper.analysis.assess.Assessment
        The loop at each point and gain, against the case's requirements.
    """

    case: object
    gains: np.ndarray
    kinds: tuple
    result: object


def _union(point_sets):
    """Indices into the concatenation of PointSets keeping each point once, and their names.

    A point is the same point when its label, altitude and airspeed (to 1e-6 m, m/s) are; two
    different points that share a label (labels round the airspeed) are named ``label (2)``,
    ``label (3)`` ... in the order they come, so both runs name them alike.
    """
    seen, keep, names, count = set(), [], [], {}
    offset = 0
    for pts in point_sets:
        for k, label in enumerate(pts.labels):
            key = (label, round(float(pts.altitude[k]), 6), round(float(pts.airspeed[k]), 6))
            if key not in seen:
                seen.add(key)
                count[label] = count.get(label, 0) + 1
                keep.append(offset + k)
                names.append(label if count[label] == 1 else f"{label} ({count[label]})")
        offset += len(pts.labels)
    return np.array(keep, dtype=int), names


def union_grid_points(case, schedule, schedules):
    """`case`'s derivatives at the union of the verification grids of `schedules`, with `schedule`'s gain.

    Parameters
    ----------
    case : damper.case.model.Case
        The run's case (its envelope or conditions give the derivatives at each point).
    schedule : damper.analysis.schedule.Schedule
        The run's own schedule (gives the gain).
    schedules : sequence of Schedule
        Every schedule whose verification grid joins the union (the run's own and the other's).

    Returns
    -------
    ScheduledPoints
    """
    from ..errors import DamperError
    from .assess import assess
    from .schedule import _concat, verification_points
    from .schedule_points import points_as_conditions

    from .envelope import variable_value

    sets, configurations = [], None
    for s in schedules:
        try:
            pts, _, confs = verification_points(case, s)
        except DamperError:
            continue  # e.g. a 2-D schedule on a case without an envelope: that grid does not exist here
        configurations = configurations or confs
        if tuple(s.variables) != tuple(schedule.variables):  # else the grid's own values (as its verification)
            own = np.array([variable_value(v, pts.altitude, pts.airspeed) for v in schedule.variables])
            pts = dataclasses.replace(pts, values=own.reshape(len(schedule.variables), -1))
        sets.append(pts)
    if not sets:
        raise DamperError(f"{case.file}: no verification grid of the compared schedules exists for this case")
    pts = _concat(sets) if len(sets) > 1 else sets[0]
    idx, names = _union(sets)
    conditions = points_as_conditions(pts, idx, configurations, "schedule verification point",
                                      "{kind} point of the schedule verification")
    conditions = tuple(dataclasses.replace(c, name=n) for c, n in zip(conditions, names))
    study = dataclasses.replace(case, conditions=conditions)
    values = np.asarray(pts.values, dtype=float)[:, idx]
    gains = np.asarray(schedule.gain_at(tuple(values)), dtype=float).reshape(-1)
    result = assess(study, gains, with_bandwidth=False)  # as the schedule's verification evaluates it
    return ScheduledPoints(study, gains, tuple(str(k) for k in np.asarray(pts.kind)[idx]), result)


@dataclass(frozen=True)
class Sweep:
    """One condition's loop against the gain.

    Attributes
    ----------
    gains : ndarray, shape (m,)
        K, s.
    damping : ndarray, shape (m,)
        Short-period damping ratio by the case's damping measure.
    gain_margin_db, phase_margin_deg : ndarray, shape (m,)
        Smallest upward gain margin (dB) and phase margin (deg); NaN: no crossing.
    stable : ndarray of bool, shape (m,)
    """

    gains: np.ndarray
    damping: np.ndarray
    gain_margin_db: np.ndarray
    phase_margin_deg: np.ndarray
    stable: np.ndarray


def condition_sweep(case, name, gains) -> Sweep:
    """The loop of condition `name` of `case` at `gains` (s), one batched evaluation."""
    from .search import evaluate_points

    names = [c.name for c in case.conditions]
    i = names.index(name)
    k = np.asarray(gains, dtype=float)
    res = evaluate_points(case, np.full(k.size, i), k)
    return Sweep(k, np.asarray(res.damping_ratio(case.requirements.damping_measure)),
                 np.asarray(res.margins.gain_margin_db), np.asarray(res.margins.phase_margin_deg),
                 np.asarray(res.modes.stable))


def sweep_gains(cases_and_names, points=80):
    """A common log-spaced gain grid (s) spanning every case's default sweep range of its condition."""
    from .search import default_range

    lo, hi = np.inf, 0.0
    for case, name in cases_and_names:
        i = [c.name for c in case.conditions].index(name)
        a, b = default_range(case)
        lo, hi = min(lo, float(a[i])), max(hi, float(b[i]))
    return np.logspace(np.log10(lo), np.log10(hi), points)
