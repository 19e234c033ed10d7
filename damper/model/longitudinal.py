"""Bare-airframe longitudinal model: speed, angle of attack, pitch rate and attitude.

The same sign convention as the short-period model (:mod:`damper.model.airframe`,
docs/theory.md section 1): stability axes, small perturbations about a trimmed flight
path of angle ``gamma`` (rad, positive climbing), elevator ``delta`` (rad) positive
trailing-edge down. States ``u`` (m/s, forward-speed perturbation), ``alpha`` (rad),
``q`` (rad/s), ``theta`` (rad); derivatives per unit mass (X, Z) or pitch inertia (M)::

    u'     = X_u u + X_alpha alpha - g cos(gamma) theta + X_delta delta
    alpha' = (Z_u u + Z_alpha alpha + (V + Z_q) q - g sin(gamma) theta + Z_delta delta) / V
    q'     = M_u u + M_alpha alpha + M_alpha_dot alpha' + M_q q + M_delta delta
    theta' = q

With ``X_u = X_alpha = Z_u = M_u = X_delta = 0`` and ``gamma = 0`` the angle of attack
and pitch rate obey today's two-state equations exactly (the speed and attitude only
follow them); with the gravity set to zero as well the two added states are free
integrators that nothing feeds back.

The transfer-function polynomials are written in closed form from the matrix entries
(Cramer's rule, expanded along the attitude row ``theta' = q``), not by a general
algorithm: every coefficient is a sum of products of entries, so a coefficient that is
zero because the model's structure makes it so (a root at the origin) is exactly zero
in floating point, and the origin roots it shares with the numerator cancel exactly.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..atmosphere import G0
from ..quantities import quantity
from . import airframe as af


@dataclass(frozen=True)
class LongitudinalDerivatives(af.ShortPeriodFields):
    """Dimensional longitudinal derivatives (arrays with batch axes, SI, per radian).

    The first eight fields are those of :class:`damper.model.airframe.Derivatives`,
    with the same meaning and units.

    Attributes
    ----------
    airspeed : ndarray
        True airspeed V, m/s.
    Z_alpha, Z_q, Z_delta : ndarray
        m/s^2 per rad, m/s per rad/s, m/s^2 per rad (per unit mass).
    M_alpha, M_alpha_dot, M_q, M_delta : ndarray
        1/s^2, 1/s, 1/s, 1/s^2 (per unit pitch inertia).
    X_u : ndarray
        Axial-force derivative with speed per unit mass, 1/s (m/s^2 per m/s).
    X_alpha : ndarray
        Axial-force derivative with angle of attack, m/s^2 per rad.
    Z_u : ndarray
        Normal-force derivative with speed, 1/s (m/s^2 per m/s).
    M_u : ndarray
        Pitching-moment derivative with speed, 1/(m s) (rad/s^2 per m/s).
    X_delta : ndarray
        Axial force per elevator, m/s^2 per rad (default 0).
    flight_path_angle : ndarray
        Trim flight-path angle gamma, rad, positive climbing (default 0).
    gravity : ndarray
        Acceleration of gravity, m/s^2 (default the standard 9.80665; zero only to
        reduce the model to the short period in a check).
    """

    X_u: np.ndarray = quantity("1/s")
    X_alpha: np.ndarray = quantity("m/s^2")
    Z_u: np.ndarray = quantity("1/s")
    M_u: np.ndarray = quantity("1/(m s)")
    X_delta: np.ndarray = quantity("m/s^2", default=0.0)
    flight_path_angle: np.ndarray = quantity("rad", default=0.0)
    gravity: np.ndarray = quantity("m/s^2", default=G0)


#: State names of the longitudinal model, in order.
STATES = ("u", "alpha", "q", "theta")
U, ALPHA, Q, THETA = 0, 1, 2, 3


def with_speed_terms(d: af.Derivatives, *, X_u, X_alpha, Z_u, M_u, X_delta=0.0, flight_path_angle=0.0, gravity=G0):
    """The longitudinal model of a short-period airframe `d` plus its speed derivatives.

    Parameters are the extra fields of :class:`LongitudinalDerivatives` (units there).
    """
    return LongitudinalDerivatives(
        *(getattr(d, k) for k in af.Derivatives.__dataclass_fields__),
        X_u=X_u,
        X_alpha=X_alpha,
        Z_u=Z_u,
        M_u=M_u,
        X_delta=X_delta,
        flight_path_angle=flight_path_angle,
        gravity=gravity,
    )


def short_period_part(d: LongitudinalDerivatives) -> af.Derivatives:
    """The two-state short-period approximation from the same derivatives.

    Speed and attitude are held at their trim values: the speed derivatives and the
    gravity terms drop out; the eight shared fields are passed unchanged.
    """
    return af.Derivatives(*(getattr(d, k) for k in af.Derivatives.__dataclass_fields__))


def from_coefficients(
    *, CL_u, CD_u, Cm_u, CT_u, CD_alpha, CD_delta=0.0, flight_path_angle=0.0, gravity=G0, **short
) -> LongitudinalDerivatives:
    """Dimensional longitudinal derivatives from non-dimensional coefficients (stability axes).

    Source: Nelson, *Flight Stability and Automatic Control*, 2nd ed., ch. 3 (summary table
    of the longitudinal derivatives) and ch. 4 (dimensional derivatives), from memory;
    ``X_alpha = V X_w``, ``M_u`` per m/s. With ``qbar S / m = Q``::

        CL_trim = m g cos(gamma) / (qbar S)               (lift balances the weight's normal part)
        X_u     = (CT_u - CD_u - 2 CD) Q / V               X_alpha = (CL_trim - CD_alpha) Q
        Z_u     = -(CL_u + 2 CL_trim) Q / V                 M_u     = Cm_u qbar S c / (Iy V)
        X_delta = -CD_delta Q

    and the short-period derivatives of :func:`damper.model.airframe.from_coefficients`.

    Parameters
    ----------
    CL_u, CD_u, Cm_u : array_like
        Speed derivatives ``V dC/du`` (dimensionless: per unit relative speed change).
    CT_u : array_like
        Thrust derivative ``(1 / (qbar S)) dT/d(u/V)``, dimensionless (Nelson's form:
        0 for constant thrust; ``-CD`` in level flight for constant power, since
        ``T = P / u`` [derived]).
    CD_alpha : array_like
        Drag-curve slope, per rad.
    CD_delta : array_like
        Drag per elevator, per rad (default 0).
    flight_path_angle : array_like
        rad. gravity : m/s^2.
    **short
        The keyword arguments of :func:`damper.model.airframe.from_coefficients`
        (``dynamic_pressure`` Pa, ``airspeed`` m/s, ``mass`` kg, ``pitch_inertia`` kg m^2,
        ``wing_area`` m^2, ``mean_chord`` m, ``CL_alpha``, ``CD`` (trim drag coefficient),
        ``CL_delta``, ``Cm_alpha``, ``Cm_alpha_dot``, ``Cm_q``, ``Cm_delta``, ``CL_q``).
    """
    d = af.from_coefficients(**short)
    v = np.asarray(short["airspeed"], dtype=float)
    qbar, area, mass = short["dynamic_pressure"], short["wing_area"], short["mass"]
    qs = np.asarray(qbar, dtype=float) * area
    per_mass = qs / mass
    cl_trim = trim_lift_coefficient(qbar, area, mass, flight_path_angle, gravity)
    return with_speed_terms(
        d,
        X_u=(np.asarray(CT_u) - CD_u - 2.0 * np.asarray(short["CD"])) * per_mass / v,
        X_alpha=(cl_trim - CD_alpha) * per_mass,
        Z_u=-(np.asarray(CL_u) + 2.0 * cl_trim) * per_mass / v,
        M_u=np.asarray(Cm_u) * qs * short["mean_chord"] / (short["pitch_inertia"] * v),
        X_delta=-np.asarray(CD_delta) * per_mass,
        flight_path_angle=np.asarray(flight_path_angle, dtype=float),
        gravity=np.asarray(gravity, dtype=float),
    )


def trim_lift_coefficient(dynamic_pressure, wing_area, mass, flight_path_angle=0.0, gravity=G0):
    """Trim lift coefficient ``m g cos(gamma) / (qbar S)`` (dimensionless).

    Lift balances the component of the weight normal to the flight path (thrust taken
    along it) [derived]; ``W / (qbar S)`` in level flight (Nelson ch. 4, from memory).
    """
    weight = np.asarray(mass, dtype=float) * gravity * np.cos(flight_path_angle)
    return weight / (np.asarray(dynamic_pressure, dtype=float) * wing_area)


# ----------------------------------------------------------------------------------
# state space
# ----------------------------------------------------------------------------------


@dataclass(frozen=True)
class Entries:
    """Entries of the state matrices (``alpha'`` substituted into ``q'``), batched.

    Rows ``x*`` (u'), ``z*`` (alpha'), ``m*`` (q'); columns ``*u``, ``*a`` (alpha),
    ``*q``, ``*t`` (theta); inputs ``b*``. Units: 1/s, with the state units of
    :data:`STATES` (e.g. ``xt`` m/s^2 per rad, ``mu`` rad/s^2 per m/s).
    """

    xu: np.ndarray
    xa: np.ndarray
    xt: np.ndarray
    zu: np.ndarray
    za: np.ndarray
    zq: np.ndarray
    zt: np.ndarray
    mu: np.ndarray
    ma: np.ndarray
    mq: np.ndarray
    mt: np.ndarray
    bu: np.ndarray
    ba: np.ndarray
    bq: np.ndarray


def entries(d: LongitudinalDerivatives) -> Entries:
    """The state-matrix entries of `d`.

    The short-period entries are computed exactly as :mod:`damper.model.airframe` does
    (``za = a11``, ``zq = a12``, ``ma = a21``, ``mq = a22``, ``ba = b1``, ``bq = b2``).
    """
    v = d.airspeed
    mad = d.M_alpha_dot
    gam = np.asarray(d.flight_path_angle, dtype=float)
    za = d.Z_alpha / v
    zq = 1.0 + d.Z_q / v
    ba = d.Z_delta / v
    zu = d.Z_u / v
    zt = -d.gravity * np.sin(gam) / v
    return Entries(
        xu=np.asarray(d.X_u, dtype=float),
        xa=np.asarray(d.X_alpha, dtype=float),
        xt=-d.gravity * np.cos(gam),
        zu=zu,
        za=za,
        zq=zq,
        zt=zt,
        mu=d.M_u + mad * zu,
        ma=d.M_alpha + mad * za,
        mq=d.M_q + mad * zq,
        mt=mad * zt,
        bu=np.asarray(d.X_delta, dtype=float),
        ba=ba,
        bq=d.M_delta + mad * ba,
    )


def state_matrices(d: LongitudinalDerivatives):
    """Longitudinal state matrices, states ``(u, alpha, q, theta)``.

    Returns
    -------
    A : ndarray, shape (..., 4, 4)
        1/s (with the state units: m/s, rad, rad/s, rad).
    B : ndarray, shape (..., 4, 1)
        Response to elevator (rad): (m/s^2, 1/s, 1/s^2, 0) per rad.
    """
    e = entries(d)
    arrays = np.broadcast_arrays(*(np.asarray(getattr(e, k), dtype=float) for k in Entries.__dataclass_fields__))
    xu, xa, xt, zu, za, zq, zt, mu, ma, mq, mt, bu, ba, bq = arrays
    zero = np.zeros_like(xu)
    one = np.ones_like(xu)
    rows = [[xu, xa, zero, xt], [zu, za, zq, zt], [mu, ma, mq, mt], [zero, zero, one, zero]]
    A = np.stack([np.stack(r, -1) for r in rows], -2)
    B = np.stack([bu, ba, bq, zero], -1)[..., None]
    return A, B


def load_factor_row(d: LongitudinalDerivatives):
    """Incremental normal load factor ``n_z = C x + D delta`` (g, positive up).

    ``n_z = -(Z_u u + Z_alpha alpha + Z_q q + Z_delta delta) / g0`` (the short-period
    form plus ``Z_u u``; issue 20's one definition), ``g0`` the standard gravity.

    Returns
    -------
    C : ndarray, shape (..., 1, 4)
        g per (m/s, rad, rad/s, rad). D : ndarray, shape (..., 1, 1), g per rad.
    """
    cols = np.broadcast_arrays(*(-np.asarray(x, dtype=float) / G0 for x in (d.Z_u, d.Z_alpha, d.Z_q, d.Z_delta)))
    zu, za, zq, zd = cols
    C = np.stack([zu, za, zq, np.zeros_like(zu)], -1)[..., None, :]
    return C, zd[..., None, None]


# ----------------------------------------------------------------------------------
# transfer functions
# ----------------------------------------------------------------------------------


@dataclass(frozen=True)
class TransferPolynomials:
    """Numerators and characteristic polynomial of the bare airframe (lowest power first).

    Attributes
    ----------
    denominator : ndarray, shape (..., 5)
        ``det(sI - A)``, monic quartic, coefficients in 1/s^(4-k).
    u, alpha, q, theta : ndarray, shape (..., 4)
        Numerators of u/delta (m/s per rad), alpha/delta, q/delta and theta/delta
        (``q = s theta`` exactly: the q numerator is the theta numerator shifted).
    """

    denominator: np.ndarray
    u: np.ndarray
    alpha: np.ndarray
    q: np.ndarray
    theta: np.ndarray


def transfer_polynomials(d: LongitudinalDerivatives) -> TransferPolynomials:
    """Closed-form transfer-function polynomials of the bare airframe (batched).

    Cramer's rule, each determinant expanded along the attitude row; the expansions are
    in docs/theory.md ("The longitudinal model").
    """
    e = entries(d)
    xu, xa, xt, zu, za, zq, zt = e.xu, e.xa, e.xt, e.zu, e.za, e.zq, e.zt
    mu, ma, mq, mt, bu, ba, bq = e.mu, e.ma, e.mq, e.mt, e.bu, e.ba, e.bq
    m_ua = xu * za - xa * zu  # principal minor (u, alpha) of the (u, alpha, q) block
    m_aq = za * mq - zq * ma  # principal minor (alpha, q)
    det3 = xu * m_aq - xa * (zu * mq - zq * mu)
    den = (
        -xt * (zu * ma - za * mu) - zt * (xa * mu - xu * ma) - mt * m_ua,
        -det3 - xt * mu - zt * ma + mt * (xu + za),
        m_ua + xu * mq + m_aq - mt,
        -(xu + za + mq),
        1.0,
    )
    n_theta = (
        bu * (zu * ma - za * mu) + ba * (xa * mu - xu * ma) + bq * m_ua,
        bu * mu + ba * ma - bq * (xu + za),
        bq,
        0.0,
    )
    n_alpha = (
        bu * (zt * mu - zu * mt) + ba * (xu * mt - xt * mu) + bq * (xt * zu - xu * zt),
        bu * (zq * mu - zu * mq) + ba * xu * mq - bq * zq * xu + bq * zt - ba * mt,
        bu * zu - ba * (xu + mq) + bq * zq,
        ba,
    )
    n_u = (
        bu * (za * mt - zt * ma) - ba * (xa * mt - xt * ma) + bq * (xa * zt - xt * za),
        bu * m_aq - ba * xa * mq + bq * xa * zq - bu * mt + bq * xt,
        -bu * (za + mq) + ba * xa,
        bu,
    )

    def stack(coefs):
        arrays = np.broadcast_arrays(*(np.asarray(c, dtype=float) for c in (*coefs, xu)))
        return np.stack(arrays[:-1], -1)

    return TransferPolynomials(
        denominator=stack(den),
        u=stack(n_u),
        alpha=stack(n_alpha),
        q=stack((0.0, *n_theta[:3])),
        theta=stack(n_theta),
    )


def _leading_zeros(coef, most):
    """Number of exactly zero coefficients at the low end (roots at the origin), at most `most`."""
    count = np.zeros(coef.shape[:-1], dtype=int)
    run = np.ones(coef.shape[:-1], dtype=bool)
    for k in range(most):
        run = run & (coef[..., k] == 0)
        count = count + run
    return count


def _shift_down(coef, by):
    """Divide each polynomial by ``s^by`` (its lowest ``by`` coefficients are zero)."""
    size = coef.shape[-1]
    k = np.arange(size) + np.asarray(by)[..., None]
    padded = np.concatenate([coef, np.zeros(coef.shape[:-1] + (size,))], -1)
    return np.take_along_axis(padded, k, -1)


@dataclass(frozen=True)
class PitchRatePolynomials:
    """q/delta with its common roots at the origin cancelled exactly (lowest power first).

    Attributes
    ----------
    numerator : ndarray, shape (..., 4)
        Coefficients of ``s^k``; numerator over denominator is q/delta in 1/s.
    denominator : ndarray, shape (..., 5)
        The characteristic quartic divided by ``s^cancelled`` (zero-padded at the top).
    cancelled : ndarray of int
        Origin roots cancelled (0 for a full model with gravity and speed terms; 2 when
        the speed terms and the flight-path angle are zero).
    origin_zero : ndarray of bool
        The numerator keeps the factor ``s`` of ``q = s theta``.
    theta : ndarray, shape (..., 3)
        The theta numerator ``n0 + n1 s + n2 s^2`` divided by the power of ``s`` that the
        cancellation took from it.
    """

    numerator: np.ndarray
    denominator: np.ndarray
    cancelled: np.ndarray
    origin_zero: np.ndarray
    theta: np.ndarray


def pitch_rate_polynomials(d: LongitudinalDerivatives) -> PitchRatePolynomials:
    """q/delta = s N_theta(s) / Delta(s) with the origin roots both share cancelled exactly.

    ``N_theta`` has ``m`` exact zero coefficients at the low end (0 to 2), so the
    numerator has ``1 + m`` roots at the origin; ``Delta`` has ``m_d`` (at most 3 counted).
    ``min(1 + m, m_d)`` of them cancel: first the ``s`` of ``q = s theta``, then those of
    ``N_theta``. The test is on exact zeros (the closed forms keep structural zeros exact).
    """
    tp = transfer_polynomials(d)
    n_theta = tp.theta[..., :3]
    m_n = 1 + _leading_zeros(n_theta, 2)
    m_d = _leading_zeros(tp.denominator, 3)
    c = np.minimum(m_n, m_d)
    theta = _shift_down(n_theta, np.maximum(c - 1, 0))
    keep_s = c == 0
    zero = np.zeros(theta.shape[:-1] + (1,))
    num = np.where(keep_s[..., None], np.concatenate([zero, theta], -1), np.concatenate([theta, zero], -1))
    return PitchRatePolynomials(num, _shift_down(tp.denominator, c), c, keep_s, theta)


def _horner(coef, s):
    """Polynomial (lowest power first, coefficient axis last) at `s` (broadcast)."""
    out = coef[..., -1]
    for k in range(coef.shape[-1] - 2, -1, -1):
        out = out * s + coef[..., k]
    return out


def pitch_rate_response(d: LongitudinalDerivatives, s):
    """Pitch rate per elevator, q/delta (1/s), at complex frequencies `s`.

    Evaluated from the cancelled polynomials (:func:`pitch_rate_polynomials`), so
    ``s = 0`` is finite when the model's origin roots cancel. `d` must broadcast
    against `s` (see :func:`damper.model.airframe.pitch_rate_response`).
    """
    p = pitch_rate_polynomials(d)
    return _horner(p.numerator, s) / _horner(p.denominator, s)


def angle_of_attack_response(d: LongitudinalDerivatives, s):
    """Angle of attack per elevator, alpha/delta (dimensionless), at `s` (polynomials as they stand)."""
    tp = transfer_polynomials(d)
    return _horner(tp.alpha, s) / _horner(tp.denominator, s)


def speed_response(d: LongitudinalDerivatives, s):
    """Speed per elevator, u/delta (m/s per rad), at `s`."""
    tp = transfer_polynomials(d)
    return _horner(tp.u, s) / _horner(tp.denominator, s)


# ----------------------------------------------------------------------------------
# short-period handling quantities
# ----------------------------------------------------------------------------------


def inverse_t_theta2(d: LongitudinalDerivatives):
    """1/T_theta2 (1/s): the short-period zero of the airframe's own theta/delta.

    theta/delta has the numerator ``n2 s^2 + n1 s + n0 = n2 (s + 1/T_theta1)(s + 1/T_theta2)``;
    1/T_theta2 is minus its root of larger magnitude (the phugoid's zero 1/T_theta1 is the
    small one). Where ``n0 = 0`` exactly it is ``n1 / n2`` (with the speed terms zero, the
    two-state value bit for bit); where the roots are complex, or ``n2 = 0``, the two-state
    value (:func:`damper.model.airframe.inverse_t_theta2` of :func:`short_period_part`).
    """
    tp = transfer_polynomials(d)
    n0, n1, n2 = tp.theta[..., 0], tp.theta[..., 1], tp.theta[..., 2]
    approx = np.asarray(af.inverse_t_theta2(short_period_part(d)), dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        disc = n1 * n1 - 4.0 * n2 * n0
        big = (n1 + np.where(n1 < 0, -1.0, 1.0) * np.sqrt(np.abs(disc))) / (2.0 * n2)
        exact = n1 / n2
    return np.where(n2 == 0, approx, np.where(n0 == 0, exact, np.where(disc >= 0, big, approx)))


def pitch_rate_factors(d: LongitudinalDerivatives):
    """q/delta as real factors ``(c0, c1, c2)`` of degree at most two, for the factored loop.

    Returns
    -------
    numerator : list of 2 factors
        ``s`` (or ``1`` where it cancelled) and the theta numerator as it stands (after
        the cancellation), 1/s^2 overall.
    denominator : list of 2 factors
        The characteristic polynomial after the cancellation, factorised from its roots
        (:func:`damper.model.factorise.real_factors`); as it stands where its degree is
        two (then the second factor is ``1``).

    Every array has the batch shape of `d`. With the speed terms and the flight-path angle
    zero the factors are the two-state ones, ``1`` and ``1`` added, bit for bit.
    """
    from .factorise import real_factors

    p = pitch_rate_polynomials(d)
    shape = p.denominator.shape[:-1]
    one = np.ones(shape)
    keep = p.origin_zero
    origin = (np.where(keep, 0.0, 1.0), np.where(keep, 1.0, 0.0), 0.0 * one)
    theta = tuple(p.theta[..., k] for k in range(3))
    den = real_factors(p.denominator.reshape(-1, 5), 2)
    den = [tuple(c.reshape(shape) for c in f) for f in den]
    return [origin, theta], den


def inverse_t_theta1(d: LongitudinalDerivatives):
    """1/T_theta1 (1/s): the other (phugoid) zero of theta/delta, ``n0 / (n2 (1/T_theta2))``.

    The product of the two zeros is ``n0 / n2``; with :func:`inverse_t_theta2` this gives the
    small zero exactly where the zeros are real (0 where ``n0 = 0``, no speed coupling).
    """
    tp = transfer_polynomials(d)
    with np.errstate(divide="ignore", invalid="ignore"):
        return tp.theta[..., 0] / (tp.theta[..., 2] * inverse_t_theta2(d))
