"""Residuals, Jacobian and normal equations of the low-order equivalent-system fit.

The model ``H_e(s) = Kq (s + 1/T_theta2) exp(-tau_e s) / (s^2 + 2 zeta_e w_e s + w_e^2)`` against
the data, in the parameters and weighting of :mod:`damper.measures.equivalent` (which documents
the method); split from it so that each module has one job.
"""

from __future__ import annotations

import numpy as np

#: Weight of the squared phase difference (deg^2) against the gain difference (dB^2) in the
#: mismatch (MIL-STD-1797A guidance, from memory).
PHASE_WEIGHT = 0.01745

_DB_PER_NEPER = 20.0 / np.log(10.0)  # dB per natural-log unit of gain
_DEG_PER_RAD = 180.0 / np.pi
# Parameter indices (ln w_e; asinh zeta_e; tau_e in s; ln |Kq|; ln 1/T_theta2).
_LN_W, _Z, _TAU, _LN_K, _LN_ZERO = 0, 1, 2, 3, 4  # _Z holds asinh(zeta_e)
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
