"""Robustness of a damper design to derivative, mass, CG, hardware and gain uncertainty.

Method (docs/robustness.md has the full statement; the uncertain axes and the sampling are
in :mod:`damper.analysis.uncertainty`, the statistics in :mod:`damper.analysis.sample_stats`):

* **Monte Carlo**: ``samples`` vectors ``u`` generated shard by shard from the seed and the
  sample index alone, evaluated in blocks of shape (conditions, samples-in-block) with one
  :func:`damper.analysis.assess.assess_loop` call per block (about ``chunk`` loops each),
  on a runner (:mod:`damper.analysis.runners`: this thread, threads, local processes or
  the workers of a Dask cluster; docs/cluster.md), a bounded number of blocks in flight.
  Each block is reduced at once (pass counts, worst and lowest-slack samples,
  histograms, the first samples for the plots) and the reductions
  are merged in sample order, so memory does not grow with the sample count and results
  do not depend on the runner, the number of workers or the block size.
* **Corners**: all ``2^p`` corners of the active axes when ``p <= 12``, else a seeded random
  subset of distinct corners (4096).
* **Worst-case refinement**: for the damping-ratio criterion and each margin criterion at
  each condition, a projected compass (coordinate pattern) search in the box
  ``[-1, 1]^p`` starts from the worst few evaluated points (samples and corners) and only
  accepts strict decreases of the criterion's slack, so the refined worst is never better
  than the worst evaluated point. All searches poll in one batch per iteration.
* **Pass fractions** with a Clopper-Pearson interval; **sensitivity** as the Spearman rank
  correlation of each axis with each criterion's slack (and with the worst slack), over
  the subsample (every sample of a study of up to :func:`shown_limit` samples).

CG shift (aft positive, fraction ``dx/c`` of the mean chord)::

    Delta Cm_alpha = CL_alpha dx/c        Delta M_alpha = CL_alpha qbar S c (dx/c) / Iy

The matching changes of ``M_alpha_dot``, ``M_q`` and ``M_delta`` (tail arm ``l_t``
shortened by ``dx``: relative changes of order ``dx / l_t``) and of ``Z_q`` are neglected.

Zero uncertainty gives exactly the nominal answer: every transformation is the identity
at ``u = 0`` bit for bit (``nominal + 0``, ratios ``x / x = 1``).

An interrupt (Ctrl-C, SIGTERM) reaches the waiting main thread at once: the blocks not yet
started are cancelled, worker threads finish their running block (well under a second)
and worker processes are ended at once.
"""

from __future__ import annotations

import dataclasses
import os

import numpy as np

from ..requirements.criteria import Criterion, measure_values
from .assess import assess_loop
from .runners import Study, in_order, runner
from .robustness_heap import keep_heap
from .robustness_result import ConditionRobustness, RobustnessResult, WorstCase
from .sample_stats import SLACK_EDGES, SampleSummary, average_ranks, clopper_pearson, spearman
from .uncertainty import (
    AXIS_UNITS,
    DERIVATIVE_AXES,
    SHARD_SAMPLES,
    Axes,
    CgShift,
    UncertainParameter,
    UncertaintySpec,
    corner_points,
    draw_samples,
    resolve_axes,
    sample_at,
    sample_rows,
    sampled_loop,
    uncertainty_spec,
)

#: Criteria whose worst case is refined by the local search.
REFINED_CRITERIA = ("damping_ratio", "gain_margin", "phase_margin", "delay_margin", "disk_margin")
#: Lowest-slack samples kept per condition and criterion beyond the search's starts (room
#: for repeated points, which are skipped as starts).
EXTRA_KEPT = 8
#: Subsample bound: at most this many (condition, sample) pairs are kept for the plots and
#: the rank correlations, and never more than :data:`MAX_SHOWN` samples.
SHOWN_PAIRS = 240_000
MAX_SHOWN = 20_000
#: Loops (conditions x (samples + corners)) from which several local workers are processes,
#: not threads: below, starting the processes (about a second each) does not pay.
PROCESS_MIN_LOOPS = 60_000


