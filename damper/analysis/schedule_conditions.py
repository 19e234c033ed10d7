"""A schedule over a case's conditions (no envelope): breakpoints at the conditions' values of the
variable, verification between two conditions of one configuration with the dimensional
derivatives interpolated linearly in it (:mod:`damper.analysis.schedule`, which documents the
method and designs the envelope schedule)."""

from __future__ import annotations

import numpy as np

from . import envelope as env_mod
from .schedule import _concat, _make_schedule, _message, design_gains, verify
from .schedule_types import BreakpointDesign, PointSet, ScheduleResult


def _conditions_points(case, var):
    """Verification points of a conditions schedule in `var`: the conditions, and three points
    between consecutive conditions of one configuration (derivatives interpolated linearly).

    Returns (points, configuration names, the conditions' own PointSet, their `var` values,
    their configuration indices).
    """
    conds = case.conditions
    d = case.derivatives()
    x = np.array([float(env_mod.variable_value(var, c.altitude, c.airspeed)) for c in conds])
    alt = np.array([c.altitude for c in conds])
    spd = np.array([c.airspeed for c in conds])
    confs = sorted({c.configuration or "all" for c in conds})
    conf_idx = np.array([confs.index(c.configuration or "all") for c in conds])
    mass = np.array([c.mass for c in conds])
    inertia = np.array([c.pitch_inertia for c in conds])
    base = PointSet(d, x[None, :], alt, spd, conf_idx, tuple(c.name for c in conds), np.full(len(conds), "condition"),
                    mass, inertia)
    sets = [base]
    fields = list(type(d).__dataclass_fields__)  # either airframe model
    for ci, cname in enumerate(confs):
        members = np.nonzero(conf_idx == ci)[0]
        members = members[np.argsort(x[members])]
        for a, b in zip(members[:-1], members[1:]):
            if np.isclose(x[a], x[b]):
                continue
            t = np.array([0.25, 0.5, 0.75])
            vals = {f: getattr(d, f)[a] + t * (getattr(d, f)[b] - getattr(d, f)[a]) for f in fields}
            dd = type(d)(**vals)
            xs = x[a] + t * (x[b] - x[a])
            labels = tuple(f"{conds[a].name}~{conds[b].name} {int(tt * 100)}%" for tt in t)
            sets.append(PointSet(dd, xs[None, :], alt[a] + t * (alt[b] - alt[a]), spd[a] + t * (spd[b] - spd[a]),
                                 np.full(3, ci), labels, np.full(3, "between"), mass[a] + t * (mass[b] - mass[a]),
                                 inertia[a] + t * (inertia[b] - inertia[a])))
    return _concat(sets), confs, base, x, conf_idx


def _conditions_schedule(case, variables, form, s):
    # one variable: the case layer refuses a 2-D schedule without an envelope
    # (damper.case.sections.schedule_settings; tests/test_schedule.py checks the line-numbered error)
    (var,) = variables
    pts, confs, base, x, conf_idx = _conditions_points(case, var)
    bps = np.unique(np.round(x, 9))
    group = np.searchsorted(bps, np.round(x, 9))
    warnings = _variant_warnings(case.conditions, conf_idx, group, bps, var)
    gains, feas, worst, binding, counts = design_gains(case, base, group, bps.size)
    schedule = _make_schedule((var,), form, (bps,), gains)
    ver = verify(case, schedule, pts)
    passed = bool(np.all(ver.passed))
    msg = _message(passed, ver, BreakpointDesign(gains, feas, worst, binding, counts), form, {"max_breakpoints": 0}, 1)
    msg += " (no envelope: breakpoints are the conditions; dimensional derivatives interpolated linearly in " + var + ")"
    bd = BreakpointDesign(gains, feas, worst, binding, counts)
    return ScheduleResult(schedule, bd, ver, passed, 1, ((bps.size, int(np.sum(~ver.passed))),), msg, "conditions",
                          tuple(confs), warnings)


def _variant_warnings(conds, conf_idx, group, bps, var):
    """Warn when conditions of one configuration share a breakpoint (several variants at one value of
    `var`): the between-condition checks then join derivatives of different variants."""
    out = []
    for ci in np.unique(conf_idx):
        for g in np.unique(group[conf_idx == ci]):
            same = [conds[k] for k in np.nonzero((conf_idx == ci) & (group == g))[0]]
            if len(same) < 2:
                continue
            names = ", ".join(c.name for c in same)
            conf = same[0].configuration
            where = f"configuration '{conf}'" if conf else "no configuration key"
            out.append(
                f"conditions {names} ({where}) have the same {var} ({bps[g]:.6g} {env_mod.VARIABLE_UNITS[var]}): "
                "the breakpoint gain covers them all, but the checks between breakpoints interpolate "
                "derivatives from one of them to a neighbour of another; give each mass / CG variant its "
                "own 'configuration' key"
            )
    return tuple(out)
