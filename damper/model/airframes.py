"""Either bare-airframe model, dispatched on its type.

A loop's airframe is a :class:`damper.model.airframe.Derivatives` (the two-state short
period, states ``alpha``, ``q``) or a :class:`damper.model.longitudinal.LongitudinalDerivatives`
(states ``u``, ``alpha``, ``q``, ``theta``). The type is structure: the same across a
batch. The loop (:mod:`damper.model.loop`, :mod:`damper.model.rational`) and the measures
call these functions, which hand a short-period airframe to exactly the functions used
before the longitudinal model existed, so its results are unchanged bit for bit.

Both types share the fields ``airspeed``, ``Z_alpha``, ``Z_q``, ``Z_delta``, ``M_alpha``,
``M_alpha_dot``, ``M_q`` and ``M_delta`` (same meaning and units); the sign convention
(``sign(M_delta)``, :func:`damper.model.airframe.nose_up_surface`) reads only those.
"""

from __future__ import annotations

import numpy as np

from ..atmosphere import G0
from . import airframe as af
from . import longitudinal as lon
from .longitudinal import LongitudinalDerivatives


def is_longitudinal(d) -> bool:
    """True for the four-state longitudinal model."""
    return isinstance(d, LongitudinalDerivatives)


def state_names(d) -> tuple:
    """The airframe's states in the order of :func:`state_matrices`."""
    return lon.STATES if is_longitudinal(d) else ("alpha", "q")


def state_matrices(d):
    """``A`` (..., n, n) and ``B`` (..., n, 1) of the airframe (n = 2 or 4)."""
    return lon.state_matrices(d) if is_longitudinal(d) else af.state_matrices(d)


def pitch_rate_response(d, s):
    """q/delta (1/s) at complex `s` (``d`` broadcast against `s`)."""
    return lon.pitch_rate_response(d, s) if is_longitudinal(d) else af.pitch_rate_response(d, s)


def angle_of_attack_response(d, s):
    """alpha/delta (dimensionless) at complex `s`."""
    return lon.angle_of_attack_response(d, s) if is_longitudinal(d) else af.angle_of_attack_response(d, s)


def pitch_rate_factors(d):
    """q/delta as lists of numerator and denominator factors ``(c0, c1, c2)``.

    One factor each for the short period (as it stands); two each for the longitudinal
    model (:func:`damper.model.longitudinal.pitch_rate_factors`).
    """
    if is_longitudinal(d):
        return lon.pitch_rate_factors(d)
    num, den = af.pitch_rate_factors(d)
    return [num], [den]


def short_period_part(d) -> af.Derivatives:
    """The two-state approximation from the same derivatives (`d` itself for a short-period airframe)."""
    return lon.short_period_part(d) if is_longitudinal(d) else d


def inverse_t_theta2(d):
    """1/T_theta2 (1/s): the zero of the airframe's pitch-rate response that the short-period
    handling measures fix (for the longitudinal model, the larger zero of theta/delta:
    :func:`damper.model.longitudinal.inverse_t_theta2`)."""
    return lon.inverse_t_theta2(d) if is_longitudinal(d) else af.inverse_t_theta2(d)


def load_factor_row(d):
    """Normal load factor ``n_z = C x + D delta`` (g, positive up) over the airframe's states.

    ``n_z = -(Z_alpha alpha + Z_q q + Z_delta delta) / g0`` for the short period;
    ``- Z_u u / g0`` is added for the longitudinal model.
    """
    if is_longitudinal(d):
        return lon.load_factor_row(d)
    za, zq, zd = np.broadcast_arrays(*(-np.asarray(x, dtype=float) / G0 for x in (d.Z_alpha, d.Z_q, d.Z_delta)))
    return np.stack([za, zq], -1)[..., None, :], zd[..., None, None]
