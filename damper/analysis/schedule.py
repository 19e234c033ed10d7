"""Gain schedule over the flight envelope: design at breakpoints, verify in between, refine.

1. Breakpoints of one variable (``dynamic_pressure`` by default; ``equivalent_airspeed``,
   ``mach``, ``altitude``, ``airspeed``) or two (altitude and a speed variable).
2. At each breakpoint, *design points*: every envelope point on that breakpoint (for a 1-D
   speed variable: the iso-line across the altitude range; for altitude: the speed range;
   for 2-D: the node) times every mass / CG configuration. The breakpoint gain is the gain
   with the most normalised slack to the tightest requirement over all of them (max-min,
   one batched sweep of every design point and gain, then golden-section refinement).
3. Verification on a grid at least four times denser than the breakpoints (every
   breakpoint interval split in four, so midpoints are included), plus the envelope
   corners and a regular altitude x speed grid, for every configuration: the interpolated
   gain and the derivatives *at that point*.
4. Where verification fails inside a breakpoint interval, its midpoint becomes a new
   breakpoint, and the design repeats, until it passes or ``max_breakpoints`` is reached,
   or (when some breakpoints have no gain meeting every requirement, which more
   breakpoints cannot mend) a round fails at no smaller fraction of its points.

Forms: ``table`` (linear interpolation, bilinear in 2-D, clamped at the ends) and
``inverse_dynamic_pressure``: ``K = K_ref q_ref / q``, with ``K_ref`` fitted to the
breakpoint gains by least squares in log K at ``q_ref`` = the geometric mean of the
breakpoints (one parameter: verified, not refined).

A case without an envelope schedules over its conditions: the breakpoints are the
conditions' values of the variable, and verification points between two conditions of one
configuration use **dimensional derivatives interpolated linearly in the variable**.
"""

from __future__ import annotations

import numpy as np

from ..case.sections import ScheduleSettings
from ..errors import DamperError
from ..measures.refine import golden_bracket
from ..model.airframe import Derivatives
from ..model.loop import Loop
from . import envelope as env_mod
from .assess import assess_loop
from .search import default_range

SPEED_VARIABLES = ("dynamic_pressure", "equivalent_airspeed", "mach", "airspeed")
_SWEEP_POINTS = 121
_DESIGN_ALTITUDES = 7

# the result types live in their own module; their names stay importable from here
from .schedule_types import BreakpointDesign, PointSet, Schedule, ScheduleResult, Verification, bilinear  # noqa: E402,F401


# ---------------------------------------------------------------------------
# evaluation helpers
# ---------------------------------------------------------------------------


def _evaluate(case, d: Derivatives, gains):
    """The criteria at `gains` (s): every use here is a verdict or a slack (scope "criteria")."""
    loop = Loop(d, case.loop.hardware(), np.asarray(gains, float))
    return assess_loop(loop, w=case.settings.grid(), requirements=case.requirements, scope="criteria")


def _take(d: Derivatives, idx):
    from ..model.batch import map_arrays

    return map_arrays(d, lambda a: np.broadcast_to(a, np.shape(d.airspeed))[idx])


def _gain_range(case, d: Derivatives):
    from types import SimpleNamespace

    fake = SimpleNamespace(derivatives=lambda: d)
    lo, hi = default_range(fake)
    return float(np.min(lo)), float(np.max(hi))


def _smallest_margin_db(res):
    gm = np.where(np.isnan(res.margins.gain_margin_db), np.inf, res.margins.gain_margin_db)
    low = np.where(np.isnan(res.margins.gain_margin_low_db), np.inf, -res.margins.gain_margin_low_db)
    out = np.minimum(gm, low)
    return np.where(np.isinf(out), np.nan, out)