def shown_limit(n_conditions: int) -> int:
    """Samples kept for the plots and the rank correlations with `n_conditions` conditions."""
    return max(1, min(MAX_SHOWN, SHOWN_PAIRS // max(1, n_conditions)))


# ---------------------------------------------------------------------------------
# Evaluating sampled loops
# ---------------------------------------------------------------------------------
def _gain_margin_criterion():
    return Criterion("gain_margin", -np.inf, np.inf, "")


def evaluate_points(case, axes: Axes, gains, cidx, u) -> dict:
    """Assess sampled loops; arrays of the batch shape (criteria first for values/slacks)."""
    loop = sampled_loop(case, axes, gains, cidx, u)
    req = case.requirements
    a = assess_loop(loop, w=case.settings.grid(), requirements=req, scope="criteria")
    shape = a.criteria.values.shape[1:]
    return {
        "values": a.criteria.values,
        "slacks": a.criteria.slacks,
        "damping": np.broadcast_to(a.damping_ratio(req.damping_measure), shape),
        "gain_margin": np.broadcast_to(measure_values(_gain_margin_criterion(), a), shape),
        "phase_margin": np.broadcast_to(a.margins.phase_margin_deg, shape),
        "unconverged": np.broadcast_to(~np.asarray(a.equivalent.converged, dtype=bool), shape),
        "ambiguous": np.broadcast_to(np.asarray(a.modes.ambiguous, dtype=bool), shape),
    }


def _points_task(study, cidx, u):
    """Task: :func:`evaluate_points` of flat points of `study`."""
    keep_heap()
    return evaluate_points(study.case, study.axes, study.gains, cidx, u)


def _evaluate_flat(run, cidx, u, chunk):
    """Evaluate flat points (cidx (M,), u (M, p)) in chunks on `run`; concatenate."""
    m = len(cidx)
    items = [(cidx[s : s + chunk], u[s : s + chunk]) for s in (range(0, m, chunk) or [0])]
    parts = list(in_order(run, _points_task, items))
    return {k: np.concatenate([p[k] for p in parts], axis=-1) for k in parts[0]}


def _blocks(n_conditions, total, chunk):
    """(start, count) of the evaluation blocks: each shard cut into blocks of about `chunk` loops."""
    per = max(1, chunk // max(n_conditions, 1))
    for s0 in range(0, total, SHARD_SAMPLES):
        end = min(total, s0 + SHARD_SAMPLES)
        for s in range(s0, end, per):
            yield s, min(per, end - s)


def _block_task(study, start, count, offset, limit, keep, rows=None):
    """Task: the :class:`SampleSummary` of one block of `study` at every condition.

    `rows` (count, p) are the block's normalised points; None: samples ``start ...
    start + count - 1``, regenerated from the seed. `offset` is added to the indices
    (corners come after the samples); the first `limit` points are the subsample.
    """
    keep_heap()
    n = len(study.case.conditions)
    u = sample_rows(study.axes, study.spec.seed, start, count) if rows is None else rows
    res = evaluate_points(study.case, study.axes, study.gains, np.arange(n)[:, None], u[None, :, :])
    return SampleSummary.of_block(offset + start, res, offset + limit, keep)


def _summarise(run, total, *, rows=None, offset=0, limit=0, progress=None, stage="samples") -> SampleSummary:
    """Evaluate `total` points at every condition on `run`, block by block, each block reduced at once.

    `rows` (total, p): the points (corners); None: the Monte Carlo samples. Blocks are
    merged in order, so the result does not depend on the runner.
    """
    spec = run.study.spec
    keep = spec.refine_starts + EXTRA_KEPT
    items = ((s, k, offset, limit, keep, None if rows is None else rows[s : s + k])
             for s, k in _blocks(len(run.study.case.conditions), total, spec.chunk))
    summary, done = None, 0
    if progress:
        progress(0, total, stage)
    for part in in_order(run, _block_task, items):
        summary = part if summary is None else summary.merge(part)
        done += part.count
        if progress:
            progress(done, total, stage)
    return summary


# ---------------------------------------------------------------------------------
# Worst-case search
# ---------------------------------------------------------------------------------
def _point_u(axes, spec, corners_u, j):
    """Normalised coordinates of pool point `j`: a sample (regenerated), or a corner after them."""
    if j < spec.samples:
        return sample_at(axes, spec.seed, [j])[0]
    return corners_u[j - spec.samples].copy()


def _tracks(axes, spec, extremes, corners_u, targets):
    """Starts of the compass searches: per (condition, target criterion) the lowest distinct points.

    In the order of a stable sort of the slack over samples then corners; an undefined or
    infinite slack is no start, and ``-inf`` (undefined and failed) stops: nothing is worse.
    """
    tracks = []  # (i, c, u0, f0, v0)
    n = extremes.worst_slack.shape[1]
    for i in range(n):
        for c in targets:
            seen = []
            for s, v, j in zip(extremes.low_slack[c, i], extremes.low_value[c, i], extremes.low_index[c, i]):
                if np.isnan(s) and j == np.iinfo(np.int64).max:
                    break  # padding
                if not np.isfinite(s):
                    if s == -np.inf:
                        break  # already the worst possible (undefined and failed)
                    continue
                u = _point_u(axes, spec, corners_u, int(j))
                key = tuple(u)
                if key in seen:
                    continue
                seen.append(key)
                tracks.append((i, c, u, float(s), float(v)))
                if len(seen) >= spec.refine_starts:
                    break
    return tracks


def _evaluate_unique(run, cidx, pts, chunk, cache):
    """Slacks and values, shape (criteria, M), of the points ``pts`` (M, p) at conditions ``cidx`` (M,).

    Each (condition, point) is evaluated once per search: ``cache`` keeps what earlier calls
    evaluated, and a point asked for twice (two searches from one sample, or a step back
    onto a point already visited) is evaluated once. A loop's measures depend on its own
    data alone (bit for bit, whatever batch it is evaluated in), so the results are those
    of evaluating every point.
    """
    keys = [(int(i), row.tobytes()) for i, row in zip(cidx, pts)]
    new = {}
    for k, key in enumerate(keys):
        if key not in cache and key not in new:
            new[key] = k
    if new:
        sel = np.fromiter(new.values(), dtype=int, count=len(new))
        res = _evaluate_flat(run, cidx[sel], pts[sel], chunk)
        for n, key in enumerate(new):
            cache[key] = (res["slacks"][:, n], res["values"][:, n])
    return (np.stack([cache[key][0] for key in keys], axis=1), np.stack([cache[key][1] for key in keys], axis=1))


def _refine(run, tracks, progress):
    """Compass search for the worst slack of each (condition, target criterion) from `tracks`.

    Returns dict (i, c) -> (u, slack, value, start_slack, evaluations), only where a
    search ran.
    """
    spec = run.study.spec
    active = run.study.axes.active
    out = {}
    if not tracks or len(active) == 0:
        return out
    t_i = np.array([t[0] for t in tracks])
    t_c = np.array([t[1] for t in tracks])
    u = np.array([t[2] for t in tracks])
    f = np.array([t[3] for t in tracks])
    v = np.array([t[4] for t in tracks])
    f0 = f.copy()
    step = np.full(len(tracks), 0.5)
    live = np.ones(len(tracks), bool)
    evals = np.zeros(len(tracks), int)
    pa = len(active)
    cache = {}  # (condition, point bytes) -> (slacks, values): each point evaluated once
    for it in range(spec.refine_iterations):
        idx = np.flatnonzero(live)
        if idx.size == 0:
            break
        cand = np.repeat(u[idx][:, None, :], 2 * pa, axis=1)  # (T, 2pa, p)
        sign = np.concatenate([np.ones(pa), -np.ones(pa)])
        cols = np.concatenate([active, active])
        rows = np.arange(2 * pa)
        moved = np.clip(cand[:, rows, cols] + sign[None, :] * step[idx][:, None], -1.0, 1.0)
        changed = moved != cand[:, rows, cols]
        cand[:, rows, cols] = moved
        tt, jj = np.nonzero(changed)
        if tt.size == 0:
            live[idx] = False
            break
        track = idx[tt]
        pts = cand[tt, jj]
        slacks, values = _evaluate_unique(run, t_i[track], pts, spec.chunk, cache)
        np.add.at(evals, track, 1)  # the search's own count: every point it asked for
        s_all = slacks[t_c[track], np.arange(track.size)]
        v_all = values[t_c[track], np.arange(track.size)]
        order = np.lexsort((s_all, track))
        first = np.unique(track[order], return_index=True)[1]
        best = order[first]
        bt = track[best]
        improve = s_all[best] < f[bt]
        mv = bt[improve]
        u[mv] = pts[best[improve]]
        f[mv] = s_all[best[improve]]
        v[mv] = v_all[best[improve]]
        stay = np.setdiff1d(idx, mv)
        step[stay] *= 0.5
        live[stay[step[stay] < spec.refine_min_step]] = False
        live[f == -np.inf] = False
        if progress:
            progress(it + 1, spec.refine_iterations, "worst-case search")
    if progress:
        progress(spec.refine_iterations, spec.refine_iterations, "worst-case search")
    for k in range(len(tracks)):
        key = (int(t_i[k]), int(t_c[k]))
        prev = out.get(key)
        total_evals = (prev[4] if prev else 0) + int(evals[k])
        if prev is None or f[k] < prev[1]:
            out[key] = (u[k].copy(), float(f[k]), float(v[k]), float(f0[k]) if prev is None else min(prev[3], f0[k]), total_evals)
        else:
            out[key] = (prev[0], prev[1], prev[2], min(prev[3], f0[k]), total_evals)
    return out




# ---------------------------------------------------------------------------------
# The analysis
# ---------------------------------------------------------------------------------
def _workers(workers):
    if workers is None:
        workers = min(2, os.cpu_count() or 1)
    return max(1, int(workers))


def _runner(study, workers, processes, cluster):
    """Dask with `cluster`; else processes when `processes` (None: when the study has at least
    :data:`PROCESS_MIN_LOOPS` loops), threads otherwise, or this thread for one worker."""
    spec, n = study.spec, len(study.case.conditions)
    if processes is None:
        processes = n * (spec.samples + len(corner_points(study.axes, spec)[0])) >= PROCESS_MIN_LOOPS
    return runner(study, _workers(workers), processes=processes, cluster=cluster)


def robustness(case, gains, spec: UncertaintySpec | None = None, *, progress=None, workers=None, refine=True,
               processes=None, cluster=None) -> RobustnessResult:
    """Monte Carlo, corners and worst-case search of `case` with `gains`.

    Parameters
    ----------
    case : Case
    gains : float or array_like, shape (n_conditions,)
        Nominal pitch-rate gain K per condition, s.
    spec : UncertaintySpec, optional
        Default: :func:`uncertainty_spec` of the case.
    progress : callable, optional
        ``progress(done, total, stage)`` after each block (stage: ``"samples"``,
        ``"corners"``, ``"worst-case search"``).
    workers : int, optional
        Local workers evaluating blocks (default: up to 2). Results do not depend on it.
    refine : bool
        Run the worst-case search.
    processes : bool, optional
        Several workers are processes (True) or threads (False); default: processes when the
        study has at least :data:`PROCESS_MIN_LOOPS` loops (below, starting them does not pay).
    cluster : str or distributed.Client, optional
        Evaluate the blocks on the workers of this Dask scheduler instead (`workers` and
        `processes` are then ignored). The result is the same (docs/cluster.md).
    """
    spec = spec or uncertainty_spec(case)
    n = len(case.conditions)
    g = np.asarray(gains, dtype=float)
    g = np.full(n, float(g)) if g.ndim == 0 else g.reshape(n)
    axes = resolve_axes(case, spec, g)
    crit = tuple(case.requirements.criteria)
    keep_heap()
    nominal = evaluate_points(case, axes, g, np.arange(n), None)
    run = _runner(Study(case, axes, g, spec), workers, processes, cluster)
    finished = False
    try:
        samples = _summarise(run, spec.samples, limit=min(spec.samples, shown_limit(n)), stage="samples",
                             progress=progress)
        corners_u, complete = corner_points(axes, spec)
        corners = None
        if len(corners_u):
            corners = _summarise(run, len(corners_u), rows=corners_u, offset=spec.samples,
                                 limit=min(len(corners_u), shown_limit(n)), stage="corners", progress=progress)
        extremes = samples.extremes if corners is None else samples.extremes.merge(corners.extremes)
        evaluations = n * (1 + spec.samples + len(corners_u))
        refined = {}
        if refine and len(axes.names):
            targets = [k for k, c in enumerate(crit) if c.name in REFINED_CRITERIA]
            refined = _refine(run, _tracks(axes, spec, extremes, corners_u, targets), progress)
            evaluations += sum(r[4] for r in refined.values())
        finished = True
    finally:  # after an error or an interrupt: cancel what is queued, do not wait
        run.close(finished)
    worst = _worst_cases(case, axes, g, spec, crit, nominal, extremes, corners_u, refined)
    u_shown = sample_rows(axes, spec.seed, 0, samples.shown)
    u_ranks = average_ranks(u_shown.T)  # the same samples' ranks at every condition
    conditions = tuple(_condition(case, axes, g, spec, crit, i, nominal, samples, corners, worst[i], u_shown, u_ranks)
                       for i in range(n))
    j_lo, j_hi = clopper_pearson(samples.joint, spec.samples, spec.confidence)
    return RobustnessResult(
        spec=spec, axes=axes, criteria=crit, damping_measure=case.requirements.damping_measure, gains=g,
        conditions=conditions, joint_passed=samples.joint, joint_fraction=samples.joint / spec.samples,
        joint_lower=float(j_lo), joint_upper=float(j_hi), shown=samples.shown, samples_u=u_shown,
        values=samples.shown_values, slacks=samples.shown_slacks, damping=samples.shown_damping,
        gain_margin=samples.shown_gain_margin, phase_margin=samples.shown_phase_margin, corners_u=corners_u,
        corners_complete=complete,
        corner_slacks=corners.shown_slacks if corners is not None else np.zeros((len(crit), n, 0)),
        evaluations=int(evaluations),
    )


def _worst_cases(case, axes, g, spec, crit, nominal, extremes, corners_u, refined):
    """Per condition, one :class:`WorstCase` per criterion, with every measure at its point."""
    n, p, n_samples = len(case.conditions), len(axes.names), spec.samples
    conditions = []
    for i in range(n):
        worst = []
        for c in range(len(crit)):
            j = int(extremes.worst_index[c, i])
            start = float(extremes.worst_slack[c, i])
            source = "nominal" if p == 0 else ("sample" if j < n_samples else "corner")
            w_u = _point_u(axes, spec, corners_u, j)
            w_slack, w_value, index, evals = start, float(extremes.worst_value[c, i]), (j if j < n_samples else j - n_samples), 0
            r = refined.get((i, c))
            if r is not None:
                evals = r[4]
                if r[1] < w_slack:
                    w_u, w_slack, w_value, source, index = r[0], r[1], r[2], "refined", -1
            worst.append(WorstCase(criterion=crit[c].name, value=w_value, slack=w_slack,
                                   u=np.asarray(w_u, dtype=float).copy(), parameters=axes.values(i, w_u),
                                   source=source, index=index, start_slack=start, evaluations=evals))
        conditions.append(worst)
    # every measure at every worst point (one batch): the plots and tables show them together
    wi = np.repeat(np.arange(n), len(crit))
    wu = np.array([w.u for ws in conditions for w in ws]).reshape(n * len(crit), p)
    at = evaluate_points(case, axes, g, wi, wu) if (wi.size and p) else nominal
    out = []
    for i in range(n):
        ws = []
        for c, w in enumerate(conditions[i]):
            k = i if p == 0 else i * len(crit) + c  # nothing uncertain: exactly the nominal values
            ws.append(dataclasses.replace(
                w, values=at["values"][:, k].copy(), slacks=at["slacks"][:, k].copy(),
                damping=float(at["damping"][k]), gain_margin=float(at["gain_margin"][k]),
                phase_margin=float(at["phase_margin"][k])))
        out.append(tuple(ws))
    return out


def _condition(case, axes, g, spec, crit, i, nominal, samples, corners, worst, u_shown, u_ranks) -> ConditionRobustness:
    """The :class:`ConditionRobustness` of condition `i` from the reductions (`u_ranks`: the
    shown samples' ranks per axis, ``average_ranks(u_shown.T)``)."""
    p, N = len(axes.names), spec.samples
    passed = samples.passed[:, i]
    lo, hi = clopper_pearson(passed, N, spec.confidence)
    lo_all, hi_all = clopper_pearson(samples.passed_all[i], N, spec.confidence)
    if p and samples.shown > 1:
        sl = samples.shown_slacks[:, i, :]
        rho = spearman(u_shown.T, np.concatenate([sl, np.min(sl, 0)[None, :]], 0), x_ranks=u_ranks)
        rho[axes.half[:, i] == 0, :] = np.nan
    else:
        rho = np.full((p, len(crit) + 1), np.nan)
    key = np.where(np.isfinite(rho[:, -1]), -np.abs(rho[:, -1]), np.inf) if p else np.zeros(0)
    return ConditionRobustness(
        name=case.conditions[i].name,
        gain=float(g[i]),
        nominal_values=nominal["values"][:, i].copy(),
        nominal_slacks=nominal["slacks"][:, i].copy(),
        nominal_met=bool(np.all(nominal["slacks"][:, i] >= 0)),
        samples=N,
        passed=passed.astype(int),
        passed_all=int(samples.passed_all[i]),
        fraction=passed / N,
        lower=lo,
        upper=hi,
        fraction_all=float(samples.passed_all[i] / N),
        lower_all=float(lo_all),
        upper_all=float(hi_all),
        worst=worst,
        sensitivity=rho,
        ranking=tuple(int(k) for k in np.argsort(key, kind="stable")),
        shown=samples.shown,
        worst_slack_histogram=samples.histogram[i].copy(),
        corners=0 if corners is None else corners.count,
        corners_passed_all=0 if corners is None else int(corners.passed_all[i]),
        unconverged_fits=int(samples.unconverged[i]),
        ambiguous_modes=int(samples.ambiguous[i]),
        cg_source=axes.cg_source[i],
    )


def gains_from_design(case, doc) -> np.ndarray:
    """Chosen gains (s) per condition from a ``design.json`` document, matched by name.

    Raises
    ------
    DamperError
        If a condition of the case is missing from the design or has no chosen gain.
    """
    from ..errors import DamperError

    by_name = {c.get("name"): c for c in doc.get("conditions", ())}
    out = []
    for cond in case.conditions:
        entry = by_name.get(cond.name)
        if entry is None:
            raise DamperError(f"design.json has no condition named {cond.name!r} (it has {', '.join(map(str, by_name))})")
        k = entry.get("chosen_gain_s")
        if k is None or not np.isfinite(float(k)):
            raise DamperError(f"design.json: condition {cond.name!r} has no chosen gain")
        out.append(float(k))
    return np.array(out)


__all__ = [
    "AXIS_UNITS",
    "Axes",
    "CgShift",
    "ConditionRobustness",
    "DERIVATIVE_AXES",
    "RobustnessResult",
    "SLACK_EDGES",
    "UncertainParameter",
    "UncertaintySpec",
    "WorstCase",
    "average_ranks",
    "clopper_pearson",
    "corner_points",
    "draw_samples",
    "gains_from_design",
    "resolve_axes",
    "robustness",
    "sample_at",
    "sample_rows",
    "sampled_loop",
    "shown_limit",
    "spearman",
    "uncertainty_spec",
]
