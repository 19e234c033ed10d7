"""Damper failures: hardover, oscillatory and passive (batched over conditions).

Definitions (docs/failures.md):

* **Hardover**: at t = 0 the damper command runs to ``+authority`` and, separately, to
  ``-authority`` at the damper command's rate limit and stays there; the damper loop is
  broken, the pilot does nothing until the recognition time, the actuator keeps its lag,
  rate limit and travel. Reported for the sign with the least slack to the tightest limit
  (ties: +1): the peaks within ``[0, recognition time]`` and whether each limit is met.
* **Oscillatory**: the damper command oscillates, ``A sin(w t)`` from t = 0 through its
  rate limit (a triangle-like wave where ``A w`` exceeds it); w maximises the peak
  incremental load factor within the recognition time, found by a search over frequency
  (a log-spaced grid over the configured range around the bare short period, two nested
  refinements around the best point, a parabola in log w, and a final simulation there).
  The model is odd (symmetric limits, start in trim), so the wave's sign only mirrors the
  motion; the sign with the least slack is reported.
* **Passive**: the damper off (K = 0): the handling level and every short-period criterion
  of the requirements, met when the level is at least the required one.

Surface convention: trailing-edge down positive (docs/theory.md section 1), so ``sign =
+1`` with ``M_delta < 0`` pitches the nose down.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from ..model import airframes
from ..model.batch import batch_shape, flatten, map_arrays
from ..model.loop import Loop
from . import failure_commands as fc
from .failure_spec import LIMIT_NAMES, FailureSpec, ServoLimits, extremes_slack
from .simulation import TimeHistory

#: Refinement levels after the first frequency grid, and points inside each bracket.
REFINE_LEVELS = 2
REFINE_POINTS = 9


@dataclass(frozen=True)
class TransientResult:
    """The motion after a hardover or oscillatory failure (arrays of the batch shape S).

    Attributes
    ----------
    peak_load_factor_increment_g : ndarray
        Signed incremental normal load factor of largest magnitude, g.
    peak_pitch_rate_rad_s : ndarray
        Signed, rad/s.
    peak_pitch_attitude_change_rad : ndarray
        Signed, rad.
    peak_angle_of_attack_change_rad : ndarray
        Signed, rad.
    sign : ndarray of int
        +1 or -1: the failed command's sign (surface convention, trailing-edge down
        positive) reported.
    met : ndarray of bool
        Every limit met.
    limits_met : dict of ndarray
        Per checked limit (:data:`damper.analysis.failure_spec.LIMIT_NAMES`).
    slack : dict of ndarray
        Normalised slack per checked limit (0.1: 10 % of the limit to spare).
    tightest_slack : ndarray
    binding_limit : ndarray of str
        The limit with the least slack.
    frequency_rad_s : ndarray or None
        Oscillatory failure: the frequency found, rad/s.
    frequency_at_range_edge : ndarray of bool or None
        Oscillatory failure: the frequency is at an end of the searched range (the true
        maximum may lie beyond it).
    history : TimeHistory or None
        The reported sign's time histories over the recognition time (for figures).
    """

    peak_load_factor_increment_g: np.ndarray
    peak_pitch_rate_rad_s: np.ndarray
    peak_pitch_attitude_change_rad: np.ndarray
    peak_angle_of_attack_change_rad: np.ndarray
    sign: np.ndarray
    met: np.ndarray
    limits_met: dict
    slack: dict
    tightest_slack: np.ndarray
    binding_limit: np.ndarray
    frequency_rad_s: np.ndarray | None = None
    frequency_at_range_edge: np.ndarray | None = None
    history: TimeHistory | None = None


def _result(t: fc.Transient, sign, bands, **extra) -> TransientResult:
    slack, tight, idx = extremes_slack(t.top, t.bottom, bands)
    names = np.array(list(bands))
    return TransientResult(
        peak_load_factor_increment_g=t.peak["load_factor"],
        peak_pitch_rate_rad_s=t.peak["pitch_rate"],
        peak_pitch_attitude_change_rad=t.peak["pitch_attitude"],
        peak_angle_of_attack_change_rad=t.peak["angle_of_attack"],
        sign=np.asarray(sign, dtype=int),
        met=tight >= 0,
        limits_met={k: v >= 0 for k, v in slack.items()},
        slack=slack,
        tightest_slack=tight,
        binding_limit=names[idx],
        **extra,
    )


def _pick(plus, minus, use_minus):
    """Per member: `minus` where `use_minus`, else `plus` (dicts of arrays or arrays)."""
    if isinstance(plus, dict):
        return {k: np.where(use_minus, minus[k], plus[k]) for k in plus}
    return np.where(use_minus, minus, plus)


def _worse(plus: fc.Transient, minus: fc.Transient, bands):
    """The sign with the least slack to the tightest limit (ties: +1), and its transient."""
    s_plus = extremes_slack(plus.top, plus.bottom, bands)[1]
    s_minus = extremes_slack(minus.top, minus.bottom, bands)[1]
    use_minus = s_minus < s_plus
    t = fc.Transient(*(_pick(getattr(plus, f), getattr(minus, f), use_minus) for f in ("top", "bottom", "peak")))
    return t, np.where(use_minus, -1, 1), use_minus


def _flat(loop: Loop):
    shape = batch_shape(loop)
    n = int(np.prod(shape, dtype=int))
    flat, _ = flatten(loop)
    return map_arrays(flat, lambda a: np.broadcast_to(a, (n,))), shape, n


def _per_member(x, shape):
    return np.broadcast_to(np.asarray(x, dtype=float), shape).reshape(-1)


def _stack_loop(flat: Loop, times: int) -> Loop:
    return map_arrays(flat, lambda a: np.tile(a, times))


def hardover_transients(loop: Loop, servo: ServoLimits, spec: FailureSpec, authority=None):
    """Both hardovers (+ and -) at `authority` (default the servo's), simulated.

    Returns
    -------
    plus, minus : Transient
        Batch shape ``S``.
    history : TimeHistory
        Batch shape ``(2,) + S``: +1 first.
    """
    flat, shape, n = _flat(loop)
    a = _per_member(servo.failure_authority() if authority is None else authority, shape)
    r = _per_member(servo.slew_rate(), shape)
    step, n_steps = spec.time_grid()
    command = fc.hardover_command(np.tile(a, 2), np.tile(r, 2), np.repeat([1.0, -1.0], n))
    lim = [None if x is None else np.tile(_per_member(x, shape), 2) for x in (servo.rate_limit, servo.travel)]
    t, h = fc.failure_transient(_stack_loop(flat, 2), command, duration=step * n_steps, step=step,
                                rate_limit=lim[0], travel=lim[1])

    def part(i):
        return fc.Transient(*({k: v[i * n:(i + 1) * n].reshape(shape) for k, v in getattr(t, f).items()}
                              for f in ("top", "bottom", "peak")))

    plus, minus = part(0), part(1)
    hist = replace(h, **{k: getattr(h, k).reshape((2,) + shape + (-1,)) for k in h.SERIES},
                   input_end=np.zeros((2,) + shape))
    return plus, minus, hist


def _select_history(hist: TimeHistory, use_minus, shape) -> TimeHistory:
    """The history of the sign chosen per member (`hist` of batch ``(2,) + S``)."""
    idx = np.asarray(use_minus, dtype=int)[None, ..., None]
    changes = {k: np.take_along_axis(getattr(hist, k), idx, 0)[0] for k in hist.SERIES}
    return replace(hist, input_end=np.zeros(shape), **changes)


def hardover(loop: Loop, servo: ServoLimits, spec: FailureSpec, authority=None) -> TransientResult:
    """The hardover failure (module notes) at `authority` (rad; default the servo's).

    Parameters
    ----------
    loop : Loop
        Batch shape ``S`` (conditions); the airframe and the actuator are used.
    servo : ServoLimits
    spec : FailureSpec
    """
    plus, minus, hist = hardover_transients(loop, servo, spec, authority)
    bands = spec.limits.bands()
    t, sign, use_minus = _worse(plus, minus, bands)
    return _result(t, sign, bands, history=_select_history(hist, use_minus, batch_shape(loop)))


def reference_frequency(d):
    """The bare short period's undamped natural frequency, rad/s: ``sqrt(|det A|)`` of the
    two-state part (1 rad/s where it is zero or not finite)."""
    from ..model.airframe import state_matrices

    A, _ = state_matrices(airframes.short_period_part(d))
    det = np.abs(A[..., 0, 0] * A[..., 1, 1] - A[..., 0, 1] * A[..., 1, 0])
    w = np.sqrt(det)
    return np.where(np.isfinite(w) & (w > 0), w, 1.0)


def _oscillatory_peaks(flat, a, r, w, servo_flat, spec):
    """Peak |n_z| (g) and the transient for frequencies `w` (N, m) of the flat batch."""
    n, m = w.shape
    step, n_steps = spec.time_grid()
    command = fc.oscillatory_command(np.repeat(a, m), np.repeat(r, m), w.reshape(-1), step * n_steps, step)
    lim = [None if x is None else np.repeat(x, m) for x in servo_flat]
    big = map_arrays(flat, lambda x: np.repeat(x, m))
    t, h = fc.failure_transient(big, command, duration=step * n_steps, step=step, rate_limit=lim[0], travel=lim[1])
    peak = np.maximum(t.top["load_factor"], -t.bottom["load_factor"]).reshape(n, m)
    return peak, t, h


def _search_frequency(flat, a, r, servo_flat, spec, w_ref):
    """The frequency (rad/s, shape (N,)) maximising the peak |n_z|, and whether it is at
    an end of the range (module notes)."""
    lo, hi = (np.log(w_ref * x) for x in spec.frequency_range)
    grid = np.linspace(0.0, 1.0, spec.frequency_points)[None, :] * (hi - lo)[:, None] + lo[:, None]
    rows = np.arange(len(a))
    for level in range(REFINE_LEVELS + 1):
        peak, _, _ = _oscillatory_peaks(flat, a, r, np.exp(grid), servo_flat, spec)
        best = np.argmax(peak, -1)
        m = grid.shape[1]
        left, right = grid[rows, np.maximum(best - 1, 0)], grid[rows, np.minimum(best + 1, m - 1)]
        if level == 0:
            edge = (best == 0) | (best == m - 1)
        if level < REFINE_LEVELS:
            grid = np.linspace(0.0, 1.0, REFINE_POINTS + 2)[None, :] * (right - left)[:, None] + left[:, None]
    # parabola through the best point and its neighbours (in log w), kept inside them
    i = np.clip(best, 1, m - 2)
    x0, x1, x2 = grid[rows, i - 1], grid[rows, i], grid[rows, i + 1]
    y0, y1, y2 = peak[rows, i - 1], peak[rows, i], peak[rows, i + 1]
    den = y0 - 2.0 * y1 + y2
    with np.errstate(invalid="ignore", divide="ignore"):
        off = np.where(den < 0, 0.5 * (y0 - y2) / np.where(den < 0, den, -1.0), 0.0)
    x = np.clip(x1 + off * (x2 - x1), x0, x2)
    x = np.where((best == 0) | (best == m - 1), grid[rows, best], x)
    return np.exp(x), edge


def oscillatory(loop: Loop, servo: ServoLimits, spec: FailureSpec, authority=None) -> TransientResult:
    """The oscillatory failure (module notes) at `authority` (rad; default the servo's).

    The reported peaks come from a simulation at the frequency found.
    """
    flat, shape, n = _flat(loop)
    a = _per_member(servo.failure_authority() if authority is None else authority, shape)
    r = _per_member(servo.slew_rate(), shape)
    servo_flat = [None if x is None else _per_member(x, shape) for x in (servo.rate_limit, servo.travel)]
    w, edge = _search_frequency(flat, a, r, servo_flat, spec, reference_frequency(flat.airframe))
    _, t, h = _oscillatory_peaks(flat, a, r, w[:, None], servo_flat, spec)
    t = fc.Transient(*({k: v.reshape(shape) for k, v in getattr(t, f).items()} for f in ("top", "bottom", "peak")))
    bands = spec.limits.bands()
    t, sign, use_minus = _worse(t, t.mirrored(), bands)
    hist = replace(h, **{k: getattr(h, k).reshape(shape + (-1,)) for k in h.SERIES}, input_end=np.zeros(shape))
    flip = np.where(use_minus, -1.0, 1.0)[..., None]
    hist = replace(hist, **{k: getattr(hist, k) * flip for k in
                            ("alpha", "q", "theta", "load_factor", "surface", "surface_rate", "command", "damper")})
    return _result(t, sign, bands, frequency_rad_s=w.reshape(shape), frequency_at_range_edge=edge.reshape(shape),
                   history=hist)


@dataclass(frozen=True)
class PassiveResult:
    """The aircraft with the damper off (K = 0), arrays of the batch shape.

    Attributes
    ----------
    level : ndarray of int or None
        Best handling level met overall (1-3; 4: worse than level 3); None when neither
        the requirements nor the spec name a flight-phase category.
    met : ndarray of bool or None
        ``level <= passive_level_required``.
    levels : dict or None
        Best level per short-period criterion (damping ratio, CAP, equivalent delay,
        minimum frequency).
    assessment : Assessment
        Every measure at K = 0 (and the requirements' criteria with their slack).
    required : int
    """

    level: np.ndarray | None
    met: np.ndarray | None
    levels: dict | None
    assessment: object
    required: int


def passive(loop: Loop, spec: FailureSpec, requirements=None, w=None) -> PassiveResult:
    """The passive failure (module notes): :func:`damper.analysis.assess.assess_loop` at K = 0.

    Parameters
    ----------
    loop : Loop
        Its gain is replaced by 0.
    requirements : Requirements or None
        The case's requirements (their category judges the level; else
        ``spec.passive_category``).
    w : ndarray or None
        Frequency grid for the margins (the case's settings), rad/s.
    """
    from ..requirements.spec import Requirements
    from ..requirements.spec import levels as judge
    from .assess import assess_loop

    bare = replace(loop, gain=np.zeros(batch_shape(loop)))
    result = assess_loop(bare, w=w, requirements=requirements)
    lv = result.levels
    if lv is None and spec.passive_category is not None:
        lv = judge(requirements or Requirements(()), result, category=spec.passive_category)
    if lv is None:
        return PassiveResult(None, None, None, result, spec.passive_level_required)
    level = np.asarray(lv["overall"])
    return PassiveResult(level, level <= spec.passive_level_required, {k: v for k, v in lv.items() if k != "overall"},
                         result, spec.passive_level_required)


__all__ = ["LIMIT_NAMES", "PassiveResult", "TransientResult", "hardover", "oscillatory", "passive",
           "reference_frequency"]
