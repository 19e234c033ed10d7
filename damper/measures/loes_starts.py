"""Starting points of the low-order equivalent-system fit: the data-derived start, the spread of
further starts, the scan of delay and gain sign, and the merging of starts that meet.

Split from :mod:`damper.measures.equivalent` (which documents the method) so that each module
has one job.
"""

from __future__ import annotations

import numpy as np

from .loes_residuals import _DEG_PER_RAD, _LN_K, _LN_W, _LN_ZERO, _TAU, _Z, PHASE_WEIGHT, _evaluate, _wrap

# Starts of one system closer than this in every parameter (log units; asinh zeta_e; s for tau_e)
# are taken to be in one basin and merged.
_MERGE_TOL = 1e-2


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
