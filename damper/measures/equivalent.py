"""Low-order equivalent system (LOES) fit of the pitch-rate frequency response.

Method
------
The augmented aircraft's pitch-rate response to the pilot command, ``H(jw)``,
is matched over a band of frequencies (by default 30 log-spaced points from
0.1 to 10 rad/s) by the low-order form used in the handling-qualities
guidance of MIL-STD-1797A::

    H_e(s) = Kq (s + 1/T_theta2) exp(-tau_e s) / (s^2 + 2 zeta_e w_e s + w_e^2)

The mismatch (cost) is, as recalled from that guidance (from memory),

    J = (20 / n) * sum_i ( dG_i^2 + 0.01745 * dPhi_i^2 )

with ``dG_i`` the gain difference in dB and ``dPhi_i`` the phase difference
in degrees at the ``n`` fit frequencies.  The phase difference is the wrapped
angle of ``H_e / H`` (in [-180, 180) deg), so the data never need unwrapping.

The numerator zero ``1/T_theta2`` is held at a value supplied by the caller
(normally the bare-airframe value) unless ``free_zero=True``.

All systems of a batch are fitted at once by a vectorised, projected
Levenberg-Marquardt iteration: per system the residual vector is
``sqrt(20/n) * [dG_1..dG_n, sqrt(0.01745) * dPhi_1..dPhi_n]`` so that its
squared norm is ``J``; the Jacobians are stacked to shape (M, 2n, p) and the
small damped normal equations are solved with one ``np.linalg.solve`` call
per iteration.  The parameters are ``ln w_e`` (so it stays positive),
``asinh zeta_e`` (any sign: an unstable closed loop gets its negative
equivalent damping; like ``zeta_e`` near zero and like ``ln 2 zeta_e`` for a
large damping, so a pair drifting along the first-order valley moves fast),
``tau_e`` itself (projected onto
``tau_e >= 0``, with the bound treated as an active constraint when the
gradient pushes against it), ``ln |Kq|`` (the sign of ``Kq`` is chosen per
start from the data) and, with a free zero, ``ln(1/T_theta2)``; a wide box
(``zeta_e`` in [-1e4, 1e4], ``w_e`` and a free zero within a factor 1e4 of
the fit band) only keeps degenerate fits finite.  Several
starting points per system (one derived from the data, the others a small
spread of damping ratios and frequencies around it) are iterated in the same
batch and the lowest-cost result is kept per system.  Because the phase
mismatch is wrapped, ``J`` is multi-modal in ``tau_e`` once ``tau_e w``
exceeds about 180 deg in the band; each start's delay and gain sign are
therefore taken from a cheap scan of the phase part of ``J`` (0 to 0.5 s
for the default band) before the iteration.  Each system keeps its
own damping and stopping test and is frozen once stopped, so its result does
not depend on the rest of the batch.

When the best match is really first-order (a real pole pair whose fast pole
leaves the band), ``zeta_e`` and ``w_e`` drift together to large values
along a flat valley of ``J``; they are then not meaningful one by one and
``converged`` may be False at the default iteration limit.

The functions are pure; results are returned in a frozen dataclass.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["EquivalentFit", "fit_frequencies", "fit_equivalent_system"]

from ..quantities import quantity

# the model and its starts live in their own modules; their names stay importable from here
from .loes_residuals import _LN_K, _LN_W, _LN_ZERO, _TAU, _Z, PHASE_WEIGHT, _evaluate, _normal_equations  # noqa: F401
from .loes_starts import _START_SPREAD, _merged_starts, _scan_delay_and_sign, _starting_points  # noqa: F401

# Levenberg-Marquardt controls (dimensionless).
_LAMBDA_START = 1e-3
_LAMBDA_DOWN = 1.0 / 3.0
_LAMBDA_UP = 8.0
_LAMBDA_MIN = 1e-12
_LAMBDA_MAX = 1e12
_FTOL = 1e-14  # relative cost reduction regarded as no progress
_XTOL = 1e-11  # step size (log units / s) regarded as no progress
_COST_FLOOR = 1e-26  # cost regarded as an exact fit
# Starts of one system closer than _MERGE_TOL (damper/measures/loes_starts.py) in every parameter
# are taken to be in one basin; the checks are every _MERGE_EVERY iterations.
_MERGE_EVERY = 1
# A start whose zeta_e exceeds _DRIFT_ZETA with w_e above _DRIFT_W_FACTOR times the top fit
# frequency is drifting along the flat first-order valley (see the module notes): it is
# stopped there, not converged (a hundred times past the limits where the handling layer
# already discards a fit as degenerate).
_DRIFT_ZETA = 1e3
_DRIFT_W_FACTOR = 1e3

# Parameter box (only reached by degenerate fits): w_e and a free 1/T_theta2
# within [w[0] * 1e-4, w[-1] * 1e4] rad/s, zeta_e within [1e-4, 1e4].
_W_RANGE = 1e-4
_ZETA_RANGE = (-1e4, 1e4)

_ASINH_DRIFT_ZETA = float(np.arcsinh(_DRIFT_ZETA))


@dataclass(frozen=True)
class EquivalentFit:
    """Result of a batched LOES fit; every field has the batch shape ``(...)``.

    Attributes
    ----------
    damping_ratio : numpy.ndarray
        Equivalent short-period damping ratio ``zeta_e`` (dimensionless, > 0;
        values above 1 mean an overdamped equivalent pair).
    natural_frequency : numpy.ndarray
        Equivalent short-period natural frequency ``w_e``, rad/s.
    time_delay : numpy.ndarray
        Equivalent time delay ``tau_e``, s (>= 0).
    gain : numpy.ndarray
        Numerator gain ``Kq`` (sign included).  Its unit is the unit of the
        response multiplied by rad/s: for ``q/command`` in (rad/s)/rad it is
        1/s^2; for (rad/s) per unit of command it is (rad/s^2) per unit.
    inv_t_theta2 : numpy.ndarray
        Numerator zero ``1/T_theta2``, 1/s (the fixed input, or the fitted
        value when ``free_zero=True``).
    mismatch : numpy.ndarray
        Cost ``J = (20/n) sum(dG^2 + 0.01745 dPhi^2)`` with ``dG`` in dB and
        ``dPhi`` in deg; dimensionless as defined (mixed dB^2 and deg^2).
    converged : numpy.ndarray
        bool; True when the iteration of the retained start met a stopping
        test before ``max_iterations``.
    fallback : numpy.ndarray
        bool; True where all the starts were iterated (the data-derived start alone did not
        converge or left a mismatch above the bound of the ``starts`` rule:
        :data:`BASIN_MISMATCH` by default).
    """

    damping_ratio: np.ndarray = quantity("")
    natural_frequency: np.ndarray = quantity("rad/s")
    time_delay: np.ndarray = quantity("s")
    gain: np.ndarray = quantity("1/s^2", doc="q (rad/s) per rad of command, times s; K of the LOES form")
    inv_t_theta2: np.ndarray = quantity("1/s")
    mismatch: np.ndarray = quantity("")
    converged: np.ndarray
    fallback: np.ndarray = False


def fit_frequencies(n: int = 30, low: float = 0.1, high: float = 10.0) -> np.ndarray:
    """Log-spaced fit frequencies.

    Parameters
    ----------
    n : int
        Number of frequencies (>= 2).
    low, high : float
        First and last frequency, rad/s (0 < low < high).

    Returns
    -------
    numpy.ndarray
        Shape (n,), rad/s, from ``low`` to ``high`` inclusive.
    """
    n = int(n)
    if n < 2:
        raise ValueError("n must be at least 2")
    if not (0.0 < low < high) or not np.isfinite(high):
        raise ValueError("need 0 < low < high < inf (rad/s)")
    return np.logspace(np.log10(low), np.log10(high), n)


#: A single-start fit whose mismatch J is above this is repeated from every start (the data-
#: derived start found a poor basin); dimensionless, as J.
FALLBACK_MISMATCH = 20.0
#: The bound of ``starts="basin"`` (the default): a converged single-start fit is repeated
#: from every start only above this mismatch (dimensionless, as J). On every set of systems
#: examined (the robustness study's, the engine benchmark's, the tests' and 3,000 difficult
#: invented ones: docs/performance.md) six starts lowered a converged single-start mismatch
#: only where it was above 136; below, they found the same minimum.
BASIN_MISMATCH = 100.0
#: Mismatch bound above which a converged single-start fit falls back, per ``starts`` rule.
_BOUND = {"fallback": FALLBACK_MISMATCH, "basin": BASIN_MISMATCH}
#: The start rule when the caller names none (the switch between the rules): ``"basin"``
#: leaves every demo run's documents byte-identical to ``"fallback"``; elsewhere a system that
#: ``"fallback"`` repeated and whose six starts reached the single start's minimum can differ
#: in the last bits (up to 4.6e-8 in a damping ratio on the engine benchmark's 10,000 x 20 study).
DEFAULT_STARTS = "basin"


def _levenberg_marquardt(
    params, target, zero, w, free_zero, scale, max_iterations, lower, upper, n_start=1
):
    """Projected Levenberg-Marquardt on a stack of independent problems.

    ``lower``/``upper`` (p,) are box bounds on the parameters; a parameter
    at a bound whose gradient points out of the box is frozen for the step
    (active set) and every trial point is projected onto the box.  Every row
    is iterated with its own damping and its own stopping test; a row that
    has stopped is no longer updated (and leaves the working set), so the
    result of a row does not depend on the other rows of the stack.  With
    ``n_start > 1`` the rows are that many starts per system (system-major)
    and every :data:`_MERGE_EVERY` iterations a start that has reached another
    start of the same system is dropped (:func:`_merged_starts`).
    Returns (params, cost, converged) over all rows; a dropped start keeps its
    last point and is not marked converged.
    """
    m_rows, p = params.shape
    params = params.copy()
    cost, normal, grad = _normal_equations(params, target, zero, w, free_zero, scale)
    converged = cost <= _COST_FLOOR
    eye = np.eye(p)
    ln_drift_w = np.log(_DRIFT_W_FACTOR * w[-1])

    # working set: the rows still iterating, compacted
    act = np.nonzero(~converged)[0]
    w_par, w_cost = params[act], cost[act]
    w_normal, w_grad = normal[act], grad[act]
    w_target, w_zero = target[act], zero[act]
    w_lam = np.full(act.size, _LAMBDA_START)

    for it in range(max_iterations):
        if act.size == 0:
            break
        # Parameters at a bound with the descent direction leaving the box.
        frozen = ((w_par <= lower) & (w_grad > 0.0)) | ((w_par >= upper) & (w_grad < 0.0))
        keep = np.where(frozen, 0.0, 1.0)
        a_mat = w_normal * keep[:, :, None] * keep[:, None, :]
        g = w_grad * keep
        diag = np.einsum("ikk->ik", a_mat)
        diag_floor = 1e-12 * np.maximum(diag.max(axis=1, keepdims=True), 1e-300)
        damp = w_lam[:, None] * np.maximum(diag, diag_floor)
        lhs = a_mat + (damp + (1.0 - keep))[:, :, None] * eye
        step = -np.linalg.solve(lhs, g[:, :, None])[:, :, 0]
        trial = np.clip(w_par + step, lower, upper)
        actual_step = trial - w_par

        cost_t, normal_t, grad_t = _normal_equations(trial, w_target, w_zero, w, free_zero, scale)
        ok = np.isfinite(cost_t) & (cost_t < w_cost)
        small_step = np.max(np.abs(actual_step), axis=1) <= _XTOL
        small_gain = (w_cost - cost_t) <= _FTOL * w_cost

        w_par[ok] = trial[ok]
        w_normal[ok] = normal_t[ok]
        w_grad[ok] = grad_t[ok]
        w_cost[ok] = cost_t[ok]
        w_lam = np.where(ok, np.maximum(w_lam * _LAMBDA_DOWN, _LAMBDA_MIN), w_lam * _LAMBDA_UP)
        params[act] = w_par
        cost[act] = w_cost

        stop = (ok & (small_step | small_gain)) | (~ok & small_step)
        stop |= w_cost <= _COST_FLOOR
        stop |= w_lam > _LAMBDA_MAX
        converged[act[stop]] = True
        # a pair drifting along the first-order valley far outside the band: stop, unconverged
        stop |= (w_par[:, _Z] > _ASINH_DRIFT_ZETA) & (w_par[:, _LN_W] > ln_drift_w)
        if n_start > 1 and (it + 1) % _MERGE_EVERY == 0:
            alive = np.zeros(m_rows, dtype=bool)
            alive[act[~stop]] = True
            stop |= _merged_starts(params, cost, alive, n_start)[act]
        if stop.any():
            keep_rows = ~stop
            act = act[keep_rows]
            w_par, w_cost, w_lam = w_par[keep_rows], w_cost[keep_rows], w_lam[keep_rows]
            w_normal, w_grad = w_normal[keep_rows], w_grad[keep_rows]
            w_target, w_zero = w_target[keep_rows], w_zero[keep_rows]

    return params, cost, converged


def fit_equivalent_system(
    w,
    response,
    inv_t_theta2,
    *,
    free_zero: bool = False,
    max_iterations: int = 60,
    log_response: bool = False,
    starts: str | None = None,
) -> EquivalentFit:
    """Fit the pitch-rate LOES to a batch of high-order frequency responses.

    Parameters
    ----------
    w : array_like
        Shape (nw,), strictly increasing fit frequencies, rad/s (> 0),
        e.g. from :func:`fit_frequencies`.
    response : array_like of complex
        Shape (..., nw): the high-order system's pitch-rate response to the
        pilot command at ``w`` (e.g. (rad/s) per unit of command), for any
        number of leading batch axes.  Must be finite and non-zero.
    inv_t_theta2 : array_like
        ``1/T_theta2``, 1/s, broadcastable to the batch shape ``(...)``.  The
        fixed numerator zero, or the starting value (> 0) when
        ``free_zero=True``.
    free_zero : bool, optional
        Fit ``1/T_theta2`` as well (kept > 0).  Default False.
    max_iterations : int, optional
        Maximum Levenberg-Marquardt iterations (accepted or rejected trial
        steps) per start.  Default 60.
    log_response : bool, optional
        ``response`` is already the natural log of the response,
        ``ln|H| + j arg H`` (any branch of the phase). Default False.
    starts : {"basin", "fallback", "all"}, optional
        None: :data:`DEFAULT_STARTS` (``"basin"``). ``"basin"``: the data-derived start
        alone, and all six starts only for a system whose single fit does not converge
        (short of a first-order drift) or leaves a mismatch above :data:`BASIN_MISMATCH`;
        ``"fallback"``: the bound :data:`FALLBACK_MISMATCH` (the rule before: more repeats,
        which found no lower minimum on any set examined); ``"all"``: six starts for all.

    Returns
    -------
    EquivalentFit
        Fields of shape ``(...)``: ``damping_ratio`` (-), ``natural_frequency``
        (rad/s), ``time_delay`` (s), ``gain`` (response unit x rad/s),
        ``inv_t_theta2`` (1/s), ``mismatch`` (J, dimensionless) and
        ``converged`` (bool).

    Notes
    -----
    The cost is ``J = (20/n) sum(dG^2 + 0.01745 dPhi^2)`` with ``dG`` in dB
    and ``dPhi = angle(H_e/H)`` in deg (wrapped).  Each system is started
    from several points in the same batch and the lowest ``J`` is kept; the
    result of a system does not depend on the other systems of the batch.
    """
    w, h, zero_b, max_iterations = _checked_inputs(w, response, inv_t_theta2, free_zero, max_iterations,
                                                   log_response)
    batch = h.shape[:-1]
    n_sys = int(np.prod(batch, dtype=int))
    nw = w.size
    log_h = h.reshape(n_sys, nw) if log_response else np.log(h.reshape(n_sys, nw))
    zero = zero_b.reshape(n_sys).astype(float)
    par_b, sign_b, conv_b, cost_b, fallback = _fit_starts(log_h, zero, (w, free_zero, max_iterations),
                                                          DEFAULT_STARTS if starts is None else starts)

    def shaped(x):
        return np.asarray(x).reshape(batch)

    zero_out = np.exp(par_b[:, _LN_ZERO]) if free_zero else zero
    return EquivalentFit(
        damping_ratio=shaped(np.sinh(par_b[:, _Z])),
        natural_frequency=shaped(np.exp(par_b[:, _LN_W])),
        time_delay=shaped(par_b[:, _TAU]),
        gain=shaped(sign_b * np.exp(par_b[:, _LN_K])),
        inv_t_theta2=shaped(zero_out),
        mismatch=shaped(cost_b),
        converged=shaped(conv_b),
        fallback=shaped(fallback),
    )


def _checked_inputs(w, response, inv_t_theta2, free_zero, max_iterations, log_response):
    """The inputs of :func:`fit_equivalent_system`, checked: (w, complex response, 1/T_theta2 over the batch, iterations)."""
    w = np.asarray(w, dtype=float)
    if w.ndim != 1 or w.size < 3:
        raise ValueError("w must be 1-D with at least 3 frequencies (rad/s)")
    if not np.all(np.isfinite(w)) or w[0] <= 0.0 or np.any(np.diff(w) <= 0.0):
        raise ValueError("w must be finite, positive and strictly increasing (rad/s)")
    h = np.asarray(response)
    if h.shape[-1:] != w.shape:
        raise ValueError(f"response last axis {h.shape[-1:]} does not match w {w.shape}")
    h = h.astype(complex)
    if not np.all(np.isfinite(h)) or (not log_response and np.any(h == 0)):
        raise ValueError("response must be finite and non-zero")
    zero_b = np.broadcast_to(np.asarray(inv_t_theta2, dtype=float), h.shape[:-1])
    if not np.all(np.isfinite(zero_b)):
        raise ValueError("inv_t_theta2 must be finite (1/s)")
    if free_zero and np.any(zero_b <= 0.0):
        raise ValueError("with free_zero=True, inv_t_theta2 (start) must be > 0 (1/s)")
    max_iterations = int(max_iterations)
    if max_iterations < 0:
        raise ValueError("max_iterations must be >= 0")
    return w, h, zero_b, max_iterations


def _fit_starts(log_h, zero, args, starts):
    """Best fit per system over the starts `starts` asks for: (params, gain sign, converged, cost, fallback).

    ``args`` is ``(w, free_zero, max_iterations)`` of :func:`_fit_from`.
    """
    n_sys = log_h.shape[0]
    if starts != "all" and starts not in _BOUND:
        raise ValueError(f"starts must be 'fallback', 'basin' or 'all', not {starts!r}")
    if starts == "all":
        par_b, sign_b, conv_b, cost_b = _fit_from(log_h, zero, *args, _START_SPREAD)
        return par_b, sign_b, conv_b, cost_b, np.ones(n_sys, bool)
    # the data-derived start alone; all starts only where it does not converge or
    # leaves a large mismatch (each system decided on its own)
    par_b, sign_b, conv_b, cost_b = _fit_from(log_h, zero, *args, _START_SPREAD[:1])
    # a pair that drifted off along the first-order valley is not repeated: every start
    # drifts the same way there (the fit is unusable whatever the start)
    drifted = ~conv_b & (par_b[:, _Z] > _ASINH_DRIFT_ZETA)
    fallback = (~conv_b & ~drifted) | ~(cost_b <= _BOUND[starts])
    if np.any(fallback):
        k = np.nonzero(fallback)[0]
        p2, s2, c2, j2 = _fit_from(log_h[k], zero[k], *args, _START_SPREAD)
        better = j2 < cost_b[k]
        kb = k[better]
        par_b[kb], sign_b[kb], conv_b[kb], cost_b[kb] = p2[better], s2[better], c2[better], j2[better]
    return par_b, sign_b, conv_b, cost_b, fallback


def _fit_from(log_h, zero, w, free_zero, max_iterations, spread):
    """Best fit per system from the starts of ``spread``: (params, gain sign, converged, cost)."""
    n_sys, nw = log_h.shape
    scale = np.sqrt(20.0 / nw)
    start = _starting_points(w, log_h, zero, free_zero, spread)  # (N, S, p)
    n_start, p = start.shape[1], start.shape[2]
    rows = start.reshape(n_sys * n_start, p)
    zero_rows = np.repeat(zero, n_start)

    # Box: tau_e >= 0; zeta_e, w_e, 1/T_theta2 within wide limits that only
    # keep degenerate fits (a real pole pair drifting apart) finite.
    lower = np.full(p, -np.inf)
    upper = np.full(p, np.inf)
    lower[_LN_W], upper[_LN_W] = np.log(w[0] * _W_RANGE), np.log(w[-1] / _W_RANGE)
    lower[_Z], upper[_Z] = np.arcsinh(_ZETA_RANGE)
    lower[_TAU] = 0.0
    if free_zero:
        lower[_LN_ZERO], upper[_LN_ZERO] = np.log(w[0] * _W_RANGE), np.log(w[-1] / _W_RANGE)
    rows = np.clip(rows, lower, upper)

    # Data side of the log residual; the fixed zero is moved onto it.
    target = log_h if free_zero else log_h - np.log(1j * w + zero[:, None])
    target = np.repeat(target, n_start, axis=0)
    # Sign of Kq and starting tau_e per start: the best pair of a scan.
    tau0, sign_rows = _scan_delay_and_sign(rows, target, zero_rows, w, free_zero, scale)
    rows[:, _TAU] = tau0
    target = target - 1j * np.pi * (sign_rows < 0)[:, None]

    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        par, cost, conv = _levenberg_marquardt(
            rows, target, zero_rows, w, free_zero, scale, max_iterations,
            lower, upper, n_start,
        )
    cost = np.where(np.isfinite(cost), cost, np.inf).reshape(n_sys, n_start)
    best = np.argmin(cost, axis=1)
    idx = np.arange(n_sys) * n_start + best
    return par[idx], sign_rows[idx], conv[idx], cost[np.arange(n_sys), best]