def _first_interval_best(score):
    """Per row: the best score inside the lowest-gain feasible run (or the global best if none).

    Keeping every breakpoint on the lowest feasible branch (least authority) keeps the
    table smooth: a far larger gain elsewhere in the sweep may score as well but would make
    the interpolation between breakpoints jump.
    """
    feasible = score >= 0
    best = np.argmax(score, 1)
    any_ok = feasible.any(1)
    first = np.argmax(feasible, 1)
    # end of the run starting at `first`
    after = np.cumsum(~feasible & (np.arange(score.shape[1])[None, :] > first[:, None]), 1) > 0
    in_run = feasible & ~after & (np.arange(score.shape[1])[None, :] >= first[:, None])
    run_best = np.argmax(np.where(in_run, score, -np.inf), 1)
    return np.where(any_ok, run_best, best)


def design_gains(case, pts: PointSet, group, n_groups):
    """Max-min-slack gain per group of design points (batched sweep, then golden refinement)."""
    n = len(pts.labels)
    lo, hi = _gain_range(case, pts.derivatives)
    k = np.logspace(np.log10(lo), np.log10(hi), _SWEEP_POINTS)
    d2 = _take(pts.derivatives, (slice(None), None))
    from ..model.batch import map_arrays

    d2 = map_arrays(pts.derivatives, lambda a: np.broadcast_to(a, (n,))[:, None])
    res = _evaluate(case, d2, k[None, :])
    worst = res.criteria.worst_slack  # (n, n_k)
    # group minimum over design points
    gw = np.full((n_groups, k.size), np.inf)
    np.minimum.at(gw, group, worst)
    best = _first_interval_best(gw)
    # golden refinement of log K in the neighbouring grid cells, all groups at once
    a = np.log10(k[np.clip(best - 1, 0, k.size - 1)])
    b = np.log10(k[np.clip(best + 1, 0, k.size - 1)])

    def f(x):
        g = 10.0 ** x[group]
        r = _evaluate(case, pts.derivatives, g).criteria.worst_slack
        out = np.full(n_groups, np.inf)
        np.minimum.at(out, group, r)
        return out

    a, b = golden_bracket(f, a, b, steps=16)[:2]
    x = 0.5 * (a + b)
    fx = f(x)
    grid_best = gw[np.arange(n_groups), best]
    gains = np.where(fx >= grid_best, 10.0**x, k[best])
    final = _evaluate(case, pts.derivatives, gains[group])
    worst_pt = final.criteria.worst_slack
    gworst = np.full(n_groups, np.inf)
    np.minimum.at(gworst, group, worst_pt)
    names = [c.name for c in case.requirements.criteria]
    binding = []
    bind_pt = final.criteria.binding()
    for g in range(n_groups):
        members = np.nonzero(group == g)[0]
        if members.size == 0:
            binding.append("")
            continue
        m = members[np.argmin(worst_pt[members])]
        binding.append(names[bind_pt[m]])
    counts = np.bincount(group, minlength=n_groups)
    return gains, gworst >= 0, gworst, tuple(binding), counts


def verify(case, schedule: Schedule, pts: PointSet) -> Verification:
    """Requirements with the interpolated gain and the derivatives at every point."""
    gains = schedule.gain_at(pts.values)
    res = _evaluate(case, pts.derivatives, gains)
    names = tuple(c.name for c in case.requirements.criteria)
    b = res.criteria.binding()
    return Verification(
        points=pts,
        gains=gains,
        passed=res.criteria.all_met,
        worst_slack=res.criteria.worst_slack,
        binding=tuple(names[i] for i in b),
        damping_ratio=res.damping_ratio(case.requirements.damping_measure),
        smallest_margin_db=_smallest_margin_db(res),
        criteria_names=names,
    )


# ---------------------------------------------------------------------------
# point sets: envelope
# ---------------------------------------------------------------------------


