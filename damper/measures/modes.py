"""Modes: bare-airframe short period and phugoid, closed-loop eigen-analysis (batched).

Closed-loop modes use the state-space model, so pure delays are Pade
approximants there (frequency-domain measures use exact delays). The short-period pair
is picked by modal participation in ``alpha`` and ``q``; with a longitudinal airframe the
phugoid pair is then picked, among the other modes, by participation in ``u`` and
``theta`` (docs/theory.md section 4). A two-state airframe has no phugoid: NaN.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..model import airframe as af
from ..model import airframes
from ..quantities import quantity

LN2 = float(np.log(2.0))

#: A mode outside the chosen short-period pair whose airframe participation is
#: above this fraction of the pair's weakest member makes the pick ambiguous (the same
#: rule, on the participation in ``u`` and ``theta``, for the phugoid).
AMBIGUITY_RATIO = 0.5
#: Default tolerances of :func:`approximation_differs` (damping ratio, absolute; natural
#: frequency, relative).
DAMPING_TOLERANCE = 0.05
FREQUENCY_TOLERANCE = 0.05


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

    natural_frequency: np.ndarray = quantity("rad/s")
    damping_ratio: np.ndarray = quantity("")
    period: np.ndarray = quantity("s")
    time_to_half: np.ndarray = quantity("s")
    time_to_double: np.ndarray = quantity("s")
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


def nan_mode(shape=()) -> SecondOrderMode:
    """A pair that does not exist (every measure NaN, roots NaN), batch shape `shape`."""
    nan = np.full(shape, np.nan)
    return SecondOrderMode(nan, nan, nan, nan, nan, np.full(tuple(shape) + (2,), np.nan + 0j))


def bare_short_period(d) -> SecondOrderMode:
    """Bare-airframe short-period mode.

    Two-state airframe: from the 2x2 state matrix, ``wn^2 = det A``, ``2 zeta wn = -trace A``
    (for Z_alpha = 0 and Z_q = 0 this is the one-degree-of-freedom pitch formula
    ``wn^2 = -M_alpha``, ``2 zeta wn = -(M_q + M_alpha_dot)``). Longitudinal airframe: the
    pair picked by participation in alpha and q from the 4x4 eigenvalues (:func:`bare_modes`).
    """
    if airframes.is_longitudinal(d):
        return bare_modes(d).short_period
    A, _ = af.state_matrices(d)
    tr = A[..., 0, 0] + A[..., 1, 1]
    det = A[..., 0, 0] * A[..., 1, 1] - A[..., 0, 1] * A[..., 1, 0]
    disc = np.sqrt((tr * tr - 4.0 * det).astype(complex))
    l1 = 0.5 * (tr + disc)
    l2 = 0.5 * (tr - disc)
    return pair_measures(l1, l2)


def bare_phugoid(d) -> SecondOrderMode:
    """Bare-airframe phugoid: picked by participation in u and theta; NaN for a two-state airframe."""
    if airframes.is_longitudinal(d):
        return bare_modes(d).phugoid
    A, _ = af.state_matrices(d)
    return nan_mode(A.shape[:-2])


def bare_modes(d) -> "ClosedLoopModes":
    """Eigen-analysis of the bare airframe's own state matrix (either model), as for a closed loop.

    For a two-state airframe the short period equals :func:`bare_short_period` to rounding
    and the phugoid is NaN.
    """
    A, _ = airframes.state_matrices(d)
    names = airframes.state_names(d)
    at = {name: i for i, name in enumerate(names)}
    return closed_loop_modes(A, at["alpha"], at["q"], at.get("u"), at.get("theta"))


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
        Least damping ratio among the other modes (neither the short period nor the
        phugoid; a real root counts 1 if stable, -1 if unstable).
    other_eigenvalue : ndarray of complex
        The corresponding eigenvalue, 1/s (NaN when there is no other mode).
    stable : ndarray of bool
        Every eigenvalue has a negative real part.
    phugoid : SecondOrderMode
        The pair, among the modes other than the short period, with the largest
        participation in u and theta (NaN without a longitudinal airframe).
    phugoid_ambiguous : ndarray of bool
        A mode outside both pairs takes part in u and theta above half as much as the
        phugoid's weaker member (False without a longitudinal airframe).
    speed_share : ndarray, shape (..., n)
        Participation of u and theta in each eigenvalue's mode, 0..1 (NaN without a
        longitudinal airframe), in the order of `eigenvalues`.
    """

    eigenvalues: np.ndarray
    airframe_share: np.ndarray
    short_period: SecondOrderMode
    ambiguous: np.ndarray
    other_damping_ratio: np.ndarray
    other_eigenvalue: np.ndarray
    stable: np.ndarray
    phugoid: SecondOrderMode
    phugoid_ambiguous: np.ndarray
    speed_share: np.ndarray


