"""Bare-airframe short-period model.

Sign convention (defined once, here; see docs/theory.md): stability axes, small
perturbations, states angle of attack ``alpha`` (rad) and pitch rate ``q``
(rad/s); elevator ``delta`` (rad) positive trailing-edge down, so a normal
airframe has ``M_delta < 0``. The pilot's command is counted positive nose-up
(:func:`nose_up_surface`), whatever the sign of ``M_delta``. Dimensional derivatives are per unit mass (Z) or
per unit pitch inertia (M)::

    alpha' = Z_alpha/V alpha + (1 + Z_q/V) q + Z_delta/V delta
    q'     = M_alpha alpha + M_alpha_dot alpha' + M_q q + M_delta delta
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..atmosphere import G0
from ..quantities import quantity


@dataclass(frozen=True)
class ShortPeriodFields:
    """The eight dimensional short-period derivatives shared by :class:`Derivatives` and
    :class:`damper.model.longitudinal.LongitudinalDerivatives` (fields only: neither type is
    the other, so code that dispatches on the type keeps them apart). Attributes as
    :class:`Derivatives`."""

    airspeed: np.ndarray = quantity("m/s")
    Z_alpha: np.ndarray = quantity("m/s^2")
    Z_q: np.ndarray = quantity("m/s")
    Z_delta: np.ndarray = quantity("m/s^2")
    M_alpha: np.ndarray = quantity("1/s^2")
    M_alpha_dot: np.ndarray = quantity("1/s")
    M_q: np.ndarray = quantity("1/s")
    M_delta: np.ndarray = quantity("1/s^2")


@dataclass(frozen=True)
class Derivatives(ShortPeriodFields):
    """Dimensional short-period derivatives (arrays with batch axes, SI, per radian).

    Attributes
    ----------
    airspeed : ndarray
        True airspeed V, m/s.
    Z_alpha : ndarray
        Normal-force derivative per unit mass, m/s^2 per rad (negative for lift).
    Z_q : ndarray
        m/s per rad/s.
    Z_delta : ndarray
        m/s^2 per rad.
    M_alpha : ndarray
        Pitching-moment derivative per unit pitch inertia, 1/s^2 (rad/s^2 per rad).
    M_alpha_dot : ndarray
        1/s (rad/s^2 per rad/s).
    M_q : ndarray
        1/s.
    M_delta : ndarray
        1/s^2 (rad/s^2 per rad of elevator).
    """


def nose_up_surface(d: Derivatives):
    """Surface command (rad, trailing-edge down positive) per rad of nose-up pilot command.

    The one pilot-command convention: a pilot command ``c`` (rad of surface, positive
    nose-up, i.e. a pull) reaches the actuator input as ``sign(M_delta) c``, so a pull
    moves the surface trailing-edge up when ``M_delta < 0`` and down when
    ``M_delta > 0``. Every pilot input (handling measures, time responses) uses it.
    """
    return np.sign(np.asarray(d.M_delta, dtype=float))


def from_coefficients(
    *,
    dynamic_pressure,
    airspeed,
    mass,
    pitch_inertia,
    wing_area,
    mean_chord,
    CL_alpha,
    CD,
    CL_delta,
    Cm_alpha,
    Cm_alpha_dot,
    Cm_q,
    Cm_delta,
    CL_q=0.0,
) -> Derivatives:
    """Dimensional derivatives from non-dimensional coefficients (stability axes).

    Source: Nelson, *Flight Stability and Automatic Control*, 2nd ed., tables of
    chapters 3-4 (from memory; checked numerically on its worked example)::

        Z_alpha = -(CL_alpha + CD) q S / m       M_alpha     = Cm_alpha q S c / Iy
        Z_q     = -CL_q q S c / (2 V m)          M_alpha_dot = Cm_alpha_dot q S c^2 / (2 V Iy)
        Z_delta = -CL_delta q S / m              M_q         = Cm_q q S c^2 / (2 V Iy)
                                                 M_delta     = Cm_delta q S c / Iy

    Parameters
    ----------
    dynamic_pressure : array_like
        Pa. airspeed : m/s (true). mass : kg. pitch_inertia : kg m^2.
        wing_area : m^2. mean_chord : m.
    CL_alpha, CD, CL_delta, Cm_alpha, Cm_delta : array_like
        Per radian (CD dimensionless).
    Cm_alpha_dot, Cm_q, CL_q : array_like
        Per radian, rates made non-dimensional with c / (2 V).
    """
    qs = np.asarray(dynamic_pressure) * wing_area
    qsc = qs * mean_chord
    half_c_over_v = mean_chord / (2.0 * np.asarray(airspeed))
    return Derivatives(
        airspeed=np.asarray(airspeed, dtype=float),
        Z_alpha=-(np.asarray(CL_alpha) + CD) * qs / mass,
        Z_q=-np.asarray(CL_q) * qs * half_c_over_v / mass,
        Z_delta=-np.asarray(CL_delta) * qs / mass,
        M_alpha=np.asarray(Cm_alpha) * qsc / pitch_inertia,
        M_alpha_dot=np.asarray(Cm_alpha_dot) * qsc * half_c_over_v / pitch_inertia,
        M_q=np.asarray(Cm_q) * qsc * half_c_over_v / pitch_inertia,
        M_delta=np.asarray(Cm_delta) * qsc / pitch_inertia,
    )


def _entries(d: Derivatives):
    """Entries a11, a12, a21, a22, b1, b2 of the short-period matrices (``alpha'`` substituted)."""
    v = d.airspeed
    a11 = d.Z_alpha / v
    a12 = 1.0 + d.Z_q / v
    b1 = d.Z_delta / v
    a21 = d.M_alpha + d.M_alpha_dot * a11
    a22 = d.M_q + d.M_alpha_dot * a12
    b2 = d.M_delta + d.M_alpha_dot * b1
    return a11, a12, a21, a22, b1, b2


def state_matrices(d: Derivatives):
    """Short-period state matrices with ``alpha'`` substituted into ``q'``.

    Returns
    -------
    A : ndarray, shape (..., 2, 2)
        1/s; states (alpha rad, q rad/s).
    B : ndarray, shape (..., 2, 1)
        Response to elevator (rad): (1/s, 1/s^2).
    """
    entries = _entries(d)
    a11, a12, a21, a22, b1, b2 = np.broadcast_arrays(*(np.asarray(e, dtype=float) for e in entries))
    A = np.stack([np.stack([a11, a12], -1), np.stack([a21, a22], -1)], -2)
    B = np.stack([b1, b2], -1)[..., None]
    return A, B


def pitch_rate_response(d: Derivatives, s):
    """Pitch rate per elevator, q/delta (1/s), at complex frequencies `s`.

    Parameters
    ----------
    d : Derivatives
        With batch shape ``S``; `s` must broadcast against ``S`` (add a trailing
        axis to `d` with :func:`damper.model.batch.expand` for a frequency axis).
    s : array_like of complex
        Laplace variable, 1/s.

    Notes
    -----
    q/delta = (b2 s + a21 b1 - a11 b2) / (s^2 - (a11 + a22) s + a11 a22 - a12 a21).
    """
    a11, a12, a21, a22, b1, b2 = _entries(d)
    num = b2 * s + (a21 * b1 - a11 * b2)
    den = s * s - (a11 + a22) * s + (a11 * a22 - a12 * a21)
    return num / den


def pitch_rate_factors(d: Derivatives):
    """Numerator and denominator of q/delta as factors ``(c0, c1, c2)`` of ``c0 + c1 s + c2 s^2``.

    Returns ``((a21 b1 - a11 b2, b2, 0), (a11 a22 - a12 a21, -(a11 + a22), 1))`` (1/s^2
    over 1/s^2: q/delta in 1/s), the same polynomials as :func:`pitch_rate_response`.
    """
    a11, a12, a21, a22, b1, b2 = _entries(d)
    return (a21 * b1 - a11 * b2, b2, 0.0), (a11 * a22 - a12 * a21, -(a11 + a22), 1.0)


def angle_of_attack_response(d: Derivatives, s):
    """Angle of attack per elevator, alpha/delta (dimensionless), at `s`.

    alpha/delta = (b1 s + a12 b2 - a22 b1) / (characteristic polynomial).
    """
    a11, a12, a21, a22, b1, b2 = _entries(d)
    num = b1 * s + (a12 * b2 - a22 * b1)
    den = s * s - (a11 + a22) * s + (a11 * a22 - a12 * a21)
    return num / den


def inverse_t_theta2(d: Derivatives):
    """1/T_theta2 (1/s): the zero of the pitch-rate response, ``(a21 b1 - a11 b2) / b2``.

    With ``Z_delta`` = 0 this is ``-Z_alpha / V``.
    """
    a11, _, a21, _, b1, b2 = _entries(d)
    with np.errstate(divide="ignore", invalid="ignore"):
        return (a21 * b1 - a11 * b2) / b2


def load_factor_per_alpha(d: Derivatives):
    """n/alpha (g per rad): steady normal-load-factor change per unit angle of attack.

    Uses ``n/alpha = -Z_alpha / g`` (Nelson / MIL-F-8785C usage, from memory).
    """
    return -np.asarray(d.Z_alpha) / G0
