"""The authority window: how much authority the damper needs, and how much is safe.

* **Lower edge** (:func:`required_authority`): the smallest authority with which the
  damper does not saturate in the design's own responses: the largest |damper demand|
  over the given inputs, simulated with an unbounded authority (and the damper command's
  own rate limit). With any authority at least this large the responses are the same,
  bit for bit, so the damper never saturates; with a smaller one it saturates at the
  moment of that peak.
* **Upper edge** (:func:`largest_safe_authority`): the largest authority up to which the
  hardover and the oscillatory failures stay within the transient limits during the
  recognition time. The hardover's estimate uses the linearity of the broken loop: its
  response to ``min(R_a t, A)`` is ``y_r(t) - y_r(t - A/R_a)`` with ``y_r`` the response
  to the unending ramp ``R_a t`` (or ``A`` times the unit-step response without a rate
  limit), so one simulation gives every A; the first authority where the slack crosses
  zero is found on a grid and refined. The oscillatory failure's estimate scales the
  study's reference run. Each estimate is then verified by simulating the failure with
  every actuator limit at the answer, and refined by simulation (Illinois steps on a
  bracket) until the tightest slack is within :data:`SLACK_TOL` of zero.

The window is ``[lower, upper]``; it is empty (None, with its reason) when lower > upper.
Over several conditions (a schedule's points, an envelope) the hardware must fit all:
the window is the intersection, ``[max lower, min upper]`` (:func:`intersect`).
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from ..model.batch import map_arrays
from ..model.loop import Loop
from . import failure_commands as fc
from . import failures as fl
from .failure_spec import FailureSpec, ServoLimits, extremes_slack
from .response_measures import measure
from .simulation import simulate

#: Tightest slack (normalised) at which an upper edge is final.
SLACK_TOL = 1e-6
#: Largest authority considered, rad: beyond it the upper edge is reported as unbounded.
AUTHORITY_CAP = 1.0
#: Points of the grid over the authority on which the hardover's first crossing is found.
AUTHORITY_GRID = 64
#: Simulation steps of the upper edge's refinement at most.
REFINE_STEPS = 12


@dataclass(frozen=True)
class RequiredAuthority:
    """The window's lower edge per condition.

    Attributes
    ----------
    value_rad : ndarray
        Largest |damper demand| over the inputs, rad.
    input_name : ndarray of str
        The input that needs it.
    """

    value_rad: np.ndarray
    input_name: np.ndarray


def required_authority(loop: Loop, inputs, *, duration, step=1e-3, rate_limit=None, travel=None,
                       authority_rate_limit=None) -> RequiredAuthority:
    """The smallest authority with which the damper does not saturate (module notes).

    Parameters
    ----------
    loop : Loop
        The design's loop at its chosen gains, batch shape ``S``.
    inputs : sequence of Input
        The design's responses (pilot inputs and gusts).
    duration, step : float
        s, as the responses.
    rate_limit, travel : float or array_like or None
        The actuator's limits (rad/s, rad).
    authority_rate_limit : float or array_like or None
        The damper command's own rate limit, rad/s (None: none).
    """
    values, names = [], []
    for inp in inputs:
        h = simulate(loop, inp, duration=duration, step=step, rate_limit=rate_limit, travel=travel,
                     authority=np.inf, authority_rate_limit=authority_rate_limit)
        values.append(measure(h).peak_damper_demand)
        names.append(inp.label)
    stack = np.stack(values)
    return RequiredAuthority(np.max(stack, 0), np.array(names)[np.argmax(stack, 0)])


def required_authority_from_responses(responses) -> RequiredAuthority:
    """The lower edge from responses already simulated (a sequence of
    :class:`damper.analysis.response.Response`), valid when none of them reached an authority.

    Raises
    ------
    ValueError
        A response's damper reached its authority: its demand is not the unsaturated one;
        simulate with :func:`required_authority` instead.
    """
    values, names = [], []
    for res in responses:
        m = res.augmented_measures
        if np.any(m.time_at_authority_limit > 0):
            raise ValueError(f"the damper saturates in response {res.input.label!r}: use required_authority")
        values.append(m.peak_damper_demand)
        names.append(res.input.label)
    stack = np.stack(values)
    return RequiredAuthority(np.max(stack, 0), np.array(names)[np.argmax(stack, 0)])


def _tightest(top, bottom, bands):
    """Tightest slack of a transient and of its mirror image (the opposite sign)."""
    s1 = extremes_slack(top, bottom, bands)[1]
    s2 = extremes_slack({k: -v for k, v in bottom.items()}, {k: -v for k, v in top.items()}, bands)[1]
    return np.minimum(s1, s2)


def _linear_reference(loop: Loop, servo: ServoLimits, spec: FailureSpec):
    """The broken loop's response to the unending ramp ``R_a t`` (unit step where R_a is
    infinite), without the actuator's limits: series of shape ``(N, n_t)``."""
    flat, shape, n = fl._flat(loop)
    r = fl._per_member(servo.slew_rate(), shape)
    step, n_steps = spec.time_grid()
    command = fc.hardover_command(np.where(np.isfinite(r), np.inf, 1.0), r, np.ones(n))
    _, h = fc.failure_transient(flat, command, duration=step * n_steps, step=step)
    return {k: getattr(h, s) for k, s in fc.SERIES.items()}, r, step


