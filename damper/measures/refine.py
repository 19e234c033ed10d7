"""Vectorised one-dimensional root and peak refinement (every bracket of a batch at once).

Each bracket is iterated with its own stopping test and frozen once it has stopped, so a
bracket's answer never depends on the other brackets of the batch.
"""

from __future__ import annotations

import numpy as np

#: Illinois steps at most; a grid-cell bracket reaches ``ROOT_FTOL`` in 5-8.
ROOT_STEPS = 60
#: |f| at which a root is final (f is a log-magnitude in nepers or a phase in rad).
ROOT_FTOL = 1e-13
#: Relative bracket width (in the variable) at which a root is final.
ROOT_XTOL = 1e-15
#: Golden-section steps (the bracket shrinks by 0.618 per step: 60 steps are 3e-13).
GOLDEN_STEPS = 60


def illinois(fn, lo, hi, f_lo, f_hi):
    """Roots of ``fn`` in brackets ``[lo, hi]`` where ``f_lo`` and ``f_hi`` differ in sign.

    The Illinois variant of regula falsi (superlinear, keeps the bracket), falling back to
    bisection where the secant step is not usable.

    Parameters
    ----------
    fn : callable
        ``fn(x, active)`` -> values at ``x`` for the brackets selected by the integer index
        array ``active`` (``x`` has the shape of ``active``).
    lo, hi, f_lo, f_hi : ndarray, shape (M,)
        Bracket ends and the function values there.

    Returns
    -------
    ndarray, shape (M,)
        The end of the final bracket with the smaller ``|f|``.
    """
    a, b = np.array(lo, dtype=float), np.array(hi, dtype=float)
    fa, fb = np.array(f_lo, dtype=float), np.array(f_hi, dtype=float)
    side = np.zeros(a.shape, int)
    done = (np.minimum(np.abs(fa), np.abs(fb)) <= ROOT_FTOL) | (np.abs(b - a) <= ROOT_XTOL * np.abs(b))
    for _ in range(ROOT_STEPS):
        act = np.nonzero(~done)[0]
        if act.size == 0:
            break
        aa, bb, fa_, fb_ = a[act], b[act], fa[act], fb[act]
        with np.errstate(invalid="ignore", divide="ignore"):
            x = (aa * fb_ - bb * fa_) / (fb_ - fa_)
        bad = ~np.isfinite(x) | (x <= np.minimum(aa, bb)) | (x >= np.maximum(aa, bb))
        x = np.where(bad, 0.5 * (aa + bb), x)
        fx = fn(x, act)
        left = np.sign(fx) == np.sign(fa_)  # root between x and b
        sd = side[act]
        new_fb = np.where(left & (sd == 1), 0.5 * fb_, fb_)  # Illinois: halve the stale end
        new_fa = np.where(~left & (sd == -1), 0.5 * fa_, fa_)
        a[act] = np.where(left, x, aa)
        fa[act] = np.where(left, fx, new_fa)
        b[act] = np.where(left, bb, x)
        fb[act] = np.where(left, new_fb, fx)
        side[act] = np.where(left, 1, -1)
        done[act] = (
            (np.minimum(np.abs(fa[act]), np.abs(fb[act])) <= ROOT_FTOL)
            | (np.abs(b[act] - a[act]) <= ROOT_XTOL * np.abs(b[act]))
            | (fx == 0)
        )
    return np.where(np.abs(fa) < np.abs(fb), a, b)


def golden_bracket(fn, lo, hi, steps=GOLDEN_STEPS):
    """Golden-section search for the maximum of ``fn`` on each ``[lo, hi]``: the final bracket.

    Parameters
    ----------
    fn : callable
        ``fn(x)`` -> values, ``x`` of shape (M,); called ``steps + 2`` times.
    lo, hi : ndarray, shape (M,)
        The brackets (in the units of ``x``).
    steps : int
        Golden-section steps: each shrinks every bracket by 0.618.

    Returns
    -------
    a, b : ndarray, shape (M,)
        The final bracket.
    c, d, fc, fd : ndarray, shape (M,)
        Its two inner points and their values.
    """
    r = (np.sqrt(5.0) - 1.0) / 2.0
    a, b = np.array(lo, dtype=float), np.array(hi, dtype=float)
    c = b - r * (b - a)
    d = a + r * (b - a)
    fc, fd = fn(c), fn(d)
    for _ in range(steps):
        keep_left = fc > fd
        b = np.where(keep_left, d, b)
        a = np.where(keep_left, a, c)
        new_c = b - r * (b - a)
        new_d = a + r * (b - a)
        c_next = np.where(keep_left, new_c, d)
        d_next = np.where(keep_left, c, new_d)
        f_new = fn(np.where(keep_left, new_c, new_d))
        fc, fd = np.where(keep_left, f_new, fd), np.where(keep_left, fc, f_new)
        c, d = c_next, d_next
    return a, b, c, d, fc, fd


def golden_max(fn, lo, hi, steps=GOLDEN_STEPS):
    """Golden-section search for the maximum of ``fn`` on each ``[lo, hi]`` (:func:`golden_bracket`).

    Parameters
    ----------
    fn : callable
        ``fn(x)`` -> values, ``x`` of shape (M,).
    lo, hi : ndarray, shape (M,)

    Returns
    -------
    x, f : ndarray, shape (M,)
        The best point found and its value (the best of the final bracket's points).
    """
    _, _, c, d, fc, fd = golden_bracket(fn, lo, hi, steps)
    better = fc >= fd
    return np.where(better, c, d), np.where(better, fc, fd)
