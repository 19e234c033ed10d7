"""Flight-envelope points and their derivatives from aerodynamic tables (batched).

A point is (altitude, true airspeed, configuration). Its dimensional derivatives
come from the coefficient tables interpolated linearly in Mach (clamped at the
table ends), the 1976 standard atmosphere and the configuration's mass, inertia
and CG: ``Cm_alpha(cg) = Cm_alpha(ref) + CL_alpha (cg - cg_ref)`` with the CG in
fractions of the mean chord, aft positive (the classical static-margin shift;
the CG's small effect on ``Cm_q`` and ``Cm_alpha_dot`` through the tail arm is
neglected).

Case without an envelope: the "points" are the case's conditions, and between
two conditions of one configuration the **dimensional derivatives are
interpolated linearly in the schedule variable** (with the airspeed).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..atmosphere import RHO0, standard_atmosphere
from ..case.envelope import Aerodynamics, Configuration, Envelope  # the case's types (old import paths kept)
from ..model.airframe import from_coefficients

VARIABLE_UNITS = {
    "dynamic_pressure": "Pa",
    "equivalent_airspeed": "m/s",
    "mach": "-",
    "altitude": "m",
    "airspeed": "m/s",
}

@dataclass(frozen=True)
class Points:
    """A batch of envelope points (1-D arrays of equal length).

    Attributes
    ----------
    altitude : ndarray
        m (geopotential).
    airspeed : ndarray
        True airspeed, m/s.
    configuration : ndarray of int
        Index into the envelope's configurations (or condition configuration groups).
    labels : tuple of str
        A readable name per point.
    """

    altitude: np.ndarray
    airspeed: np.ndarray
    configuration: np.ndarray
    labels: tuple = ()

    def __len__(self):
        return int(np.size(self.altitude))


def envelope_from_case(case):
    """(Envelope, Aerodynamics) of the case (:mod:`damper.case.envelope`), or (None, None)."""
    return case.envelope, case.aerodynamics


def variable_value(name, altitude, airspeed):
    """Schedule variable at points (batched): Pa, m/s, Mach or m."""
    air = standard_atmosphere(altitude)
    v = np.asarray(airspeed, dtype=float)
    if name == "dynamic_pressure":
        return 0.5 * air.density * v * v
    if name == "equivalent_airspeed":
        return v * np.sqrt(air.density / RHO0)
    if name == "mach":
        return v / air.speed_of_sound
    if name == "altitude":
        return np.asarray(altitude, dtype=float) + 0.0 * v
    if name == "airspeed":
        return v + 0.0 * np.asarray(altitude, dtype=float)
    raise KeyError(name)


def airspeed_for(name, value, altitude):
    """True airspeed (m/s) giving schedule-variable `value` at `altitude` (speed variables only)."""
    air = standard_atmosphere(altitude)
    value = np.asarray(value, dtype=float)
    if name == "dynamic_pressure":
        return np.sqrt(2.0 * value / air.density)
    if name == "equivalent_airspeed":
        return value * np.sqrt(RHO0 / air.density)
    if name == "mach":
        return value * air.speed_of_sound
    if name == "airspeed":
        return value + 0.0 * air.density
    raise KeyError(name)


def inside(env: Envelope, altitude, airspeed, tol=1e-9):
    """Which points lie inside the envelope and its limits (boolean array)."""
    h = np.asarray(altitude, dtype=float)
    v = np.asarray(airspeed, dtype=float)
    ok = (h >= env.altitude[0] - 1e-6) & (h <= env.altitude[1] + 1e-6)
    s = variable_value(env.speed_kind, h, v)
    lo, hi = env.speed
    ok &= (s >= lo * (1 - tol)) & (s <= hi * (1 + tol))
    if env.max_dynamic_pressure is not None:
        ok &= variable_value("dynamic_pressure", h, v) <= env.max_dynamic_pressure * (1 + tol)
    if env.max_mach is not None:
        ok &= variable_value("mach", h, v) <= env.max_mach * (1 + tol)
    eas = variable_value("equivalent_airspeed", h, v)
    if env.min_equivalent_airspeed is not None:
        ok &= eas >= env.min_equivalent_airspeed * (1 - tol)
    if env.max_equivalent_airspeed is not None:
        ok &= eas <= env.max_equivalent_airspeed * (1 + tol)
    return ok


def speed_limits(env: Envelope, altitude):
    """Lowest and highest true airspeed (m/s) inside the envelope at each altitude (NaN if none)."""
    h = np.asarray(altitude, dtype=float)
    lo = airspeed_for(env.speed_kind, env.speed[0], h) if env.speed_kind != "airspeed" else np.full(h.shape, env.speed[0])
    hi = airspeed_for(env.speed_kind, env.speed[1], h) if env.speed_kind != "airspeed" else np.full(h.shape, env.speed[1])
    if env.max_dynamic_pressure is not None:
        hi = np.minimum(hi, airspeed_for("dynamic_pressure", env.max_dynamic_pressure, h))
    if env.max_mach is not None:
        hi = np.minimum(hi, airspeed_for("mach", env.max_mach, h))
    if env.max_equivalent_airspeed is not None:
        hi = np.minimum(hi, airspeed_for("equivalent_airspeed", env.max_equivalent_airspeed, h))
    if env.min_equivalent_airspeed is not None:
        lo = np.maximum(lo, airspeed_for("equivalent_airspeed", env.min_equivalent_airspeed, h))
    bad = ~(lo <= hi)
    return np.where(bad, np.nan, lo), np.where(bad, np.nan, hi)


def grid_points(env: Envelope, n_alt=None, n_speed=None) -> Points:
    """A grid over the envelope: altitudes x speeds (between that altitude's limits) x configurations.

    Includes the envelope corners (lowest and highest speed at the lowest and highest altitude).
    """
    n_alt = n_alt or env.grid_altitudes
    n_speed = n_speed or env.grid_speeds
    h = np.linspace(env.altitude[0], env.altitude[1], n_alt) if env.altitude[1] > env.altitude[0] else np.array([env.altitude[0]])
    lo, hi = speed_limits(env, h)
    u = np.linspace(0.0, 1.0, n_speed)
    H = np.repeat(h[:, None], n_speed, 1)
    V = lo[:, None] + u[None, :] * (hi - lo)[:, None]
    keep = np.isfinite(V)
    H, V = H[keep], V[keep]
    return _with_configurations(env, H, V)


def _with_configurations(env, H, V):
    n_conf = len(env.configurations)
    alt = np.tile(H, n_conf)
    spd = np.tile(V, n_conf)
    conf = np.repeat(np.arange(n_conf), H.size)
    labels = tuple(
        f"{env.configurations[c].name} h={a:.0f} m V={v:.1f} m/s" for a, v, c in zip(alt, spd, conf)
    )
    return Points(alt, spd, conf, labels)


def points_at(env: Envelope, altitude, airspeed) -> Points:
    """Points at given (altitude, airspeed) pairs, for every configuration."""
    return _with_configurations(env, np.asarray(altitude, float), np.asarray(airspeed, float))


def derivatives_at(case, env: Envelope, aero: Aerodynamics, pts: Points):
    """Dimensional derivatives at envelope points (batched, 1-D).

    A :class:`~damper.model.airframe.Derivatives` for a short-period case; for a longitudinal
    case a :class:`~damper.model.longitudinal.LongitudinalDerivatives` from the speed tables
    too, with each configuration's flight-path angle
    (:func:`damper.model.longitudinal.from_coefficients`).
    """
    air = standard_atmosphere(pts.altitude)
    v = np.asarray(pts.airspeed, dtype=float)
    mach = v / air.speed_of_sound
    qbar = 0.5 * air.density * v * v
    coef = {k: np.interp(mach, aero.mach, t) for k, t in aero.tables.items()}
    conf = pts.configuration
    mass = np.array([c.mass for c in env.configurations])[conf]
    inertia = np.array([c.pitch_inertia for c in env.configurations])[conf]
    cg = np.array([c.cg for c in env.configurations])[conf]
    coef["Cm_alpha"] = coef["Cm_alpha"] + coef["CL_alpha"] * (cg - aero.reference_cg)
    flight = dict(dynamic_pressure=qbar, airspeed=v, mass=mass, pitch_inertia=inertia,
                  wing_area=case.aircraft.wing_area, mean_chord=case.aircraft.mean_chord)
    if getattr(case, "model", "short_period") == "longitudinal":
        from ..model.longitudinal import from_coefficients as lon_from_coefficients

        gamma = np.array([c.flight_path_angle for c in env.configurations])[conf]
        return lon_from_coefficients(flight_path_angle=gamma, **flight, **coef)
    return from_coefficients(**flight, **coef)


__all__ = [
    "Aerodynamics",
    "Configuration",
    "Envelope",
    "Points",
    "VARIABLE_UNITS",
    "airspeed_for",
    "derivatives_at",
    "envelope_from_case",
    "grid_points",
    "inside",
    "points_at",
    "speed_limits",
    "variable_value",
]
