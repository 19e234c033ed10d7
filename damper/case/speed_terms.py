"""The case's ``model:`` key: which keys each model takes, and the speed terms of the longitudinal model.

``model: short_period`` (the default) takes none of the speed keys; ``model: longitudinal``
needs every one of them (:data:`SPEED_DERIVATIVES` in ``conditions[].derivatives`` or
:data:`SPEED_COEFFICIENTS` in ``conditions[].coefficients`` and the ``aerodynamics`` tables).
A key given where the model does not use it, or missing where it needs it, is a
:class:`~damper.errors.CaseError` of one line naming the key path.
"""

from __future__ import annotations

import numpy as np

from ..errors import CaseError
from ..model.longitudinal import from_coefficients as lon_from_coefficients
from ..model.longitudinal import with_speed_terms

#: Dimensional speed derivatives a longitudinal case needs (``X_delta`` is optional, 0).
SPEED_DERIVATIVES = ("X_u", "X_alpha", "Z_u", "M_u")
#: Their coefficient form (each required for a longitudinal case given by coefficients).
SPEED_COEFFICIENTS = ("CL_u", "CD_u", "Cm_u", "CT_u", "CD_alpha")
#: Keys that only the longitudinal model uses, per section.
_ONLY_LONGITUDINAL = {
    "derivatives": SPEED_DERIVATIVES + ("X_delta",),
    "coefficients": SPEED_COEFFICIENTS,
}

LONGITUDINAL = "longitudinal"
SHORT_PERIOD = "short_period"

#: Default simulated time of the time responses, s, per model: a few short-period periods, or
#: long enough for a phugoid period (typically 20-40 s at low speed) to show.
DEFAULT_DURATION = {SHORT_PERIOD: 10.0, LONGITUDINAL: 60.0}


def default_duration(model) -> float:
    """Default ``responses.duration`` of a case of `model`, s (:data:`DEFAULT_DURATION`)."""
    return DEFAULT_DURATION[model]


def _not_used(path, value, line):
    return CaseError(
        "is used by the longitudinal model only; this case's model is short_period (add 'model: longitudinal' "
        "at the top, or remove the key)",
        path,
        value,
        line=line,
    )


def check_model_keys(values, raw, line):
    """Refuse speed keys on a short-period case and missing ones on a longitudinal case.

    Parameters
    ----------
    values : dict
        The validated case (SI).
    raw : callable
        ``raw(*keys)``: the value as written at a key path (None if absent).
    line : callable
        ``line(*keys)``: its line (None if unknown).
    """
    model = values["model"]
    for i, c in enumerate(values["conditions"]):
        for section, keys in _ONLY_LONGITUDINAL.items():
            sec = c.get(section)
            if sec is None:
                continue
            for key in keys:
                given = sec.get(key) is not None
                if model == SHORT_PERIOD and given:
                    raise _not_used(f"conditions[{i}].{section}.{key}", raw("conditions", i, section, key),
                                    line("conditions", i, section, key))
                if model == LONGITUDINAL and not given and key != "X_delta":
                    form = "speed derivative" if section == "derivatives" else "speed coefficient"
                    raise CaseError(
                        f"a longitudinal case needs the {form} {key} at every condition; it is missing here",
                        f"conditions[{i}].{section}",
                        line=line("conditions", i, section) or line("conditions", i),
                    )
        if model == SHORT_PERIOD and c.get("flight_path_angle") is not None:
            raise _not_used(f"conditions[{i}].flight_path_angle", raw("conditions", i, "flight_path_angle"),
                            line("conditions", i, "flight_path_angle"))
    _check_envelope_keys(values, model, raw, line)
    req = values.get("requirements") or {}
    from ..requirements.registry import LONGITUDINAL_KEYS

    for key in LONGITUDINAL_KEYS:
        if model == SHORT_PERIOD and req.get(key) is not None:
            raise CaseError("a phugoid requirement needs the longitudinal model (this case's model is short_period: "
                            "add 'model: longitudinal' and the speed derivatives)", f"requirements.{key}",
                            line=line("requirements", key))


def _check_envelope_keys(values, model, raw, line):
    aero = values.get("aerodynamics")
    if aero is not None:
        for key in SPEED_COEFFICIENTS:
            if model == SHORT_PERIOD and aero.get(key) is not None:
                raise _not_used(f"aerodynamics.{key}", raw("aerodynamics", key), line("aerodynamics", key))
            if model == LONGITUDINAL and aero.get(key) is None and values.get("envelope") is not None:
                raise CaseError(f"a longitudinal case needs the speed-coefficient table {key} (one value per Mach "
                                "breakpoint)", "aerodynamics", line=line("aerodynamics"))
    env = values.get("envelope")
    if env is not None and model == SHORT_PERIOD:
        for j, conf in enumerate(env.get("configurations") or ()):
            if conf.get("flight_path_angle") is not None:
                raise _not_used(f"envelope.configurations[{j}].flight_path_angle",
                                raw("envelope", "configurations", j, "flight_path_angle"),
                                line("envelope", "configurations", j, "flight_path_angle"))


def per_unit(key, value, dimension, mass, inertia):
    """A derivative per unit mass (X, Z) or pitch inertia (M): divided when given in force or moment form.

    Parameters
    ----------
    key : str
        Derivative name (its first letter says which: X and Z per mass, M per inertia).
    value : float
        As validated (SI of `dimension`).
    dimension : str or None
        The matched dimension; None or the first (per-unit) one leaves the value unchanged.
    mass : float
        kg. inertia : float, kg m^2.
    """
    if dimension in ("force", "force_time", "force_per_speed", "moment", "moment_time") and key[0] in "XZ":
        return value / mass
    if dimension in ("moment", "moment_time", "force_time") and key[0] == "M":
        return value / inertia
    return value


def speed_terms_from_derivatives(short, raw, mass, inertia, flight_path_angle):
    """The longitudinal model of a condition given by dimensional derivatives.

    Parameters
    ----------
    short : damper.model.airframe.Derivatives
        Its short-period derivatives (per unit mass and inertia).
    raw : dict
        The validated ``derivatives`` section (``(value, dimension)`` pairs).
    mass : float
        kg. inertia : float, kg m^2. flight_path_angle : float, rad.
    """
    extra = {}
    for key in SPEED_DERIVATIVES + ("X_delta",):
        item = raw.get(key)
        if item is None:
            extra[key] = np.asarray(0.0)
            continue
        value, dim = item if isinstance(item, tuple) else (item, None)
        extra[key] = np.asarray(float(per_unit(key, value, dim, mass, inertia)))
    return with_speed_terms(short, flight_path_angle=np.asarray(float(flight_path_angle)), **extra)


def speed_terms_from_coefficients(coefficients, flight_path_angle, **flight):
    """The longitudinal model of a condition given by coefficients (Nelson's conversion,
    :func:`damper.model.longitudinal.from_coefficients`).

    Parameters
    ----------
    coefficients : dict
        The validated ``coefficients`` section (dimensionless, per rad).
    flight_path_angle : float
        rad.
    **flight
        ``dynamic_pressure`` Pa, ``airspeed`` m/s, ``mass`` kg, ``pitch_inertia`` kg m^2,
        ``wing_area`` m^2, ``mean_chord`` m.
    """
    speed = {k: coefficients[k] for k in SPEED_COEFFICIENTS}
    short = {k: v for k, v in coefficients.items() if k not in SPEED_COEFFICIENTS}
    return lon_from_coefficients(**speed, flight_path_angle=flight_path_angle, **short, **flight)