def _superposed_slack(ref, r, step, a, bands):
    """Tightest slack of the hardovers at authorities `a` (N, k) from the linear reference.

    With a finite rate limit: ``y_A(t) = y_r(t) - y_r(t - A/R_a)`` (``y_r = 0`` before 0;
    linear interpolation between samples); without one: ``A y_u(t)``.
    """
    finite = np.isfinite(r)[:, None]
    n_t = next(iter(ref.values())).shape[-1]
    shift = a / np.where(finite, r[:, None], np.inf) / step  # samples (0 without a rate limit)
    pos = np.clip(np.arange(n_t)[None, None, :] - shift[..., None] + 1.0, 0.0, float(n_t))
    j = np.minimum(np.floor(pos).astype(int), n_t - 1)
    f = pos - j
    top, bottom = {}, {}
    for name in bands:
        y = ref[name][:, None, :]
        padded = np.broadcast_to(np.concatenate([np.zeros(y.shape[:-1] + (1,)), y], -1), j.shape[:-1] + (n_t + 1,))
        delayed = np.take_along_axis(padded, j, -1) * (1.0 - f) + np.take_along_axis(padded, j + 1, -1) * f
        y_a = np.where(finite[..., None], y - delayed, a[..., None] * y)
        top[name], bottom[name] = np.max(y_a, -1), np.min(y_a, -1)
    return _tightest(top, bottom, bands)


def _hardover_estimate(loop, servo, spec):
    """The hardover's upper edge from the linear reference (rad; inf: none below the cap)."""
    ref, r, step = _linear_reference(loop, servo, spec)
    bands = spec.limits.bands()
    n = len(r)
    cap = np.where(np.isfinite(r), np.minimum(r * step * (next(iter(ref.values())).shape[-1] - 1), AUTHORITY_CAP),
                   AUTHORITY_CAP)
    grid = cap[:, None] * np.arange(1, AUTHORITY_GRID + 1)[None, :] / AUTHORITY_GRID
    s = _superposed_slack(ref, r, step, grid, bands)
    bad = s < 0
    first = np.argmax(bad, -1)
    rows = np.arange(n)
    hi = grid[rows, first]
    lo = np.where(first > 0, grid[rows, np.maximum(first - 1, 0)], 0.0)
    f_lo = np.where(first > 0, s[rows, np.maximum(first - 1, 0)], 1.0)
    f_hi = s[rows, first]

    def fn(x, act):
        return _superposed_slack({k: v[act] for k, v in ref.items()}, r[act], step, x[:, None], bands)[:, 0]

    edge = _root(fn, lo, hi, f_lo, f_hi, SLACK_TOL * 1e-3, 60)
    return np.where(bad.any(-1), edge, np.inf)