def eigen_damping(lam):
    """Damping ratio of each eigenvalue: ``-Re(l) / |l|`` (0 at the origin)."""
    lam = np.asarray(lam, dtype=complex)
    mag = np.abs(lam)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(mag > 0, -np.real(lam) / np.where(mag > 0, mag, 1.0), 0.0)


def _take(x, i):
    return np.take_along_axis(x, i[..., None], -1)[..., 0]


def _pick_pair(lam, share, is_real):
    """The pair of eigenvalues with the largest `share` (judged by its weaker member).

    Candidates are the best complex pair and the best two real roots; excluded modes have
    a share of ``-inf``. Returns the indices ``i1, i2`` and the roots ``l1, l2`` (a complex
    pair as exact conjugates, real roots with zero imaginary part).
    """
    n = lam.shape[-1]
    # best complex pair (upper member)
    upper = (~is_real) & (lam.imag > 0)
    share_c = np.where(upper, share, -np.inf)
    ic = np.argmax(share_c, -1)
    score_c = _take(share_c, ic)
    lam_c = _take(lam, ic)
    # its conjugate partner: the lower-half eigenvalue closest to conj(lam_c)
    dist = np.where((~is_real) & (lam.imag < 0), np.abs(lam - np.conj(lam_c)[..., None]), np.inf)
    ic2 = np.argmin(dist, -1)

    # best two real roots
    share_r = np.where(is_real, share, -np.inf)
    order_r = np.argsort(-share_r, -1, kind="stable")
    ir1 = order_r[..., 0]
    ir2 = order_r[..., 1] if n > 1 else order_r[..., 0]
    score_r = np.minimum(_take(share_r, ir1), _take(share_r, ir2))

    use_c = score_c >= score_r
    i1 = np.where(use_c, ic, ir1)
    i2 = np.where(use_c, ic2, ir2)
    l1 = _take(lam, i1)
    l2 = _take(lam, i2)
    l1 = np.where(use_c, l1, l1.real + 0j)
    l2 = np.where(use_c, np.conj(l1), l2.real + 0j)
    return i1, i2, l1, l2


def _participation(A):
    """Eigenvalues and participation factors ``p[..., k, i] = |v_ki w_ik|`` normalised per mode."""
    lam, V = np.linalg.eig(A)
    lam = lam.astype(complex, copy=False)  # no copy where eig returned complex (a complex mode in the batch)
    V = V.astype(complex, copy=False)
    with np.errstate(all="ignore"):
        W = np.linalg.inv(V)
    p = np.abs(V * np.swapaxes(W, -1, -2))  # p[..., k, i]
    total = p.sum(-2)
    return lam, p, np.where(total > 0, total, 1.0)


def _share(p, total, rows):
    share = sum(p[..., r, :] for r in rows) / total
    return np.where(np.isfinite(share), share, 0.0)


def _ambiguous(share, chosen, i1, i2):
    """Another mode (outside `chosen`) takes part above AMBIGUITY_RATIO of the pair's weaker member."""
    weakest = np.minimum(_take(share, i1), _take(share, i2))
    n = share.shape[-1]
    best_other = np.max(np.where(chosen, -np.inf, share), -1) if n > 2 else np.full(share.shape[:-1], -np.inf)
    return best_other > AMBIGUITY_RATIO * weakest