def _pointset_from_env(case, env, aero, altitude, airspeed, kind, variables):
    pts = env_mod.points_at(env, altitude, airspeed)
    d = env_mod.derivatives_at(case, env, aero, pts)
    values = np.stack([env_mod.variable_value(v, pts.altitude, pts.airspeed) for v in variables])
    kinds = np.tile(np.asarray(kind), len(env.configurations))
    mass = np.array([c.mass for c in env.configurations])[pts.configuration]
    inertia = np.array([c.pitch_inertia for c in env.configurations])[pts.configuration]
    return PointSet(d, values, pts.altitude, pts.airspeed, pts.configuration, pts.labels, kinds, mass, inertia)


def _concat(sets):
    from ..model.batch import map_arrays

    kind = type(sets[0].derivatives)  # either airframe model
    fields = kind.__dataclass_fields__
    d = kind(**{f: np.concatenate([np.broadcast_to(getattr(s.derivatives, f), s.altitude.shape) for s in sets]) for f in fields})
    del map_arrays
    return PointSet(
        d,
        np.concatenate([s.values for s in sets], 1),
        np.concatenate([s.altitude for s in sets]),
        np.concatenate([s.airspeed for s in sets]),
        np.concatenate([s.configuration for s in sets]),
        tuple(x for s in sets for x in s.labels),
        np.concatenate([s.kind for s in sets]),
        np.concatenate([s.mass for s in sets]),
        np.concatenate([s.pitch_inertia for s in sets]),
    )


def _altitude_levels(env, n):
    if env.altitude[1] > env.altitude[0]:
        return np.linspace(env.altitude[0], env.altitude[1], n)
    return np.array([env.altitude[0]])


def _points_on(env, variables, values_per_var, n_alt, n_speed):
    """(altitude, airspeed) of envelope points where the variables take the given values.

    1-D speed variable: each value across altitude levels; 1-D altitude: each altitude across
    speeds; 2-D: every node. Returns arrays plus the index of the value (node) for each point.
    """
    if len(variables) == 1:
        var = variables[0]
        vals = values_per_var[0]
        if var == "altitude":
            H, V, idx = [], [], []
            for i, h in enumerate(vals):
                lo, hi = env_mod.speed_limits(env, np.array([h]))
                if not np.isfinite(lo[0]):
                    continue
                sp = np.linspace(lo[0], hi[0], n_speed)
                H += [h] * sp.size
                V += list(sp)
                idx += [i] * sp.size
            return np.array(H), np.array(V), np.array(idx, int)
        hs = _altitude_levels(env, n_alt)
        Hg, Ig = np.meshgrid(hs, np.arange(len(vals)), indexing="xy")
        Hg = Hg.ravel()
        Ig = Ig.ravel()
        Vg = env_mod.airspeed_for(var, np.asarray(vals)[Ig], Hg)
        ok = env_mod.inside(env, Hg, Vg)
        return Hg[ok], Vg[ok], Ig[ok]
    ia = variables.index("altitude")
    sv = variables[1 - ia]
    hv = np.asarray(values_per_var[ia])
    svals = np.asarray(values_per_var[1 - ia])
    I, J = np.meshgrid(np.arange(len(values_per_var[0])), np.arange(len(values_per_var[1])), indexing="ij")
    I, J = I.ravel(), J.ravel()
    node_h = hv[I if ia == 0 else J]
    node_s = svals[J if ia == 0 else I]
    V = env_mod.airspeed_for(sv, node_s, node_h)
    ok = env_mod.inside(env, node_h, V)
    flat = I * len(values_per_var[1]) + J
    return node_h[ok], V[ok], flat[ok]


def _initial_breakpoints(env, variables, count):
    fine = env_mod.grid_points(env, 41, 41)
    out = []
    for v in variables:
        x = env_mod.variable_value(v, fine.altitude, fine.airspeed)
        lo, hi = float(np.min(x)), float(np.max(x))
        if hi <= lo:
            out.append(np.array([lo]))
        elif v == "dynamic_pressure" and lo > 0:
            out.append(np.geomspace(lo, hi, count))
        else:
            out.append(np.linspace(lo, hi, count))
    return out