def _root(fn, lo, hi, f_lo, f_hi, ftol, steps):
    """Illinois regula falsi on brackets ``[lo, hi]`` (f_lo >= 0 > f_hi) to ``|f| <= ftol``.

    Returns the point found with ``|f| <= ftol``, else the bracket's safe end (f >= 0).
    """
    a, b = np.array(lo, dtype=float), np.array(hi, dtype=float)
    fa, fb = np.array(f_lo, dtype=float), np.array(f_hi, dtype=float)
    side = np.zeros(a.shape, int)
    found = np.where(np.abs(fb) <= ftol, b, np.nan)
    done = np.isfinite(found) | ~np.isfinite(b)
    for _ in range(steps):
        act = np.nonzero(~done)[0]
        if act.size == 0:
            break
        x = (a[act] * fb[act] - b[act] * fa[act]) / (fb[act] - fa[act])
        x = np.where(np.isfinite(x) & (x > a[act]) & (x < b[act]), x, 0.5 * (a[act] + b[act]))
        fx = fn(x, act)
        good = fx >= 0
        a[act] = np.where(good, x, a[act])
        b[act] = np.where(good, b[act], x)
        fb[act] = np.where(good, np.where(side[act] == 1, 0.5 * fb[act], fb[act]), fx)
        fa[act] = np.where(good, fx, np.where(side[act] == -1, 0.5 * fa[act], fa[act]))
        side[act] = np.where(good, 1, -1)
        found[act] = np.where(np.abs(fx) <= ftol, x, found[act])
        done[act] = np.isfinite(found[act]) | (b[act] - a[act] <= 1e-12 * b[act])
    return np.where(np.isfinite(found), found, a)


def _members(loop: Loop, servo: ServoLimits, idx):
    """The members `idx` of the flattened batch, and their servo limits."""
    flat, shape, _ = fl._flat(loop)
    sub = map_arrays(flat, lambda x: x[idx])

    def pick(x):
        return None if x is None else fl._per_member(x, shape)[idx]

    return sub, ServoLimits(pick(servo.authority), pick(servo.authority_rate_limit), pick(servo.rate_limit),
                            pick(servo.travel))


def failure_slack(loop: Loop, servo: ServoLimits, spec: FailureSpec, kind, authority, idx):
    """Tightest slack and binding limit of the `kind` failure at `authority` (rad, one per
    member of `idx`), by simulation with every actuator limit."""
    sub, lim = _members(loop, servo, idx)
    run = fl.hardover if kind == "hardover" else fl.oscillatory
    res = run(sub, lim, spec, authority=authority)
    return res.tightest_slack, res.binding_limit


def _refine(evaluate, a, s, names):
    """Refine the edges by simulation until the slack is within :data:`SLACK_TOL` of zero.

    Before a bracket of a safe and an unsafe authority is known: a secant step through the
    last two evaluations (the first step proportional, ``a / (1 - s)``, exact for a
    transient proportional to the authority), pushed 2 % further to cross the edge; with a
    bracket: Illinois false position inside it. An authority at :data:`AUTHORITY_CAP` still
    within the limits makes the edge unbounded.

    Returns
    -------
    edge, slack, names, converged : ndarray
    """
    a, s, names = np.array(a, dtype=float), np.array(s, dtype=float), np.array(names, dtype=object)
    n = len(a)
    lo, f_lo = np.zeros(n), np.ones(n)
    hi, f_hi = np.full(n, np.inf), np.full(n, -1.0)
    a_prev, s_prev = np.full(n, np.nan), np.full(n, np.nan)
    side = np.zeros(n, int)
    done = (np.abs(s) <= SLACK_TOL) | ~np.isfinite(a)
    for _ in range(REFINE_STEPS):
        safe = s >= 0
        new_lo, new_hi = safe & (a > lo), ~safe & (a < hi)
        # Illinois: halve the kept end's value when the same end is kept twice
        f_hi = np.where(new_lo & (side == 1), 0.5 * f_hi, f_hi)
        f_lo = np.where(new_hi & (side == -1), 0.5 * f_lo, f_lo)
        side = np.where(new_lo, 1, np.where(new_hi, -1, side))
        lo, f_lo = np.where(new_lo, a, lo), np.where(new_lo, s, f_lo)
        hi, f_hi = np.where(new_hi, a, hi), np.where(new_hi, s, f_hi)
        done |= safe & (a >= AUTHORITY_CAP)
        act = np.nonzero(~done)[0]
        if act.size == 0:
            break
        prop = _proposal(a[act], s[act], a_prev[act], s_prev[act], lo[act], f_lo[act], hi[act], f_hi[act])
        a_prev[act], s_prev[act] = a[act], s[act]
        s_new, b_new = evaluate(prop, act)
        a[act], s[act], names[act] = prop, s_new, b_new
        done[act] = np.abs(s_new) <= SLACK_TOL
    unbounded = ((s >= 0) & (a >= AUTHORITY_CAP)) | ~np.isfinite(a)
    converged = (np.abs(s) <= SLACK_TOL) | unbounded
    edge = np.where(unbounded, np.inf, np.where(converged, a, lo))
    return edge, np.where(unbounded, np.nan, s), names, converged