def closed_loop_modes(A, alpha_index: int, q_index: int, u_index=None, theta_index=None) -> ClosedLoopModes:
    """Eigenvalues, short-period (and phugoid) identification and other modes of ``A`` (batched).

    Parameters
    ----------
    A : ndarray, shape (..., n, n)
        Closed-loop state matrix, 1/s.
    alpha_index, q_index : int
        State indices of the airframe's angle of attack and pitch rate.
    u_index, theta_index : int or None
        State indices of the forward speed and pitch attitude of a longitudinal airframe
        (:class:`damper.model.loop.StateLayout` ``u``, ``theta``); None: no phugoid.

    Notes
    -----
    The short-period pair is picked by modal participation factors
    ``p_ki = |v_ki w_ik|`` (right and left eigenvectors) summed over alpha and
    q, normalised per mode. Candidates are the best complex pair and the best
    two real roots; the candidate whose weaker member has the larger share wins
    (both roots of a short-period pair must be mostly airframe motion). The phugoid is
    picked the same way among the remaining modes by the share of u and theta.
    """
    A = np.asarray(A, dtype=float)
    shape = A.shape[:-2]
    n = A.shape[-1]
    lam, p, total = _participation(A)
    share = _share(p, total, (alpha_index, q_index))
    scale = np.maximum(1.0, np.abs(lam))
    is_real = np.abs(lam.imag) <= 1e-9 * scale
    idx = np.arange(n)

    i1, i2, l1, l2 = _pick_pair(lam, share, is_real)
    sp = pair_measures(l1, l2)
    chosen = (idx == i1[..., None]) | (idx == i2[..., None])
    ambiguous = _ambiguous(share, chosen, i1, i2)

    if u_index is not None and theta_index is not None:
        speed = _share(p, total, (u_index, theta_index))
        j1, j2, m1, m2 = _pick_pair(lam, np.where(chosen, -np.inf, speed), is_real)
        phugoid = pair_measures(m1, m2)
        chosen_ph = (idx == j1[..., None]) | (idx == j2[..., None])
        ph_ambiguous = _ambiguous(speed, chosen | chosen_ph, j1, j2)
        excluded = chosen | chosen_ph
    else:
        speed = np.full(lam.shape, np.nan)
        phugoid = nan_mode(shape)
        ph_ambiguous = np.zeros(shape, bool)
        excluded = chosen

    zeta_all = eigen_damping(lam)
    zeta_other = np.where(excluded, np.inf, zeta_all)
    io = np.argmin(zeta_other, -1)
    other_zeta = _take(zeta_other, io)
    other_lam = _take(lam, io)
    none = ~np.isfinite(other_zeta)
    other_zeta = np.where(none, np.nan, other_zeta)
    other_lam = np.where(none, np.nan + 0j, other_lam)

    stable = np.all(lam.real < 0, -1)
    # sort eigenvalues for reporting (numpy orders complex numbers by real, then imaginary part)
    order = np.argsort(lam, -1)
    lam_sorted = np.take_along_axis(lam, order, -1)
    share_sorted = np.take_along_axis(share, order, -1)
    speed_sorted = np.take_along_axis(speed, order, -1)
    return ClosedLoopModes(
        lam_sorted, share_sorted, sp, ambiguous, other_zeta, other_lam, stable, phugoid, ph_ambiguous, speed_sorted
    )


def loop_modes(loop) -> ClosedLoopModes:
    """Closed-loop modes of a batch of loops (either airframe model; Pade delays)."""
    from ..model.batch import batch_shape
    from ..model.loop import closed_loop_matrix

    A, _, layout = closed_loop_matrix(loop)
    shape = batch_shape(loop)
    A = np.broadcast_to(A, shape + A.shape[-2:])
    return closed_loop_modes(A, layout.alpha, layout.q, layout.u, layout.theta)


def two_state_short_period(loop) -> SecondOrderMode:
    """Closed-loop short period of the two-state approximation at the same gain and hardware.

    The loop's airframe is replaced by :func:`damper.model.airframes.short_period_part`
    (the same derivatives without the speed and gravity terms); for a two-state loop this
    is its own short period.
    """
    from dataclasses import replace

    two = replace(loop, airframe=airframes.short_period_part(loop.airframe))
    return loop_modes(two).short_period


def approximation_differs(
    full: SecondOrderMode,
    approx: SecondOrderMode,
    damping_tolerance=DAMPING_TOLERANCE,
    frequency_tolerance=FREQUENCY_TOLERANCE,
):
    """Whether two short-period estimates differ beyond the tolerances (bool array).

    Differ: damping ratios more than `damping_tolerance` apart (absolute), natural
    frequencies more than `frequency_tolerance` apart relative to the full model's, or one
    defined (not NaN) where the other is not.
    """
    zf, za = np.asarray(full.damping_ratio), np.asarray(approx.damping_ratio)
    wf, wa = np.asarray(full.natural_frequency), np.asarray(approx.natural_frequency)
    with np.errstate(invalid="ignore"):
        dz = np.abs(zf - za) > damping_tolerance
        dw = np.abs(wf - wa) > frequency_tolerance * np.abs(wf)
    defined = np.isnan(zf) != np.isnan(za)
    return dz | dw | defined
