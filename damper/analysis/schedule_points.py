"""Where a scheduled damper's robustness is studied: the schedule's tightest verification points.

A schedule is flown everywhere in the envelope, so its robustness study cannot run only at
the conditions a gain was chosen at. The verification (:func:`damper.analysis.schedule.verify`)
already gives every verification point's worst slack under the interpolated gain; the
study runs at the ``count`` points with the least slack: first the tightest point of each
configuration, then the tightest of the rest. Each becomes a
:class:`damper.case.model.Condition` (standard atmosphere at its altitude, the mass and
pitch inertia of its configuration, its interpolated derivatives) and its gain is the
schedule's gain there.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numpy as np

from ..atmosphere import standard_atmosphere
from ..case.model import Condition


@dataclass(frozen=True)
class CheckedSchedule:
    """A schedule's verification without its design (e.g. a schedule read from a file).

    Attributes
    ----------
    verification : damper.analysis.schedule.Verification
    configurations : tuple of str
    """

    verification: object
    configurations: tuple


def tightest_points(worst_slack, configuration, count, labels=None) -> np.ndarray:
    """Indices of `count` points: the least-slack point of each configuration, then the rest by slack.

    Parameters
    ----------
    worst_slack : ndarray, shape (n,)
        Worst requirement slack at each point (normalised; negative: a requirement missed).
    configuration : ndarray of int, shape (n,)
        Configuration index of each point.
    count : int
        How many points (at most n).
    labels : sequence of str, optional
        A point whose label an earlier chosen point has is skipped (one place checked twice).

    Returns
    -------
    ndarray of int
        Point indices, tightest first within each of the two groups, no repeats.
    """
    slack = np.where(np.isfinite(worst_slack), worst_slack, np.inf)
    order = [int(i) for i in np.lexsort((np.arange(slack.size), slack))]  # by slack, ties by index
    if labels is not None:
        taken, unique = set(), []
        for i in order:
            if labels[i] not in taken:
                taken.add(labels[i])
                unique.append(i)
        order = unique
    firsts, seen = [], set()
    for i in order:
        c = int(configuration[i])
        if c not in seen:
            seen.add(c)
            firsts.append(i)
    chosen = set(firsts)
    rest = [i for i in order if i not in chosen]
    return np.array((firsts + rest)[:count], dtype=int)


def schedule_study_case(case, result, count):
    """The case restricted to the schedule's `count` tightest verification points, and their gains.

    Parameters
    ----------
    case : damper.case.model.Case
    result : damper.analysis.schedule.ScheduleResult or CheckedSchedule
        Its ``verification`` and ``configurations`` are used.
    count : int
        Points to study.

    Returns
    -------
    study_case : Case
        `case` with ``conditions`` replaced by the chosen points (named by their
        verification labels) and no per-condition coefficient data (a CG shift's effect then
        comes from the normal-force slope, ``-Z_alpha m / (qbar S)``).
    gains : ndarray, shape (count,)
        The schedule's gain at each point, s.
    indices : ndarray of int
        The chosen verification points.
    """
    ver = result.verification
    pts = ver.points
    idx = tightest_points(ver.worst_slack, pts.configuration, count, pts.labels)
    conditions = points_as_conditions(pts, idx, result.configurations, "schedule verification point",
                                      "{kind} point of the schedule verification")
    study = dataclasses.replace(case, conditions=conditions)
    return study, np.asarray(ver.gains, dtype=float)[idx], idx


def points_as_conditions(pts, idx, configurations, source, note):
    """Conditions at the points ``idx`` of a :class:`damper.analysis.schedule.PointSet`.

    Each is named by the point's label, with the standard atmosphere at its altitude, its
    mass and pitch inertia and its (interpolated) derivatives; ``note`` may use ``{kind}``.

    Returns
    -------
    tuple of damper.case.model.Condition
    """
    air = standard_atmosphere(pts.altitude[idx])
    kind = type(pts.derivatives)  # either airframe model
    fields = kind.__dataclass_fields__
    names = tuple(configurations)
    conditions = []
    for k, i in enumerate(idx):
        v = float(pts.airspeed[i])
        rho = float(np.asarray(air.density)[k])
        a_sound = float(np.asarray(air.speed_of_sound)[k])
        d = kind(**{f: np.asarray(float(np.broadcast_to(getattr(pts.derivatives, f), pts.altitude.shape)[i]))
                           for f in fields})
        ci = int(pts.configuration[i])
        conditions.append(Condition(
            name=str(pts.labels[i]),
            airspeed=v,
            altitude=float(pts.altitude[i]),
            altitude_input=float(pts.altitude[i]),
            density=rho,
            speed_of_sound=a_sound,
            mach=v / a_sound,
            dynamic_pressure=0.5 * rho * v * v,
            mass=float(pts.mass[i]),
            pitch_inertia=float(pts.pitch_inertia[i]),
            derivatives=d,
            source=source,
            note=note.format(kind=pts.kind[i]),
            configuration=names[ci] if ci < len(names) and names[ci] != "all" else None,
            flight_path_angle=float(getattr(d, "flight_path_angle", 0.0)),
        ))
    return tuple(conditions)


def design_points_case(case):
    """``case`` itself when it has conditions; else the case at its envelope's design points.

    A case with an envelope and no ``conditions`` is evaluated (``damper assess``,
    ``damper robust --gain``) at the points ``damper design`` first designs its schedule's
    nodes from (:func:`damper.analysis.schedule.design_points`), each a condition named by
    its label.
    """
    if case.conditions:
        return case
    from .schedule import design_points

    pts, configurations = design_points(case)
    conditions = points_as_conditions(pts, np.arange(len(pts.labels)), configurations, "envelope design point",
                                      "{kind} point of the envelope (the schedule's first design points)")
    return dataclasses.replace(case, conditions=conditions)


def study_description(count, schedule="the schedule"):
    """What ``robustness.json`` says was studied (``method.conditions_studied``)."""
    return (f"the {count} verification points of {schedule} with the least slack under its gain (the tightest "
            "of each configuration first; uncertainty.schedule_points), each at the schedule's gain")