def _proposal(a, s, a_prev, s_prev, lo, f_lo, hi, f_hi):
    """The next authority to simulate (see :func:`_refine`)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        bracketed = np.isfinite(hi)
        falsi = (lo * f_hi - hi * f_lo) / (f_hi - f_lo)
        falsi = np.where(np.isfinite(falsi) & (falsi > lo) & (falsi < hi), falsi, 0.5 * (lo + hi))
        secant = a - s * (a - a_prev) / (s - s_prev)
        proportional = np.where(s < 1, a / (1.0 - s), np.inf)
        first = np.where(np.isfinite(secant) & (secant > lo), secant, proportional)
        ahead = a + 1.02 * (first - a)  # a little past the predicted edge, to bracket it
        ahead = np.where(np.isfinite(ahead) & (ahead > lo), ahead, 2.0 * np.maximum(a, lo))
    return np.minimum(np.where(bracketed, falsi, ahead), AUTHORITY_CAP)


@dataclass(frozen=True)
class UpperEdge:
    """The largest authority whose failures stay within the limits, per condition.

    Attributes
    ----------
    value_rad : ndarray
        The smaller of the kinds' edges, rad (inf: none up to :data:`AUTHORITY_CAP`).
    kind : ndarray of str
        ``hardover`` or ``oscillatory``: the failure that sets it ('' when unbounded).
    binding_limit : ndarray of str
        The transient limit reached there.
    slack : ndarray
        The tightest slack of that failure simulated at the edge (NaN when unbounded).
    converged : ndarray of bool
        The slack is within :data:`SLACK_TOL` of zero (else the edge is the largest
        authority verified safe).
    by_kind : dict of ndarray
        Each studied kind's edge, rad.
    """

    value_rad: np.ndarray
    kind: np.ndarray
    binding_limit: np.ndarray
    slack: np.ndarray
    converged: np.ndarray
    by_kind: dict


def largest_safe_authority(loop: Loop, servo: ServoLimits, spec: FailureSpec, oscillatory_reference=None) -> UpperEdge:
    """The window's upper edge (module notes), batched over the loop's conditions.

    Parameters
    ----------
    loop, servo, spec
        As :func:`damper.analysis.failures.hardover`.
    oscillatory_reference : TransientResult or None
        The oscillatory failure at the servo's authority, when already computed.
    """
    _, shape, n = fl._flat(loop)
    idx = np.arange(n)
    found = {}
    if "hardover" in spec.kinds:
        # unbounded by linearity: verified at the cap (the actuator's limits could matter)
        a0 = np.minimum(_hardover_estimate(loop, servo, spec), AUTHORITY_CAP)
        s0, b0 = failure_slack(loop, servo, spec, "hardover", a0, idx)
        found["hardover"] = _refine(lambda a, act: failure_slack(loop, servo, spec, "hardover", a, act), a0,
                                    np.asarray(s0, dtype=float), np.asarray(b0, dtype=object))
    if "oscillatory" in spec.kinds:
        ref = oscillatory_reference or fl.oscillatory(loop, servo, spec)
        a_ref = fl._per_member(servo.failure_authority(), shape)
        s_ref = np.asarray(ref.tightest_slack, dtype=float).reshape(-1)
        with np.errstate(divide="ignore"):
            a0 = np.minimum(np.where(s_ref < 1, a_ref / (1.0 - s_ref), np.inf), AUTHORITY_CAP)
        s0, b0 = failure_slack(loop, servo, spec, "oscillatory", a0, idx)
        found["oscillatory"] = _refine(lambda a, act: failure_slack(loop, servo, spec, "oscillatory", a, act), a0,
                                       np.asarray(s0, dtype=float), np.asarray(b0, dtype=object))
    if not found:
        inf = np.full(shape, np.inf)
        return UpperEdge(inf, np.full(shape, ""), np.full(shape, ""), np.full(shape, np.nan), np.ones(shape, bool), {})
    kinds = list(found)
    edges = np.stack([found[k][0] for k in kinds])
    which = np.argmin(edges, 0)

    def pick(i):
        return np.stack([np.asarray(found[k][i]) for k in kinds])[which, idx].reshape(shape)

    value = np.min(edges, 0)
    bounded = np.isfinite(value).reshape(shape)
    return UpperEdge(
        value_rad=value.reshape(shape),
        kind=np.where(bounded, np.array(kinds)[which].reshape(shape), ""),
        binding_limit=np.where(bounded, pick(2).astype(str), ""),
        slack=pick(1).astype(float),
        converged=pick(3).astype(bool),
        by_kind={k: found[k][0].reshape(shape) for k in kinds},
    )


def _deg(x):
    return "unbounded" if not np.isfinite(x) else f"{np.degrees(x):.4g} deg"


@dataclass(frozen=True)
class AuthorityWindow:
    """The authority window per condition (arrays of the conditions' shape).

    Attributes
    ----------
    lower_rad : ndarray
        The smallest authority with which the damper does not saturate, rad.
    upper_rad : ndarray
        The largest authority whose failures stay within the limits, rad (inf: unbounded).
    lower_input : ndarray of str
        The response that needs the lower edge.
    upper : UpperEdge
    """

    lower_rad: np.ndarray
    upper_rad: np.ndarray
    lower_input: np.ndarray
    upper: UpperEdge

    @property
    def empty(self) -> np.ndarray:
        """No authority fits (lower edge above the upper)."""
        return self.lower_rad > self.upper_rad

    def window(self, index):
        """``[lower, upper]`` (rad; upper may be inf) of condition `index`, or None when empty."""
        lo, hi = float(self.lower_rad[index]), float(self.upper_rad[index])
        return None if lo > hi else [lo, hi]

    def reason(self, index) -> str:
        """One line: what sets each edge, or why the window is empty."""
        lo, hi = float(self.lower_rad[index]), float(self.upper_rad[index])
        need = f"the damper needs {_deg(lo)} ({self.lower_input[index]})"
        if not np.isfinite(hi):
            return f"{need}; no failure exceeds the transient limits up to {_deg(AUTHORITY_CAP)}"
        edge = f"a {self.upper.kind[index]} failure above {_deg(hi)} exceeds the {self.upper.binding_limit[index]} limit"
        if lo > hi:
            return f"empty: {need} but {edge}"
        return f"{need}; {edge}"


def authority_window(required: RequiredAuthority, upper: UpperEdge) -> AuthorityWindow:
    """Combine the edges of each condition."""
    shape = np.shape(upper.value_rad)
    lower = np.broadcast_to(required.value_rad, shape)
    return AuthorityWindow(lower, upper.value_rad, np.broadcast_to(required.input_name, shape), upper)


@dataclass(frozen=True)
class CommonWindow:
    """The one authority that must fit every condition (the intersection of their windows).

    Attributes
    ----------
    window_rad : list or None
        ``[max lower, min upper]`` (rad), or None when empty.
    reason : str
    lower_index, upper_index : tuple
        The conditions that set each edge (batch indices).
    """

    window_rad: list | None
    reason: str
    lower_index: tuple
    upper_index: tuple


def intersect(window: AuthorityWindow, names=None) -> CommonWindow:
    """The intersection of the conditions' windows (module notes).

    Parameters
    ----------
    window : AuthorityWindow
    names : sequence of str or None
        Condition labels (flat order), for the reason.
    """
    shape = np.shape(window.lower_rad)
    lower, upper = np.asarray(window.lower_rad).reshape(-1), np.asarray(window.upper_rad).reshape(-1)
    i_lo, i_hi = int(np.argmax(lower)), int(np.argmin(upper))
    def label(i):
        if names is not None:
            return names[i]
        return f"condition {tuple(int(k) for k in np.unravel_index(i, shape))}"

    lo, hi = float(lower[i_lo]), float(upper[i_hi])
    need = f"{label(i_lo)} needs {_deg(lo)} ({np.asarray(window.lower_input).reshape(-1)[i_lo]})"
    if not np.isfinite(hi):
        reason = f"{need}; no failure exceeds the transient limits at any condition up to {_deg(AUTHORITY_CAP)}"
    else:
        kind = np.asarray(window.upper.kind).reshape(-1)[i_hi]
        limit = np.asarray(window.upper.binding_limit).reshape(-1)[i_hi]
        edge = f"at {label(i_hi)} a {kind} failure above {_deg(hi)} exceeds the {limit} limit"
        reason = f"empty: {need} but {edge}" if lo > hi else f"{need}; {edge}"
    return CommonWindow(None if lo > hi else [lo, hi], reason, tuple(int(k) for k in np.unravel_index(i_lo, shape)),
                        tuple(int(k) for k in np.unravel_index(i_hi, shape)))
