"""Gain search: the feasible gain intervals at each condition and the chosen gain.

One batched sweep (conditions x gains on a log grid) finds where every requirement
holds; each edge of a feasible interval is refined by bisection in log-gain (all
edges of all conditions at once) to 1e-4 relative or better, and names the
requirement that closes it. The chosen gain follows a stated policy:

* ``balanced`` (default): the feasible gain with the most normalised slack to the
  tightest requirement (max-min slack), refined by golden-section search;
* ``least_gain``: the smallest feasible gain (least authority);
* ``damping_target``: the feasible gain whose short-period damping ratio (by the
  requirements' damping measure) is nearest the target.

An infeasible condition reports the gain that comes closest (largest worst slack),
the requirements that bind there and by how much they miss.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..case.model import Case
from ..measures.modes import bare_short_period
from ..measures.refine import golden_bracket
from ..model.batch import map_arrays
from ..model.loop import Loop
from ..quantities import quantity
from .assess import Assessment, assess_loop

POLICIES = ("balanced", "least_gain", "damping_target")
EDGE_TOLERANCE = 1e-4  # relative, on the gain
BARE_MEETS = "none: the bare airframe (K = 0) meets every requirement"
_REFINE_STEPS = 40  # bisection steps in log10(K): ample for 1e-4 relative at any grid step


@dataclass(frozen=True)
class SearchSettings:
    """How the gain is searched.

    Attributes
    ----------
    gain_min, gain_max : float or None
        Sweep range, s (None: from the airframe's control power, see :func:`default_range`).
    points : int
        Log-spaced sweep points.
    policy : str
        One of :data:`POLICIES`.
    damping_target : float or None
        Damping ratio (> 0) the ``damping_target`` policy aims at; required by it.

    Raises
    ------
    ValueError
        An unknown policy, or ``damping_target`` policy without a positive finite target.
    """

    gain_min: float | None = None
    gain_max: float | None = None
    points: int = 161
    policy: str = "balanced"
    damping_target: float | None = None

    def __post_init__(self):
        if self.policy not in POLICIES:
            raise ValueError(f"unknown policy {self.policy!r}; one of {', '.join(POLICIES)}")
        if self.policy == "damping_target":
            t = self.damping_target
            if t is None or not (np.isfinite(t) and t > 0):
                raise ValueError(f"policy 'damping_target' needs damping_target, a positive damping ratio (got {t!r})")


@dataclass(frozen=True)
class Edge:
    """One end of a feasible interval.

    Attributes
    ----------
    gain : float
        s.
    side : str
        ``"lower"`` or ``"upper"``.
    binding : str
        The requirement that closes the interval there ("sweep range" at the range's end).
    """

    gain: float = quantity("s")
    side: str
    binding: str


@dataclass(frozen=True)
class ConditionDesign:
    """The search result at one condition.

    Attributes
    ----------
    name : str
    intervals : tuple of (float, float)
        Feasible gain intervals, s.
    edges : tuple of (Edge, Edge)
        The two ends of each interval.
    chosen_gain : float
        s (the closest gain when infeasible).
    feasible : bool
    policy : str
    reason : str
        One line: why this gain.
    binding : tuple of (str, float)
        When infeasible: the failing requirements at the chosen gain and their slack.
    sweep_range : (float, float)
        s.
    """

    name: str
    intervals: tuple
    edges: tuple
    chosen_gain: float = quantity("s")
    feasible: bool
    policy: str
    reason: str
    binding: tuple
    sweep_range: tuple = quantity("s")


@dataclass(frozen=True)
class DesignResult:
    """Search results for every condition, with the sweep and the measures at the chosen gains.

    Attributes
    ----------
    conditions : tuple of ConditionDesign
    sweep_gains : ndarray, shape (n_conditions, points)
        s.
    sweep : Assessment
        Measures over the sweep (batch shape (n_conditions, points)), in the criteria's
        scope (:func:`damper.analysis.assess.assess_loop`): no disk margin unless a criterion
        needs it, no longitudinal extras.
    chosen : Assessment
        Measures at the chosen gains (batch shape (n_conditions,)).
    """

    conditions: tuple
    sweep_gains: np.ndarray
    sweep: Assessment
    chosen: Assessment


def default_range(case: Case):
    """Default sweep range per condition, s.

    With ideal hardware a gain K adds about ``K |M_delta|`` to ``2 zeta wn``, so
    ``K1 = 2 wn / |M_delta|`` adds about 1 to the damping ratio. The sweep spans
    ``K1 / 300`` to ``10 K1`` (``wn`` falls back to ``sqrt(|M_alpha|)`` or 1 rad/s).
    """
    d = case.derivatives()
    wn = bare_short_period(d).natural_frequency
    wn = np.where(np.isfinite(wn), wn, np.sqrt(np.abs(d.M_alpha)))
    wn = np.where(wn > 0, wn, 1.0)
    k1 = 2.0 * wn / np.abs(d.M_delta)
    return k1 / 300.0, 10.0 * k1


def _points_loop(case: Case, rows, gains) -> Loop:
    d = map_arrays(case.derivatives(), lambda a: a[rows])
    return Loop(d, case.loop.hardware(), np.asarray(gains, dtype=float))


def evaluate_points(case: Case, rows, gains, scope="all") -> Assessment:
    """Assess arbitrary (condition row, gain) points, batched (`scope` as :func:`assess_loop`)."""
    return assess_loop(_points_loop(case, rows, gains), w=case.settings.grid(), requirements=case.requirements,
                       scope=scope)


def _names(case):
    return [c.name for c in case.requirements.criteria]


def search(case: Case, settings: SearchSettings | None = None) -> DesignResult:
    """Feasible intervals and chosen gain at every condition of `case`."""
    settings = settings or SearchSettings()
    n = len(case.conditions)
    gains = _sweep_gains(case, settings)  # (n, points), s
    rows = np.repeat(np.arange(n)[:, None], settings.points, 1)
    sweep = evaluate_points(case, rows, gains, "criteria")
    ok = sweep.criteria.all_met  # (n, points)
    worst = sweep.criteria.worst_slack
    names = _names(case)
    r, j, ok_a, edge_gain, binding_idx = _edges(case, ok, gains)

    # --- the bare airframe (K = 0): does the first feasible interval reach down to it? ------
    bare = evaluate_points(case, np.arange(n), np.zeros(n), "criteria")
    bare_ok = bare.criteria.all_met & ok[:, 0]

    designs = []
    for i in range(n):  # bookkeeping per condition (no measures computed here)
        intervals, edges = _intervals(i, ok[i], gains[i], r, j, edge_gain, ok_a, binding_idx, names)
        if bare_ok[i] and intervals:
            intervals[0] = (0.0, intervals[0][1])
            edges[0] = (Edge(0.0, "lower", BARE_MEETS), edges[0][1])
        designs.append((intervals, edges))
    # --- chosen gains ----------------------------------------------------------------------
    chosen_gain, reasons, feasible = _choose(case, settings, designs, gains, sweep, worst)
    # where the most slack is at the bottom of the sweep and the bare airframe has more, K = 0
    zero_better = bare_ok & (bare.criteria.worst_slack >= worst[:, 0]) & (np.argmax(np.where(ok, worst, -np.inf), 1) == 0)
    if settings.policy == "balanced":
        for i in np.nonzero(zero_better & feasible)[0]:
            chosen_gain[i] = 0.0
            reasons[i] = "the bare airframe already has the most slack: no damper gain needed here (K = 0)"
    if settings.policy == "least_gain":
        for i in np.nonzero(bare_ok & feasible)[0]:
            chosen_gain[i] = 0.0
            reasons[i] = "the bare airframe meets every requirement: least gain is K = 0"
    chosen = evaluate_points(case, np.arange(n), chosen_gain)
    out = [_condition_design(case, settings, i, designs[i], chosen_gain[i], feasible[i], reasons[i],
                             chosen.criteria.slacks[:, i], names, gains[i]) for i in range(n)]
    return DesignResult(tuple(out), gains, sweep, chosen)


def _sweep_gains(case, settings):
    """The sweep's gains, s, shape (n_conditions, points): log-spaced over the settings' or the default range."""
    n = len(case.conditions)
    lo_default, hi_default = default_range(case)
    lo = np.full(n, settings.gain_min) if settings.gain_min else lo_default
    hi = np.full(n, settings.gain_max) if settings.gain_max else hi_default
    u = np.linspace(0.0, 1.0, settings.points)
    return 10.0 ** (np.log10(lo)[:, None] + u[None, :] * (np.log10(hi) - np.log10(lo))[:, None])


def _edges(case, ok, gains):
    """Every change of feasibility along the sweep, bracketed and refined all at once (bisection in log K).

    Returns
    -------
    r, j : ndarray of int
        Condition row and sweep index of each bracket (between points j and j + 1).
    ok_a : ndarray of bool
        Feasibility at the bracket's lower end.
    edge_gain : ndarray
        The feasible side of each refined bracket, s.
    binding_idx : ndarray of int
        The criterion with the least slack just outside each edge.
    """
    r, j = np.nonzero(ok[:, :-1] != ok[:, 1:])
    a = np.log10(gains[r, j])
    b = np.log10(gains[r, j + 1])
    ok_a = ok[r, j]
    for _ in range(_REFINE_STEPS):
        if r.size == 0:
            break
        mid = 0.5 * (a + b)
        res = evaluate_points(case, r, 10.0**mid, "criteria")
        m_ok = res.criteria.all_met
        same = m_ok == ok_a
        a = np.where(same, mid, a)
        b = np.where(same, b, mid)
        if np.all((b - a) < np.log10(1.0 + EDGE_TOLERANCE) / 8):
            break
    edge_gain = np.where(ok_a, 10.0**a, 10.0**b)  # the feasible side of each bracket
    outside = np.where(ok_a, 10.0**b, 10.0**a)
    binding_idx = (
        evaluate_points(case, r, outside, "criteria").criteria.binding() if r.size else np.zeros(0, int)
    )
    return r, j, ok_a, edge_gain, binding_idx


def _condition_design(case, settings, i, design, chosen_gain, feasible, reason, slacks, names, gains_i):
    """The :class:`ConditionDesign` of condition `i` from its intervals and its chosen gain's slacks."""
    intervals, edges = design
    binding = ()
    if not feasible:
        binding = tuple((names[k], float(slacks[k])) for k in np.argsort(slacks) if slacks[k] < 0)
    return ConditionDesign(
        name=case.conditions[i].name,
        intervals=tuple(intervals),
        edges=tuple(edges),
        chosen_gain=float(chosen_gain),
        feasible=bool(feasible),
        policy=settings.policy,
        reason=reason,
        binding=binding,
        sweep_range=(float(gains_i[0]), float(gains_i[-1])),
    )


def _intervals(i, ok_i, gains_i, r, j, edge_gain, ok_a, binding_idx, names):
    sel = np.nonzero(r == i)[0]
    sel = sel[np.argsort(j[sel])]
    intervals, edges = [], []
    start = None
    if ok_i[0]:
        start = Edge(float(gains_i[0]), "lower", "sweep range")
    for k in sel:
        if ok_a[k]:  # feasible -> infeasible: an upper edge
            e = Edge(float(edge_gain[k]), "upper", names[binding_idx[k]])
            if start is not None:
                intervals.append((start.gain, e.gain))
                edges.append((start, e))
            start = None
        else:
            start = Edge(float(edge_gain[k]), "lower", names[binding_idx[k]])
    if start is not None and ok_i[-1]:
        e = Edge(float(gains_i[-1]), "upper", "sweep range")
        intervals.append((start.gain, e.gain))
        edges.append((start, e))
    return intervals, edges


def _golden_max_slack(case, rows, a, b, steps=30):
    """Maximise the worst slack over log-gain in [a, b] per row (vectorised golden section): the
    gain at the middle of the final bracket, s."""

    def f(x):
        return evaluate_points(case, rows, 10.0**x, "criteria").criteria.worst_slack

    a, b = golden_bracket(f, a, b, steps)[:2]
    return 10.0 ** (0.5 * (a + b))


def _choose(case, settings, designs, gains, sweep, worst):
    n = len(designs)
    feasible = np.array([bool(dz[0]) for dz in designs])
    reasons = [""] * n
    chosen = np.empty(n)
    pts = gains.shape[1]
    # max-min slack on the grid (restricted to feasible points where there are any)
    score = np.where(sweep.criteria.all_met | ~feasible[:, None], worst, -np.inf)
    if settings.policy == "damping_target" and settings.damping_target is not None:
        zeta = sweep.damping_ratio(case.requirements.damping_measure)
        dist = np.abs(zeta - settings.damping_target)
        score_t = np.where(sweep.criteria.all_met, -dist, -np.inf)
    best = np.argmax(score, 1)
    lg = np.log10(gains)
    lo_i = np.clip(best - 1, 0, pts - 1)
    hi_i = np.clip(best + 1, 0, pts - 1)
    rows = np.arange(n)
    refined = _golden_max_slack(case, rows, lg[rows, lo_i], lg[rows, hi_i])
    for i in range(n):
        intervals = designs[i][0]
        if not feasible[i]:
            chosen[i] = refined[i]
            reasons[i] = "no gain meets every requirement: the gain with the largest worst slack (closest miss)"
            continue
        if settings.policy == "least_gain":
            chosen[i] = intervals[0][0]
            reasons[i] = "least gain meeting every requirement (least authority)"
        elif settings.policy == "damping_target":
            k = int(np.argmax(score_t[i]))
            chosen[i] = gains[i, k]
            reasons[i] = f"feasible gain with damping ratio nearest {settings.damping_target:g}"
        else:
            g = refined[i]
            inside = any(a <= g <= b for a, b in intervals)
            chosen[i] = g if inside else gains[i, best[i]]
            reasons[i] = "most normalised slack to the tightest requirement (balanced)"
    return chosen, reasons, feasible
