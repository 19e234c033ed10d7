"""The ``envelope:`` and ``aerodynamics:`` sections as frozen data (SI).

:func:`envelope_sections` turns the validated values into an :class:`Envelope` (the
altitude and speed ranges, the limits, the mass / CG configurations, the verification
grid) and an :class:`Aerodynamics` (coefficient tables against Mach). The analysis
(:mod:`damper.analysis.envelope`) places points in them; it never reads the case's dicts.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: The short-period coefficient tables (absent optional tables are zero).
COEFFICIENT_TABLES = ("CL_alpha", "CD", "CL_delta", "Cm_alpha", "Cm_alpha_dot", "Cm_q", "Cm_delta", "CL_q")
#: Speed-derivative tables of the longitudinal model (absent tables of a short-period case are left out).
SPEED_TABLES = ("CL_u", "CD_u", "Cm_u", "CT_u", "CD_alpha")


@dataclass(frozen=True)
class Configuration:
    """A mass / CG configuration.

    Attributes
    ----------
    name : str
    mass : float
        kg.
    pitch_inertia : float
        kg m^2.
    cg : float
        Centre of gravity, fraction of the mean chord aft of its leading edge.
    flight_path_angle : float
        Trim flight-path angle, rad, positive climbing (longitudinal model only).
    """

    name: str
    mass: float
    pitch_inertia: float
    cg: float
    flight_path_angle: float = 0.0


@dataclass(frozen=True)
class Envelope:
    """The envelope as the case gives it (SI).

    Attributes
    ----------
    altitude : (float, float)
        m, as given (see ``Case.altitude_kind``; (0, 0) when the case gives no altitude range).
    speed_kind : str
        ``airspeed``, ``equivalent_airspeed`` or ``mach``: how the speed range is given.
    speed : (float, float)
        In the speed kind's unit (m/s, or Mach).
    max_dynamic_pressure : float or None
        Pa.
    max_mach : float or None
    min_equivalent_airspeed, max_equivalent_airspeed : float or None
        m/s.
    configurations : tuple of Configuration
    grid_altitudes, grid_speeds : int
        Verification grid density (altitude levels; speed points per altitude).
    """

    altitude: tuple
    speed_kind: str
    speed: tuple
    max_dynamic_pressure: float | None
    max_mach: float | None
    min_equivalent_airspeed: float | None
    max_equivalent_airspeed: float | None
    configurations: tuple
    grid_altitudes: int
    grid_speeds: int


@dataclass(frozen=True)
class Aerodynamics:
    """Coefficient tables against Mach, with the CG at which Cm_alpha is given.

    Attributes
    ----------
    reference_cg : float
        Fraction of the mean chord.
    mach : ndarray, shape (m,)
        Mach breakpoints, ascending.
    tables : dict of str to ndarray, shape (m,)
        Each coefficient (per rad where it is a slope) at every breakpoint.
    """

    reference_cg: float
    mach: np.ndarray
    tables: dict


def envelope_sections(values, aircraft):
    """``(Envelope, Aerodynamics)`` from the validated ``envelope`` and ``aerodynamics`` values, or (None, None).

    Parameters
    ----------
    values : dict
        The validated case (SI), as :func:`damper.case.schema.check` returns it.
    aircraft : damper.case.model.Aircraft
        Gives the default configuration (its mass and pitch inertia at the reference CG).
    """
    e = values.get("envelope")
    if e is None:
        return None, None
    a = values["aerodynamics"]
    kind = next(k for k in ("airspeed", "equivalent_airspeed", "mach") if e[k] is not None)
    ref = a["reference_cg"]
    confs = e["configurations"] or [
        {"name": "nominal", "mass": aircraft.mass, "pitch_inertia": aircraft.pitch_inertia, "cg": None}
    ]
    configurations = tuple(
        Configuration(c["name"], c["mass"], c["pitch_inertia"], ref if c["cg"] is None else c["cg"],
                      float(c.get("flight_path_angle") or 0.0)) for c in confs
    )
    alt = e["altitude"] or {"min": 0.0, "max": 0.0}
    env = Envelope(
        altitude=(alt["min"], alt["max"]),
        speed_kind=kind,
        speed=(e[kind]["min"], e[kind]["max"]),
        max_dynamic_pressure=e["max_dynamic_pressure"],
        max_mach=e["max_mach"],
        min_equivalent_airspeed=e["min_equivalent_airspeed"],
        max_equivalent_airspeed=e["max_equivalent_airspeed"],
        configurations=configurations,
        grid_altitudes=e["grid"]["altitudes"],
        grid_speeds=e["grid"]["speeds"],
    )
    mach = np.asarray(a["mach"], dtype=float)
    tables = {}
    for key in COEFFICIENT_TABLES:
        given = a.get(key)
        tables[key] = np.zeros_like(mach) if given is None else np.asarray(given, dtype=float)
    for key in SPEED_TABLES:
        if a.get(key) is not None:
            tables[key] = np.asarray(a[key], dtype=float)
    return env, Aerodynamics(ref, mach, tables)


__all__ = ["Aerodynamics", "COEFFICIENT_TABLES", "Configuration", "Envelope", "SPEED_TABLES", "envelope_sections"]