def _subdivide(b, parts=4):
    if b.size == 1:
        return b.copy()
    u = np.linspace(0.0, 1.0, parts + 1)[:-1]
    inner = (b[:-1, None] + u[None, :] * np.diff(b)[:, None]).ravel()
    return np.concatenate([inner, b[-1:]])


def _envelope_round(case, env, aero, variables, form, bps):
    shape = tuple(len(b) for b in bps)
    n_nodes = int(np.prod(shape))
    H, V, node = _points_on(env, variables, bps, _DESIGN_ALTITUDES, _DESIGN_ALTITUDES)
    design_pts = _pointset_from_env(case, env, aero, H, V, np.full(H.size, "design"), variables)
    group = np.tile(node, len(env.configurations))
    gains, feas, worst, binding, counts = design_gains(case, design_pts, group, n_nodes)
    gains = _fill_missing(gains, counts, shape)
    schedule = _make_schedule(variables, form, bps, gains.reshape(shape))
    ver = verify(case, schedule, _envelope_verification_points(case, env, aero, variables, bps))
    bd = BreakpointDesign(gains, feas & (counts > 0), worst, binding, counts)
    return schedule, bd, ver


def _envelope_verification_points(case, env, aero, variables, bps):
    """Verification points: 4x denser than the breakpoints in each variable, the grid, the corners."""
    dense = [_subdivide(np.asarray(b, dtype=float)) for b in bps]
    Hd, Vd, _ = _points_on(env, variables, dense, env.grid_altitudes, max(env.grid_speeds, 4 * len(bps[0]) + 1))
    grid = env_mod.grid_points(env, env.grid_altitudes, env.grid_speeds)
    n_c = len(env.configurations)
    gh, gv = grid.altitude[: grid.altitude.size // n_c], grid.airspeed[: grid.airspeed.size // n_c]
    corners = env_mod.grid_points(env, 2, 2)
    ch, cv = corners.altitude[: corners.altitude.size // n_c], corners.airspeed[: corners.airspeed.size // n_c]
    Hv, Vv, kinds = _distinct_points([(Hd, Vd, "between"), (gh, gv, "grid"), (ch, cv, "corner")])
    return _pointset_from_env(case, env, aero, Hv, Vv, kinds, variables)


def design_points(case):
    """The points ``design_schedule`` first designs the schedule's nodes from (envelope cases).

    At each initial breakpoint of ``schedule.variables`` (``schedule.breakpoints`` of them,
    before any refinement), the envelope points across altitude (or speed) where the
    variable takes that value, for every configuration, each named by its label
    (``"<configuration> h=<m> m V=<m/s> m/s"``).

    Returns
    -------
    points : PointSet
    configurations : tuple of str
    """
    env, aero = env_mod.envelope_from_case(case)
    if env is None:
        raise DamperError(f"{case.file}: the case has no envelope")
    s = case.schedule or ScheduleSettings()
    variables = tuple(s.variables)
    bps = _initial_breakpoints(env, variables, s.breakpoints)
    H, V, _ = _points_on(env, variables, bps, _DESIGN_ALTITUDES, _DESIGN_ALTITUDES)
    H, V, _ = _distinct_points([(H, V, "design")])
    pts = _pointset_from_env(case, env, aero, H, V, np.full(H.size, "design"), variables)
    return pts, tuple(c.name for c in env.configurations)


def verification_points(case, schedule: Schedule):
    """The points :func:`design_schedule` verifies a schedule of this form on, for a given schedule.

    Returns
    -------
    points : PointSet
    source : str
        ``envelope`` or ``conditions``.
    configurations : tuple of str
    """
    env, aero = env_mod.envelope_from_case(case)
    if env is not None:
        pts = _envelope_verification_points(case, env, aero, schedule.variables, schedule.breakpoints)
        return pts, "envelope", tuple(c.name for c in env.configurations)
    if len(schedule.variables) != 1:
        raise DamperError(f"{case.file}: the schedule is over {' and '.join(schedule.variables)}; a 2-D schedule "
                          "needs a case with an envelope and aerodynamic tables")
    from .schedule_conditions import _conditions_points

    pts, confs, *_ = _conditions_points(case, schedule.variables[0])
    return pts, "conditions", tuple(confs)


def _distinct_points(groups):
    """Concatenate (altitude m, airspeed m/s, kind) groups, each point once.

    The envelope corners are also regular-grid points, and dense points can fall on the
    grid; a point shared by several groups is kept in the last group that has it (corner
    before grid before between), so verification counts count distinct points.  Points
    closer than 1e-6 m and 1e-6 m/s are the same.
    """
    seen = set()
    keep = []
    for h, v, _ in reversed(groups):
        key = list(zip(np.round(h, 6).tolist(), np.round(v, 6).tolist()))
        mask = np.zeros(len(key), dtype=bool)
        for k, kk in enumerate(key):
            if kk not in seen:
                seen.add(kk)
                mask[k] = True
        keep.append(mask)
    keep.reverse()
    H = np.concatenate([h[m] for (h, _, _), m in zip(groups, keep)])
    V = np.concatenate([v[m] for (_, v, _), m in zip(groups, keep)])
    kinds = np.concatenate([np.full(int(m.sum()), kind) for (_, _, kind), m in zip(groups, keep)])
    return H, V, kinds


def _fill_missing(gains, counts, shape):
    """Breakpoints with no envelope point take the gain of the nearest breakpoint that has one."""
    g = gains.copy()
    have = counts > 0
    if have.all() or not have.any():
        return g
    idx = np.array(np.unravel_index(np.arange(g.size), shape)).T
    good = idx[have]
    for k in np.nonzero(~have)[0]:
        dist = np.abs(good - idx[k]).sum(1)
        g[k] = gains[np.ravel_multi_index(tuple(good[np.argmin(dist)]), shape)]
    return g


def _make_schedule(variables, form, bps, gains):
    if form == "inverse_dynamic_pressure":
        q = bps[0]
        q_ref = float(np.exp(np.mean(np.log(q))))
        k_ref = float(np.exp(np.mean(np.log(gains.ravel()) + np.log(q) - np.log(q_ref))))
        return Schedule(tuple(variables), form, tuple(bps), gains, k_ref, q_ref)
    return Schedule(tuple(variables), form, tuple(bps), gains)


def _refine_1d(b, ver, max_bp):
    """Midpoints of breakpoint intervals that hold failing verification points."""
    x = ver.points.values[0]
    fail = ~ver.passed
    if b.size >= max_bp:
        return None
    inner = fail & (x > b[0]) & (x < b[-1]) & ~np.isclose(x[:, None], b[None, :], rtol=1e-9).any(1)
    if not inner.any():
        return None
    cells = np.unique(np.searchsorted(b, x[inner]) - 1)
    mids = 0.5 * (b[cells] + b[cells + 1])
    room = max_bp - b.size
    if room <= 0:
        return None
    worst_first = np.argsort([np.min(ver.worst_slack[inner][np.searchsorted(b, x[inner]) - 1 == c]) for c in cells])
    mids = mids[worst_first[:room]]
    return np.unique(np.concatenate([b, mids]))


def design_schedule(case, progress=None) -> ScheduleResult:
    """Design and verify the schedule of `case` (its ``schedule:`` section).

    `progress`, if given, is called as ``progress(done, total, "schedule")``: rounds done,
    total None while refinement may go on, then ``(rounds, rounds)`` at the end.
    """
    report = progress or (lambda done, total, stage: None)
    report(0, None, "schedule")
    result = _design_schedule(case, report)
    report(result.rounds, result.rounds, "schedule")
    return result


def _design_schedule(case, report) -> ScheduleResult:
    s = case.schedule  # its form and variables are checked by the case layer (damper.case.sections)
    if s is None:  # not dead: a case may leave the section out (the pipeline's stage then skips this call),
        raise DamperError(f"{case.file}: the case has no schedule section")  # but a library caller may not
    variables = tuple(s.variables)
    form = s.form
    env, aero = env_mod.envelope_from_case(case)
    if env is None:
        from .schedule_conditions import _conditions_schedule

        return _conditions_schedule(case, variables, form, s)
    bps = _initial_breakpoints(env, variables, s.breakpoints)
    max_bp = max(s.max_breakpoints, max(len(b) for b in bps))
    history = []
    rounds = 0
    stalled = False
    prev_fraction = np.inf
    while True:
        rounds += 1
        schedule, bd, ver = _envelope_round(case, env, aero, variables, form, bps)
        report(rounds, None, "schedule")
        nfail = int(np.sum(~ver.passed))
        history.append((int(np.prod([len(b) for b in bps])), nfail))
        if nfail == 0 or form != "table" or s.max_breakpoints == 0 or rounds >= 12:
            break
        # Breakpoints with no gain meeting everything cannot be mended by more breakpoints;
        # once a round with such breakpoints fails at no smaller fraction of its points, stop.
        fraction = nfail / ver.passed.size
        if not np.all(bd.feasible) and fraction >= prev_fraction:
            stalled = True
            break
        prev_fraction = fraction
        new = _refine(bps, ver, variables, max_bp)
        if new is None:
            break
        bps = new
    passed = bool(np.all(ver.passed))
    msg = _message(passed, ver, bd, form, s, rounds)
    if stalled:
        n_ref = rounds - 1
        msg += (f"; refinement stopped after {n_ref} round{'s' if n_ref != 1 else ''}: the failing fraction did not fall "
                f"({history[-2][1]} -> {history[-1][1]} failing points)")
    return ScheduleResult(schedule, bd, ver, passed, rounds, tuple(history), msg, "envelope",
                          tuple(c.name for c in env.configurations))


def _refine(bps, ver, variables, max_bp):
    if len(bps) == 1:
        nb = _refine_1d(bps[0], ver, max_bp)
        return None if nb is None else [nb]
    out = []
    changed = False
    for k in range(2):
        sub = Verification(
            PointSet(ver.points.derivatives, ver.points.values[k : k + 1], ver.points.altitude, ver.points.airspeed,
                     ver.points.configuration, ver.points.labels, ver.points.kind, ver.points.mass,
                     ver.points.pitch_inertia),
            ver.gains, ver.passed, ver.worst_slack, ver.binding, ver.damping_ratio, ver.smallest_margin_db, ver.criteria_names,
        )
        nb = _refine_1d(bps[k], sub, max_bp)
        if nb is None:
            out.append(bps[k])
        else:
            out.append(nb)
            changed = True
    return out if changed else None


def _message(passed, ver, bd, form, s, rounds):
    if passed:
        extra = f" after adding breakpoints ({rounds - 1} refinement rounds)" if rounds > 1 else ""
        return f"the schedule meets every requirement at all {ver.passed.size} verification points{extra}"
    nfail = int(np.sum(~ver.passed))
    worst = int(np.argmin(ver.worst_slack))
    why = ""
    if not np.all(bd.feasible):
        why = "; some breakpoints have no gain meeting every requirement at all their design points"
    elif form != "table":
        why = "; the inverse-dynamic-pressure law has one parameter and is not refined"
    elif s.max_breakpoints == 0:
        why = "; automatic breakpoints are off (schedule.max_breakpoints: 0)"
    return (
        f"{nfail} of {ver.passed.size} verification points fail; worst at {ver.points.labels[worst]} "
        f"({ver.binding[worst]}, slack {ver.worst_slack[worst]:+.3f}){why}"
    )
