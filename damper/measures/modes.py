"""Modes: bare-airframe short period and closed-loop eigen-analysis (batched).

Closed-loop modes use the state-space model, so pure delays are Pade
approximants there (frequency-domain measures use exact delays).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..model import airframe as af

LN2 = float(np.log(2.0))

#: A mode outside the chosen short-period pair whose airframe participation is
#: above this fraction of the pair's weakest member makes the pick ambiguous.
AMBIGUITY_RATIO = 0.5


@dataclass(frozen=True)
class SecondOrderMode:
    """Frequency and damping of a pair of roots (arrays, batched).

    Attributes
    ----------
    natural_frequency : ndarray
        rad/s: ``sqrt(l1 l2)``; NaN when the pair has one root on each side of
        the origin (a divergence: no natural frequency).
    damping_ratio : ndarray
        ``-(l1 + l2) / (2 sqrt(l1 l2))``; above 1 for two stable real roots;
        NaN where the natural frequency is NaN.
    period : ndarray
        s, ``2 pi / w_d`` for an oscillatory pair, NaN otherwise.
    time_to_half : ndarray
        s, ``ln 2 / (zeta w_n)`` for a stable pair (slowest root for real roots:
        ``ln 2 / min|l|``), NaN when not convergent.
    time_to_double : ndarray
        s, ``ln 2 / max(Re l)`` for a pair with a root in the right half-plane, NaN otherwise.
    roots : ndarray of complex, shape (..., 2)
        The two roots, 1/s.
    """

    natural_frequency: np.ndarray
    damping_ratio: np.ndarray
    period: np.ndarray
    time_to_half: np.ndarray
    time_to_double: np.ndarray
    roots: np.ndarray


def pair_measures(l1, l2) -> SecondOrderMode:
    """Measures of a root pair (complex conjugates or two real roots), batched."""
    l1 = np.asarray(l1, dtype=complex)
    l2 = np.asarray(l2, dtype=complex)
    prod = np.real(l1 * l2)
    total = np.real(l1 + l2)
    with np.errstate(invalid="ignore", divide="ignore"):
        wn = np.where(prod > 0, np.sqrt(np.abs(prod)), np.nan)
        zeta = -total / (2.0 * wn)
        wd = np.abs(np.imag(l1))
        period = np.where(wd > 1e-12 * np.maximum(1.0, np.abs(l1)), 2.0 * np.pi / wd, np.nan)
        slow = np.maximum(np.real(l1), np.real(l2))
        half = np.where(slow < 0, LN2 / -slow, np.nan)
        double = np.where(slow > 0, LN2 / slow, np.nan)
    return SecondOrderMode(wn, zeta, period, half, double, np.stack([l1, l2], -1))


def bare_short_period(d: af.Derivatives) -> SecondOrderMode:
    """Bare-airframe short-period mode from the 2x2 state matrix.

    ``wn^2 = det A``, ``2 zeta wn = -trace A`` (for Z_alpha = 0 and Z_q = 0 this
    is the one-degree-of-freedom pitch formula ``wn^2 = -M_alpha``,
    ``2 zeta wn = -(M_q + M_alpha_dot)``).
    """
    A, _ = af.state_matrices(d)
    tr = A[..., 0, 0] + A[..., 1, 1]
    det = A[..., 0, 0] * A[..., 1, 1] - A[..., 0, 1] * A[..., 1, 0]
    disc = np.sqrt((tr * tr - 4.0 * det).astype(complex))
    l1 = 0.5 * (tr + disc)
    l2 = 0.5 * (tr - disc)
    return pair_measures(l1, l2)


@dataclass(frozen=True)
class ClosedLoopModes:
    """Closed-loop eigen-analysis (batched).

    Attributes
    ----------
    eigenvalues : ndarray of complex, shape (..., n)
        All closed-loop eigenvalues, 1/s, sorted by ascending real part then imaginary part.
    airframe_share : ndarray, shape (..., n)
        Participation of alpha and q in each eigenvalue's mode, 0..1.
    short_period : SecondOrderMode
        The pair with the largest airframe participation (a complex pair or two
        real roots), judged by its weaker member.
    ambiguous : ndarray of bool
        Another mode shares the airframe states strongly (coalescence with the
        actuator/sensor/filter modes); the modal short period is then not well defined.
    other_damping_ratio : ndarray
        Least damping ratio among the other modes (real root: 1 if stable, -1 if unstable).
    other_eigenvalue : ndarray of complex
        The corresponding eigenvalue, 1/s (NaN when there is no other mode).
    stable : ndarray of bool
        Every eigenvalue has a negative real part.
    """

    eigenvalues: np.ndarray
    airframe_share: np.ndarray
    short_period: SecondOrderMode
    ambiguous: np.ndarray
    other_damping_ratio: np.ndarray
    other_eigenvalue: np.ndarray
    stable: np.ndarray


def eigen_damping(lam):
    """Damping ratio of each eigenvalue: ``-Re(l) / |l|`` (0 at the origin)."""
    lam = np.asarray(lam, dtype=complex)
    mag = np.abs(lam)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(mag > 0, -np.real(lam) / np.where(mag > 0, mag, 1.0), 0.0)


def closed_loop_modes(A, alpha_index: int, q_index: int) -> ClosedLoopModes:
    """Eigenvalues, short-period identification and other modes of ``A`` (batched).

    Parameters
    ----------
    A : ndarray, shape (..., n, n)
        Closed-loop state matrix, 1/s.
    alpha_index, q_index : int
        State indices of the airframe's angle of attack and pitch rate.

    Notes
    -----
    The short-period pair is picked by modal participation factors
    ``p_ki = |v_ki w_ik|`` (right and left eigenvectors) summed over alpha and
    q, normalised per mode. Candidates are the best complex pair and the best
    two real roots; the candidate whose weaker member has the larger share wins
    (both roots of a short-period pair must be mostly airframe motion).
    """
    A = np.asarray(A, dtype=float)
    shape = A.shape[:-2]
    n = A.shape[-1]
    lam, V = np.linalg.eig(A)
    lam = lam.astype(complex)
    V = V.astype(complex)
    with np.errstate(all="ignore"):
        W = np.linalg.inv(V)
    p = np.abs(V * np.swapaxes(W, -1, -2))  # p[..., k, i]
    total = p.sum(-2)
    share = (p[..., alpha_index, :] + p[..., q_index, :]) / np.where(total > 0, total, 1.0)
    share = np.where(np.isfinite(share), share, 0.0)

    scale = np.maximum(1.0, np.abs(lam))
    is_real = np.abs(lam.imag) <= 1e-9 * scale
    idx = np.arange(n)

    # best complex pair (upper member)
    upper = (~is_real) & (lam.imag > 0)
    share_c = np.where(upper, share, -np.inf)
    ic = np.argmax(share_c, -1)
    score_c = np.take_along_axis(share_c, ic[..., None], -1)[..., 0]
    lam_c = np.take_along_axis(lam, ic[..., None], -1)[..., 0]
    # its conjugate partner: the lower-half eigenvalue closest to conj(lam_c)
    dist = np.where((~is_real) & (lam.imag < 0), np.abs(lam - np.conj(lam_c)[..., None]), np.inf)
    ic2 = np.argmin(dist, -1)

    # best two real roots
    share_r = np.where(is_real, share, -np.inf)
    order_r = np.argsort(-share_r, -1, kind="stable")
    ir1 = order_r[..., 0]
    ir2 = order_r[..., 1] if n > 1 else order_r[..., 0]
    score_r = np.minimum(
        np.take_along_axis(share_r, ir1[..., None], -1)[..., 0],
        np.take_along_axis(share_r, ir2[..., None], -1)[..., 0],
    )

    use_c = score_c >= score_r
    i1 = np.where(use_c, ic, ir1)
    i2 = np.where(use_c, ic2, ir2)
    l1 = np.take_along_axis(lam, i1[..., None], -1)[..., 0]
    l2 = np.take_along_axis(lam, i2[..., None], -1)[..., 0]
    l1 = np.where(use_c, l1, l1.real + 0j)
    l2 = np.where(use_c, np.conj(l1), l2.real + 0j)
    sp = pair_measures(l1, l2)

    chosen = (idx == i1[..., None]) | (idx == i2[..., None])
    s1 = np.take_along_axis(share, i1[..., None], -1)[..., 0]
    s2 = np.take_along_axis(share, i2[..., None], -1)[..., 0]
    weakest = np.minimum(s1, s2)
    best_other = np.max(np.where(chosen, -np.inf, share), -1) if n > 2 else np.full(shape, -np.inf)
    ambiguous = best_other > AMBIGUITY_RATIO * weakest

    zeta_all = eigen_damping(lam)
    zeta_other = np.where(chosen, np.inf, zeta_all)
    io = np.argmin(zeta_other, -1)
    other_zeta = np.take_along_axis(zeta_other, io[..., None], -1)[..., 0]
    other_lam = np.take_along_axis(lam, io[..., None], -1)[..., 0]
    none = ~np.isfinite(other_zeta)
    other_zeta = np.where(none, np.nan, other_zeta)
    other_lam = np.where(none, np.nan + 0j, other_lam)

    stable = np.all(lam.real < 0, -1)
    # sort eigenvalues for reporting (numpy orders complex numbers by real, then imaginary part)
    order = np.argsort(lam, -1)
    lam_sorted = np.take_along_axis(lam, order, -1)
    share_sorted = np.take_along_axis(share, order, -1)
    return ClosedLoopModes(lam_sorted, share_sorted, sp, ambiguous, other_zeta, other_lam, stable)
