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

#: Phase weight of the mismatch cost, 1/deg^2 relative to dB^2 (from memory
#: of the MIL-STD-1797A guidance; numerically close to pi/180).
PHASE_WEIGHT = 0.01745

_DB_PER_NEPER = 20.0 / np.log(10.0)  # dB per natural-log unit of gain
_DEG_PER_RAD = 180.0 / np.pi

# Levenberg-Marquardt controls (dimensionless).
_LAMBDA_START = 1e-3
_LAMBDA_DOWN = 1.0 / 3.0
_LAMBDA_UP = 8.0
_LAMBDA_MIN = 1e-12
_LAMBDA_MAX = 1e12
_FTOL = 1e-14  # relative cost reduction regarded as no progress
_XTOL = 1e-11  # step size (log units / s) regarded as no progress
_COST_FLOOR = 1e-26  # cost regarded as an exact fit
# Starts of one system closer than this in every parameter (log units; asinh zeta_e; s for tau_e)
# are taken to be in one basin; the checks are every _MERGE_EVERY iterations.
_MERGE_TOL = 1e-2
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

# Indices into the parameter vector.
_LN_W, _Z, _TAU, _LN_K, _LN_ZERO = 0, 1, 2, 3, 4  # _Z holds asinh(zeta_e)
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
        converge or left a mismatch above :data:`FALLBACK_MISMATCH`).
    """

    damping_ratio: np.ndarray
    natural_frequency: np.ndarray
    time_delay: np.ndarray
    gain: np.ndarray
    inv_t_theta2: np.ndarray
    mismatch: np.ndarray
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


# ---------------------------------------------------------------------------
# model, residuals, Jacobian


_TWO_PI = 2.0 * np.pi
_INV_TWO_PI = 1.0 / _TWO_PI


def _wrap(x: np.ndarray) -> np.ndarray:
    """Wrap an angle in rad into [-pi, pi] (``x - 2 pi round(x / 2 pi)``: cheaper than a float modulo)."""
    return x - _TWO_PI * np.rint(x * _INV_TWO_PI)


def _model(params, target, w, free_zero, scale):
    """Residual parts and the model terms both the full and the structured forms need.

    Returns ``(r_g, r_p, w_e2, d_re, d_im, mag2, zero, n_mag2)``: gain and phase
    residuals (M, nw) (already scaled so that ``sum(r_g^2 + r_p^2) = J``), ``w_e^2``
    (M, 1), the denominator ``D(jw) = d_re + j d_im`` and ``|D|^2`` (M, nw), and with a free
    zero its value (M, 1) and ``|jw + zero|^2`` (M, nw) (None otherwise).
    """
    w_e = np.exp(params[:, _LN_W])[:, None]
    zeta = np.sinh(params[:, _Z])[:, None]
    tau = params[:, _TAU][:, None]
    ln_k = params[:, _LN_K][:, None]
    # denominator D(jw) = (w_e^2 - w^2) + j (2 zeta w_e w)
    w_e2 = w_e * w_e
    d_re = w_e2 - w * w
    d_im = (2.0 * zeta * w_e) * w
    mag2 = d_re * d_re + d_im * d_im
    log_gain = ln_k - 0.5 * np.log(mag2) - target.real  # natural-log units
    phase = -tau * w - np.arctan2(d_im, d_re) - target.imag  # rad
    zero = n_mag2 = None
    if free_zero:
        zero = np.exp(params[:, _LN_ZERO])[:, None]
        n_mag2 = zero * zero + w * w
        log_gain = log_gain + 0.5 * np.log(n_mag2)
        phase = phase + np.arctan2(w, zero)
    r_g = (scale * _DB_PER_NEPER) * log_gain
    r_p = (scale * np.sqrt(PHASE_WEIGHT) * _DEG_PER_RAD) * _wrap(phase)
    return r_g, r_p, w_e2, d_re, d_im, mag2, zero, n_mag2


def _evaluate(params, target, zero_fixed, w, free_zero, scale, want_jac=True):
    """Residuals, cost and (optionally) Jacobian for a stack of parameter rows.

    ``params`` (M, p); ``target`` (M, nw) complex: natural log of the data
    minus ``i pi`` for a negative gain sign and, with a fixed zero, minus
    ``ln(jw + 1/T_theta2)``; ``zero_fixed`` (M,) 1/s (unused when the zero is
    free); ``w`` (nw,) rad/s.  Returns residuals (M, 2 nw), cost (M,) and
    Jacobian (M, 2 nw, p), all in real arithmetic.
    """
    r_g, r_p, w_e2, d_re, d_im, mag2, zero, n_mag2 = _model(params, target, w, free_zero, scale)
    nw = w.size
    c_gain = scale * _DB_PER_NEPER
    c_phase = scale * np.sqrt(PHASE_WEIGHT) * _DEG_PER_RAD
    res = np.empty((params.shape[0], 2 * nw))
    res[:, :nw] = r_g
    res[:, nw:] = r_p
    cost = np.einsum("ij,ij->i", res, res)
    if not want_jac:
        return res, cost, None

    # d ln H_e / d p = -(dD/dp) conj(D) / |D|^2 for the denominator parameters
    jac = np.empty((params.shape[0], 2 * nw, params.shape[1]))
    inv = 1.0 / mag2
    a_re = 2.0 * w_e2  # dD/d ln w_e = 2 w_e^2 + j d_im
    jac[:, :nw, _LN_W] = -c_gain * (a_re * d_re + d_im * d_im) * inv
    jac[:, nw:, _LN_W] = -c_phase * (d_im * d_re - a_re * d_im) * inv
    # dD/d asinh(zeta) = j 2 w_e w cosh(asinh zeta)
    e_im = (2.0 * np.sqrt(w_e2) * np.cosh(params[:, _Z])[:, None]) * w
    jac[:, :nw, _Z] = -c_gain * (e_im * d_im) * inv
    jac[:, nw:, _Z] = -c_phase * (e_im * d_re) * inv
    jac[:, :nw, _TAU] = 0.0  # d/d tau = -j w
    jac[:, nw:, _TAU] = -c_phase * w
    jac[:, :nw, _LN_K] = c_gain  # d/d ln|K| = 1
    jac[:, nw:, _LN_K] = 0.0
    if free_zero:  # d ln(jw + z)/d ln z = z (z - jw) / (z^2 + w^2)
        jac[:, :nw, _LN_ZERO] = c_gain * zero * zero / n_mag2
        jac[:, nw:, _LN_ZERO] = -c_phase * zero * w / n_mag2
    return res, cost, jac


def _normal_equations(params, target, zero, w, free_zero, scale):
    """Cost, normal matrix ``J^T J`` and gradient ``J^T r`` without forming ``J``.

    Same inputs as :func:`_evaluate`.  The Jacobian's structure is used: the
    ``ln|Kq|`` column is a constant on the gain rows and zero on the phase
    rows, the ``tau_e`` column zero on the gain rows and ``-c w`` on the phase
    rows, so only the ``ln w_e``, ``zeta_e`` (and free-zero) columns are
    evaluated and the products are formed as row sums.  Returns cost (M,),
    normal matrix (M, p, p) and gradient (M, p), equal to ``J^T J`` and
    ``J^T r`` of :func:`_evaluate` to rounding.
    """
    m_rows, p = params.shape
    r_g, r_p, w_e2, d_re, d_im, mag2, zero_r, n_mag2 = _model(params, target, w, free_zero, scale)
    inv = 1.0 / mag2
    c_gain = scale * _DB_PER_NEPER
    c_phase = scale * np.sqrt(PHASE_WEIGHT) * _DEG_PER_RAD

    # columns of J (without the constant factors c_gain, c_phase)
    im2 = d_im * d_im * inv
    cross = d_im * d_re * inv
    # dD/d asinh(zeta) = j 2 w_e w cosh(asinh zeta) (over |D|^2)
    e_im = (2.0 * np.sqrt(w_e2) * np.cosh(params[:, _Z])[:, None]) * w * inv
    g_z = -e_im * d_im  # gain rows, d/d asinh zeta
    p_z = -e_im * d_re  # phase rows, d/d asinh zeta
    g_w = -im2 - 2.0 * w_e2 * d_re * inv  # -(2 w_e^2 d_re + d_im^2) / |D|^2
    p_w = 2.0 * w_e2 * d_im * inv - cross  # -(d_im d_re - 2 w_e^2 d_im) / |D|^2
    cols_g = [g_w, g_z]
    cols_p = [p_w, p_z]
    if free_zero:
        cols_g.append(zero_r * zero_r / n_mag2)  # d ln(jw + z)/d ln z = z (z - jw) / (z^2 + w^2)
        cols_p.append(-zero_r * w / n_mag2)
    idx = [_LN_W, _Z] + ([_LN_ZERO] if free_zero else [])
    cg2, cp2 = c_gain * c_gain, c_phase * c_phase

    def dot(a, b):
        return np.einsum("ij,ij->i", a, b)

    normal = np.zeros((m_rows, p, p))
    grad = np.empty((m_rows, p))
    sum_w2 = float(w @ w)
    for a, ia in enumerate(idx):
        ga, pa = cols_g[a], cols_p[a]
        for b in range(a, len(idx)):
            v = cg2 * dot(ga, cols_g[b]) + cp2 * dot(pa, cols_p[b])
            normal[:, ia, idx[b]] = v
            normal[:, idx[b], ia] = v
        v = -cp2 * np.einsum("ij,j->i", pa, w)
        normal[:, ia, _TAU] = v
        normal[:, _TAU, ia] = v
        v = cg2 * ga.sum(axis=1)
        normal[:, ia, _LN_K] = v
        normal[:, _LN_K, ia] = v
        grad[:, ia] = c_gain * dot(ga, r_g) + c_phase * dot(pa, r_p)
    normal[:, _TAU, _TAU] = cp2 * sum_w2
    normal[:, _LN_K, _LN_K] = cg2 * w.size
    grad[:, _TAU] = -c_phase * np.einsum("ij,j->i", r_p, w)
    grad[:, _LN_K] = c_gain * r_g.sum(axis=1)
    cost = dot(r_g, r_g) + dot(r_p, r_p)
    return cost, normal, grad


# ---------------------------------------------------------------------------
# starting points


def _interp_log_crossing(w, y, level):
    """First downward crossing of ``level`` by rows of ``y`` (M, nw).

    Returns the log-interpolated frequency (rad/s), ``w[-1]`` when the level
    is never reached, and ``w[0]`` when ``y`` starts at or below it.
    """
    below = y <= level
    first = np.argmax(below, axis=1)
    never = ~below.any(axis=1)
    at_start = below[:, 0]
    lo = np.clip(first - 1, 0, w.size - 2)
    rows = np.arange(y.shape[0])
    y0, y1 = y[rows, lo], y[rows, lo + 1]
    with np.errstate(invalid="ignore", divide="ignore"):
        frac = np.clip((y0 - level) / (y0 - y1), 0.0, 1.0)
    frac = np.where(np.isfinite(frac), frac, 0.5)
    lw = np.log(w)
    out = np.exp(lw[lo] + frac * (lw[lo + 1] - lw[lo]))
    out = np.where(never, w[-1], out)
    out = np.where(at_start, w[0], out)
    return out


def _data_start(w, log_h, zero):
    """Data-derived (w_e rad/s, zeta_e) for each row, assuming tau_e = 0.

    Removes the numerator zero from the data, measures the phase relative to
    the low-frequency branch (0 or 180 deg), takes the -90 deg point as w_e
    and the gain drop from the low-frequency level at that point as
    ``1 / (2 zeta_e)``.
    """
    log_r = log_h - np.log(1j * w + zero[:, None])
    phase = np.unwrap(log_r.imag, axis=1)
    phase = phase - np.pi * np.round(phase[:, :1] / np.pi)
    w_d = _interp_log_crossing(w, phase, -0.5 * np.pi)
    lw = np.log(w)
    level_at = _interp_rows(lw, log_r.real, np.log(w_d))
    zeta_d = 0.5 * np.exp(log_r.real[:, 0] - level_at)
    zeta_d = np.clip(zeta_d, 0.05, 5.0)
    return w_d, zeta_d


def _interp_rows(x, y, xq):
    """Row-wise linear interpolation of ``y`` (M, n) on common ``x`` at ``xq`` (M,)."""
    idx = np.clip(np.searchsorted(x, xq) - 1, 0, x.size - 2)
    rows = np.arange(y.shape[0])
    t = np.clip((xq - x[idx]) / (x[idx + 1] - x[idx]), 0.0, 1.0)
    return y[rows, idx] + t * (y[rows, idx + 1] - y[rows, idx])


#: A single-start fit whose mismatch J is above this is repeated from every start (the data-
#: derived start found a poor basin); dimensionless, as J.
FALLBACK_MISMATCH = 20.0

# Starts as (zeta_e, multiplier of the data-derived w_e); "data" stands for
# the data-derived damping ratio.
_START_SPREAD = (
    ("data", 1.0),
    (0.3, 1.0),
    (0.7, 1.0),
    (1.5, 1.0),
    (0.7, 0.5),
    (0.7, 2.0),
)


def _starting_points(w, log_h, zero, free_zero, spread=_START_SPREAD):
    """Stacked starting parameters, shape (N, S, p), for S starts per system.

    ``tau_e`` starts at 0 s; ``ln|Kq|`` of each start is the closed-form
    least-squares fit of the dB level given the start's w_e and zeta_e.
    """
    n_sys = log_h.shape[0]
    w_d, zeta_d = _data_start(w, log_h, zero)
    p = 5 if free_zero else 4
    starts = []
    w2 = w * w
    level = log_h.real - np.log(np.hypot(zero[:, None], w))  # ln|H / (jw + zero)|, no overflow
    for zeta_spec, w_mult in spread:
        zeta = zeta_d if zeta_spec == "data" else np.full(n_sys, float(zeta_spec))
        w_e = w_d * w_mult
        par = np.zeros((n_sys, p))
        par[:, _LN_W] = np.log(w_e)
        par[:, _Z] = np.arcsinh(zeta)
        par[:, _TAU] = 0.0
        if free_zero:
            par[:, _LN_ZERO] = np.log(zero)
        d_re = (w_e**2)[:, None] - w2
        d_im = (2.0 * zeta * w_e)[:, None] * w
        # mean of ln|H| - ln|(jw + zero) / D(jw)|
        par[:, _LN_K] = np.mean(level + 0.5 * np.log(d_re * d_re + d_im * d_im), axis=1)
        starts.append(par)
    params = np.stack(starts, axis=1)  # (N, S, p)
    return params


def _scan_delay_and_sign(rows, target, zero, w, free_zero, scale):
    """Starting ``tau_e`` (s) and sign of ``Kq`` for each start row.

    The gain part of the cost does not depend on ``tau_e`` or the sign, so
    the phase part alone is scanned over the sign (+-1) and delays
    ``0 .. 5 / w[-1]`` s (0 to 0.5 s for the default band): first in steps of
    ``0.3 / w[-1]`` s (0.3 rad of phase at the top frequency), then at
    ``+-0.1`` and ``+-0.2 / w[-1]`` s around the best step, so the delay is
    found to ``0.1 / w[-1]`` s (0.01 s).  The wrapped phase mismatch makes
    the cost multi-modal in ``tau_e`` once ``tau_e w`` exceeds about pi, so
    starting every row at zero delay can trap large-delay systems in a poor
    basin; the minima of the phase cost are smooth (its kinks, where a term
    wraps, are maxima of that term), so a basin narrower than the coarse step
    needs kinks closer than 0.3 rad at the top frequency and is rare; the
    Levenberg-Marquardt iteration then finds the bottom.  With the phase mismatch ``x`` of the positive sign wrapped into
    [-pi, pi], that of the negative sign wraps to ``pi - |x|`` in magnitude,
    so both signs cost one wrap.  Returns (tau (M,), sign (M,)).
    """
    start = rows.copy()
    start[:, _TAU] = 0.0
    nw = w.size
    res0 = _evaluate(start, target, zero, w, free_zero, scale, want_jac=False)[0]
    c_phase = scale * np.sqrt(PHASE_WEIGHT) * _DEG_PER_RAD
    phase0 = res0[:, nw:] / c_phase  # rad, wrapped, at tau = 0 and sign +
    n_rows = rows.shape[0]
    best_cost = np.full(n_rows, np.inf)
    best_tau = np.zeros(n_rows)
    best_sign = np.ones(n_rows)
    pi2_n = nw * np.pi * np.pi

    def try_taus(taus):
        nonlocal best_cost, best_tau, best_sign
        for tau in taus:  # tau: scalar or (M,) s
            x = _wrap(phase0 - np.multiply.outer(tau, w) if np.ndim(tau) else phase0 - tau * w)
            sq = np.einsum("ij,ij->i", x, x)
            cost_minus = pi2_n - 2.0 * np.pi * np.abs(x).sum(axis=1) + sq
            for cost, sgn in ((sq, 1.0), (cost_minus, -1.0)):
                better = cost < best_cost
                best_cost = np.where(better, cost, best_cost)
                best_tau = np.where(better, tau, best_tau)
                best_sign = np.where(better, sgn, best_sign)

    step = 0.1 / w[-1]
    try_taus(np.arange(0, 51, 3) * step)
    coarse = best_tau.copy()
    try_taus([np.maximum(coarse + k * step, 0.0) for k in (-2, -1, 1, 2)])
    return best_tau, best_sign


# ---------------------------------------------------------------------------
# the batched solver


def _merged_starts(params, cost, alive, n_start):
    """Rows to drop because a better start of the same system is at the same point.

    Rows are system-major (``row = system * n_start + start``).  Two live starts of
    one system whose parameters all agree within :data:`_MERGE_TOL` (log units, asinh zeta_e, and
    s for ``tau_e``) are in the same basin; the one with the higher cost (the later
    start on a tie) is dropped.  The best start of every cluster always survives, and
    its cost only falls afterwards, so dropping never changes which basin wins.
    Returns a bool mask over the rows.
    """
    m_rows, p = params.shape
    n_sys = m_rows // n_start
    live_all = alive.reshape(n_sys, n_start)
    sel = np.nonzero(live_all.sum(axis=1) >= 2)[0]  # systems with starts to compare
    drop_all = np.zeros((n_sys, n_start), dtype=bool)
    if sel.size == 0:
        return drop_all.reshape(m_rows)
    par = params.reshape(n_sys, n_start, p)[sel]
    c = cost.reshape(n_sys, n_start)[sel]
    live = live_all[sel]
    drop = np.zeros((sel.size, n_start), dtype=bool)
    for a in range(n_start - 1):
        for b in range(a + 1, n_start):
            close = live[:, a] & live[:, b]
            close &= np.all(np.abs(par[:, a] - par[:, b]) <= _MERGE_TOL, axis=1)
            b_worse = c[:, b] >= c[:, a]
            drop[:, b] |= close & b_worse
            drop[:, a] |= close & ~b_worse
    drop_all[sel] = drop
    return drop_all.reshape(m_rows)


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
    starts: str = "fallback",
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
    starts : {"fallback", "all"}, optional
        ``"fallback"`` (default): the data-derived start alone, and all six starts only for
        a system whose single fit does not converge or leaves a mismatch above
        :data:`FALLBACK_MISMATCH`; ``"all"``: six starts for every system.

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
    batch = h.shape[:-1]
    zero_b = np.broadcast_to(np.asarray(inv_t_theta2, dtype=float), batch)
    if not np.all(np.isfinite(zero_b)):
        raise ValueError("inv_t_theta2 must be finite (1/s)")
    if free_zero and np.any(zero_b <= 0.0):
        raise ValueError("with free_zero=True, inv_t_theta2 (start) must be > 0 (1/s)")
    max_iterations = int(max_iterations)
    if max_iterations < 0:
        raise ValueError("max_iterations must be >= 0")

    n_sys = int(np.prod(batch, dtype=int))
    nw = w.size
    log_h = h.reshape(n_sys, nw) if log_response else np.log(h.reshape(n_sys, nw))
    zero = zero_b.reshape(n_sys).astype(float)
    args = (w, free_zero, max_iterations)
    if starts == "all":
        par_b, sign_b, conv_b, cost_b = _fit_from(log_h, zero, *args, _START_SPREAD)
        fallback = np.ones(n_sys, bool)
    else:
        # the data-derived start alone; all starts only where it does not converge or
        # leaves a large mismatch (each system decided on its own)
        par_b, sign_b, conv_b, cost_b = _fit_from(log_h, zero, *args, _START_SPREAD[:1])
        # a pair that drifted off along the first-order valley is not repeated: every start
        # drifts the same way there (the fit is unusable whatever the start)
        drifted = ~conv_b & (par_b[:, _Z] > _ASINH_DRIFT_ZETA)
        fallback = (~conv_b & ~drifted) | ~(cost_b <= FALLBACK_MISMATCH)
        if np.any(fallback):
            k = np.nonzero(fallback)[0]
            p2, s2, c2, j2 = _fit_from(log_h[k], zero[k], *args, _START_SPREAD)
            better = j2 < cost_b[k]
            kb = k[better]
            par_b[kb], sign_b[kb], conv_b[kb], cost_b[kb] = p2[better], s2[better], c2[better], j2[better]

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
