"""Stationary covariance of linear systems driven by white noise, and Rice's formula.

* :func:`solve_lyapunov`: the continuous Lyapunov equation ``A P + P A^T + Q = 0``,
  batched, by its vectorised (Kronecker) form restricted to the ``n (n + 1) / 2``
  independent entries of the symmetric ``P``: one dense linear solve of that size per
  batch member (stacked ``np.linalg.solve``), exact up to rounding. For the small systems
  of a pitch-damper loop (typically 6 to 16 states) this is cheaper than a Schur-based
  Bartels-Stewart solver run one system at a time.
* :func:`crossing_rate`: Rice's formula for the expected rate at which a zero-mean
  stationary Gaussian process crosses a level.
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np

#: Largest number of entries of the stacked vectorised systems built at once (memory bound:
#: 32 MB of float64); at most :data:`CHUNK` batch members per stacked call.
MAX_ENTRIES = 4_000_000
CHUNK = 256


def _sym_indices(n: int):
    i, j = np.triu_indices(n)
    return i, j


@lru_cache(maxsize=64)
def _operator_pattern(n: int):
    """Where each of the four terms of :func:`lyapunov_operator` is non-zero.

    Returns four ``(rows, cols, a_rows, a_cols)`` index tuples: the term adds
    ``A[a_rows, a_cols]`` at ``M[rows, cols]`` (within one term the positions are distinct).
    """
    i, j = _sym_indices(n)
    k, l = i[:, None], j[:, None]
    ci, cj = i[None, :], j[None, :]
    off = ci != cj
    terms = (
        (cj == l, k, ci),  # A_ki d_jl
        (k == ci, l, cj),  # d_ki A_lj
        (off & (ci == l), k, cj),  # A_kj d_il
        (off & (k == cj), l, ci),  # d_kj A_li
    )
    out = []
    for mask, a_row, a_col in terms:
        rows, cols = np.nonzero(mask)
        out.append((rows, cols, np.broadcast_to(a_row, mask.shape)[rows, cols],
                    np.broadcast_to(a_col, mask.shape)[rows, cols]))
    return tuple(out)


def lyapunov_operator(A):
    """Matrix of ``P -> A P + P A^T`` on the upper-triangular entries of a symmetric ``P``.

    Parameters
    ----------
    A : ndarray, shape ``(..., n, n)``

    Returns
    -------
    M : ndarray, shape ``(..., m, m)``, ``m = n (n + 1) / 2``
        Row ``(k, l)`` and column ``(i, j)`` (both with ``k <= l``, ``i <= j``, in the order
        of ``np.triu_indices(n)``) hold the coefficient of ``P_ij`` in
        ``(A P + P A^T)_kl``::

            A_ki d_jl + d_ki A_lj + [i != j] (A_kj d_il + d_kj A_li)

        (``d`` the Kronecker delta; the bracket counts ``P_ji = P_ij`` once more). Only the
        ``O(n^3)`` non-zero entries are written.
    """
    A = np.asarray(A, dtype=float)
    n = A.shape[-1]
    m = n * (n + 1) // 2
    M = np.zeros(A.shape[:-2] + (m, m))
    for rows, cols, a_rows, a_cols in _operator_pattern(n):
        M[..., rows, cols] += A[..., a_rows, a_cols]
    return M


def solve_lyapunov(A, Q):
    """Solve ``A P + P A^T + Q = 0`` for symmetric ``P``, batched.

    Parameters
    ----------
    A : ndarray, shape ``(..., n, n)``
        State matrix, 1/s. Every member must be stable (eigenvalues in the open left
        half-plane) for ``P`` to be the stationary covariance; a member with two
        eigenvalues summing to zero makes the system singular (``LinAlgError``), so screen
        unstable members out first.
    Q : ndarray, shape ``(..., n, n)``
        Symmetric noise intensity ``B W B^T`` (state units squared per second).

    Returns
    -------
    P : ndarray, shape ``(..., n, n)``
        Symmetric solution (state units squared).

    Notes
    -----
    The ``n (n + 1) / 2`` upper-triangular entries of ``P`` solve ``M p = -q`` with ``M``
    from :func:`lyapunov_operator` and ``q`` the same entries of ``Q``; members are solved
    :data:`CHUNK` at a time (fewer for large ``n``, :data:`MAX_ENTRIES`).
    """
    A = np.asarray(A, dtype=float)
    Q = np.asarray(Q, dtype=float)
    shape = np.broadcast_shapes(A.shape[:-2], Q.shape[:-2])
    n = A.shape[-1]
    A = np.broadcast_to(A, shape + (n, n)).reshape(-1, n, n)
    Q = np.broadcast_to(Q, shape + (n, n)).reshape(-1, n, n)
    i, j = _sym_indices(n)
    P = np.empty_like(A)
    m = n * (n + 1) // 2
    chunk = int(max(1, min(CHUNK, MAX_ENTRIES // (m * m))))
    for start in range(0, A.shape[0], chunk):
        stop = start + chunk
        M = lyapunov_operator(A[start:stop])
        rhs = -0.5 * (Q[start:stop, i, j] + Q[start:stop, j, i])
        p = np.linalg.solve(M, rhs[..., None])[..., 0]
        P[start:stop, i, j] = p
        P[start:stop, j, i] = p
    return P.reshape(shape + (n, n))


def quadratic_form(P, row):
    """``row P row^T``: the variance of the output ``y = row x``, batched.

    Parameters
    ----------
    P : ndarray, shape ``(..., n, n)``
        State covariance.
    row : ndarray, shape ``(..., n)``
        Output per state.
    """
    return np.einsum("...i,...ij,...j->...", row, P, row)


def crossing_rate(sigma, sigma_rate, level, both_signs=True):
    """Rice's expected rate of crossings of a level by a zero-mean stationary Gaussian process.

    Parameters
    ----------
    sigma : array_like
        rms of the process ``x``, in its units (>= 0).
    sigma_rate : array_like
        rms of its derivative ``x'``, in its units per s.
    level : array_like
        ``a`` (> 0), in the units of ``x``.
    both_signs : bool
        True (default): count the up-crossings of ``+a`` plus the down-crossings of ``-a``,
        the rate at which ``|x|`` exceeds ``a``; False: the up-crossings of ``+a`` only.

    Returns
    -------
    ndarray
        Expected crossings per s. Rice's formula for the up-crossings of ``a``::

            nu_a = sigma_rate / (2 pi sigma) exp(-a^2 / (2 sigma^2))

        doubled with ``both_signs`` (the process is symmetric). A process that is
        identically zero (``sigma = 0``) never crosses a positive level: 0. NaN where
        `sigma` or `sigma_rate` is NaN; infinite where `sigma_rate` is infinite and
        `sigma` positive.
    """
    s = np.asarray(sigma, dtype=float)
    sd = np.asarray(sigma_rate, dtype=float)
    a = np.asarray(level, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        up = sd / (2.0 * np.pi * s) * np.exp(-(a * a) / (2.0 * s * s))
    up = np.where((s == 0.0) & np.isfinite(sd), 0.0, up)
    return 2.0 * up if both_signs else up


def level_for_crossing_rate(sigma, sigma_rate, rate, both_signs=True):
    """The level ``a`` whose Rice crossing rate is `rate` (inverse of :func:`crossing_rate`).

    ``a = sigma sqrt(2 ln(c sigma_rate / (2 pi sigma rate)))`` with ``c = 2`` for both
    signs, 1 otherwise; 0 where even the level 0 is crossed less often than `rate`
    (units of `sigma`; per s for the rates).
    """
    s = np.asarray(sigma, dtype=float)
    sd = np.asarray(sigma_rate, dtype=float)
    c = 2.0 if both_signs else 1.0
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = c * sd / (2.0 * np.pi * s * np.asarray(rate, dtype=float))
        return s * np.sqrt(2.0 * np.log(np.maximum(ratio, 1.0)))
