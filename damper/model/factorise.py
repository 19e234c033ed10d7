"""Real polynomials of any degree as products of real factors of degree at most two (batched).

The margins and handling measures see a loop only through factors ``c0 + c1 s + c2 s^2``
(:mod:`damper.model.rational`). An element gives them as they stand; an airframe whose
polynomials are of degree three or four (:mod:`damper.model.longitudinal`) is factorised
here, numerically, from its roots:

* roots at the origin are counted exactly (coefficients that are exactly zero at the low
  end) and kept as exact zeros;
* the other roots are the eigenvalues of the companion matrix of the rest (stacked
  ``np.linalg.eigvals``, which balances the matrix first); a real matrix gives real roots
  with an imaginary part of exactly zero and complex roots in exact conjugate pairs;
* the roots are ordered complex pairs first (by real part, then imaginary part), then real
  roots ascending, then the padding; consecutive roots make one factor: a conjugate pair
  ``s^2 - 2 Re(l) s + |l|^2``, two real roots ``(s - r1)(s - r2)``, a last odd real root
  ``s - r``, nothing ``1``.

Every polynomial of the batch gets the same number of factors (``slots``), so the
structure is the same for every member; only the values (and so which factor is
quadratic, linear or constant) differ. A polynomial of degree at most two is returned as it
stands in the first factor (no rounding from a root computation), the rest ``1``.
"""

from __future__ import annotations

import numpy as np


def _degree(coef):
    """Degree of each row (highest nonzero coefficient; 0 for a constant or zero row)."""
    nonzero = coef != 0
    size = coef.shape[-1]
    return np.where(nonzero.any(-1), size - 1 - np.argmax(nonzero[..., ::-1], -1), 0)


def _origin_roots(coef, degree):
    """Roots at the origin: exactly zero coefficients at the low end, below the degree."""
    count = np.zeros(coef.shape[0], dtype=int)
    run = np.ones(coef.shape[0], dtype=bool)
    for k in range(coef.shape[1] - 1):
        run = run & (coef[:, k] == 0) & (k < degree)
        count = count + run
    return count


def polynomial_roots(coef):
    """Roots of each row's polynomial (lowest power first), NaN-padded: shape (M, n).

    Origin roots are exact zeros; the rest are companion-matrix eigenvalues, one stacked
    call per distinct degree (a loop over structure, not over the batch).
    """
    coef = np.asarray(coef, dtype=float)
    m, size = coef.shape
    degree = _degree(coef)
    origin = _origin_roots(coef, degree)
    core_degree = degree - origin
    out = np.full((m, max(size - 1, 1)), np.nan + 0j)
    k = np.arange(out.shape[1])
    out = np.where(k < origin[:, None], 0.0 + 0j, out)
    rows = np.arange(m)
    for d in np.unique(core_degree):
        if d < 1:
            continue
        r = rows[core_degree == d]
        o = origin[r]
        core = np.take_along_axis(coef[r], o[:, None] + np.arange(d + 1), 1)  # (len r, d + 1)
        monic = core[:, :d] / core[:, d : d + 1]
        comp = np.zeros((r.size, d, d))
        comp[:, 0, :] = -monic[:, ::-1]
        if d > 1:
            comp[:, np.arange(1, d), np.arange(d - 1)] = 1.0
        roots = np.linalg.eigvals(comp).astype(complex)
        cols = o[:, None] + np.arange(d)
        block = out[r]
        np.put_along_axis(block, cols, roots, 1)
        out[r] = block
    return out


def _ordered(roots):
    """Complex pairs first (real part, then imaginary part), real roots ascending, NaN last."""
    finite = np.isfinite(roots)
    group = np.where(~finite, 2, np.where(roots.imag != 0, 0, 1))
    re = np.where(finite, roots.real, 0.0)
    im = np.where(finite, roots.imag, 0.0)
    order = np.lexsort((im, np.abs(im), re, group), axis=-1)
    return np.take_along_axis(roots, order, -1)


def pair_factors(roots, slots):
    """Real factors ``(c0, c1, c2)`` (arrays of shape (M,)) from ordered roots, `slots` of them."""
    need = 2 * slots
    if roots.shape[1] < need:
        roots = np.concatenate([roots, np.full((roots.shape[0], need - roots.shape[1]), np.nan + 0j)], 1)
    roots = _ordered(roots)
    factors = []
    for i in range(slots):
        a, b = roots[:, 2 * i], roots[:, 2 * i + 1]
        has_a, has_b = np.isfinite(a), np.isfinite(b)
        with np.errstate(invalid="ignore"):
            c0 = np.where(has_b, (a * b).real, np.where(has_a, -a.real, 1.0))
            c1 = np.where(has_b, -(a + b).real, np.where(has_a, 1.0, 0.0))
        c2 = np.where(has_b, 1.0, 0.0)
        factors.append((c0, c1, c2))
    return factors


def real_factors(coef, slots):
    """Factors of degree at most two of every row's polynomial, the same number for every row.

    Parameters
    ----------
    coef : ndarray, shape (M, n + 1)
        Real coefficients, lowest power first (any units: the first factor carries the
        leading coefficient, so the product equals the polynomial).
    slots : int
        Number of factors (at least ``n / 2``).

    Returns
    -------
    list of `slots` tuples ``(c0, c1, c2)``
        Arrays of shape (M,); NaN for a row with a non-finite coefficient or all zero.
    """
    coef = np.asarray(coef, dtype=float)
    m = coef.shape[0]
    degree = _degree(coef)
    bad = ~np.all(np.isfinite(coef), -1) | ~np.any(coef != 0, -1)
    safe = np.where(bad[:, None], np.eye(1, coef.shape[1], coef.shape[1] - 1), coef)
    lead = np.take_along_axis(safe, degree[:, None], 1)[:, 0]
    factors = pair_factors(polynomial_roots(safe), slots)
    small = degree <= 2
    if np.any(small):
        first = tuple(safe[:, k] if k < coef.shape[1] else np.zeros(m) for k in range(3))
        factors = [
            tuple(np.where(small, first[k] if i == 0 else float(k == 0), f[k]) for k in range(3))
            for i, f in enumerate(factors)
        ]
    scale = np.where(small, 1.0, lead)
    nan = np.where(bad, np.nan, 1.0)
    return [tuple(c * (scale if i == 0 else 1.0) * nan for c in f) for i, f in enumerate(factors)]
