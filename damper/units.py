"""Physical quantities in case files.

A plain number is taken in the documented SI unit. A string is parsed with the
`pint` units library (imported lazily: it costs ~0.3 s) and converted to SI
base units. Angles are dimensionless in pint (radian = 1), so ``"-0.05 1/deg"``
becomes ``-2.865`` per radian.
"""

from __future__ import annotations

import math
import re
from functools import lru_cache

from .errors import CaseError

#: Reference SI unit of each named dimension, used by the case schema.
DIMENSIONS = {
    "dimensionless": "1",
    "length": "m",
    "time": "s",
    "speed": "m/s",
    "frequency": "1/s",
    "frequency2": "1/s**2",
    "mass": "kg",
    "area": "m**2",
    "inertia": "kg*m**2",
    "acceleration": "m/s**2",
    "force": "N",
    "force_time": "N*s",
    "moment": "N*m",
    "moment_time": "N*m*s",
    "pressure": "Pa",
    "angular_rate": "rad/s",
    "angular_acceleration": "rad/s**2",
}

#: Documented SI unit of each dimension, for messages and docs.
SI_UNIT_TEXT = {
    "dimensionless": "1 (rad where an angle)",
    "length": "m",
    "time": "s",
    "speed": "m/s",
    "frequency": "1/s",
    "frequency2": "1/s^2",
    "mass": "kg",
    "area": "m^2",
    "inertia": "kg*m^2",
    "acceleration": "m/s^2",
    "force": "N",
    "force_time": "N*s",
    "moment": "N*m",
    "moment_time": "N*m*s",
    "pressure": "Pa",
    "angular_rate": "rad/s",
    "angular_acceleration": "rad/s^2",
}

_SAFE_UNIT_TEXT = re.compile(r"^[\w\s.*/()+\-^%]*$")


@lru_cache(maxsize=1)
def _registry():
    import pint

    ureg = pint.UnitRegistry(autoconvert_offset_to_baseunit=True)
    return ureg


@lru_cache(maxsize=4096)
def _parse(text: str):
    ureg = _registry()
    quantity = ureg.Quantity(text)
    base = quantity.to_base_units()
    return float(base.magnitude), base.dimensionality


@lru_cache(maxsize=64)
def _dimensionality(name: str):
    return _registry().Quantity(DIMENSIONS[name]).dimensionality


def parse_quantity(value, allowed, path="") -> tuple[float, str]:
    """Convert a case-file value to SI.

    Parameters
    ----------
    value : float or int or str
        A plain number (already SI) or a string with units, e.g. ``"120 kt"``.
    allowed : sequence of str
        Names from :data:`DIMENSIONS` the value may have. A plain number is
        taken in the first one.
    path : str
        Key path, for error messages.

    Returns
    -------
    magnitude : float
        The value in SI base units (angles in rad).
    dimension : str
        Which entry of `allowed` the value matched.

    Raises
    ------
    CaseError
        Wrong type, unparseable unit, wrong dimension or non-finite value.
    """
    if isinstance(value, bool):
        raise CaseError("expected a number or a string with units, got true/false", path, value)
    if isinstance(value, (int, float)):
        magnitude = float(value)
        dimension = allowed[0]
    elif isinstance(value, str):
        text = value.strip()
        if not text:
            raise CaseError("empty value; expected a number or a string with units", path, value)
        try:  # YAML 1.1 reads '1e4' (no dot) as text: accept it as a plain number
            plain = float(text)
        except ValueError:
            plain = None
        if plain is not None:
            return parse_quantity(plain, allowed, path)
        if not _SAFE_UNIT_TEXT.match(text) or "__" in text:
            raise CaseError("not a number with units (unexpected characters)", path, value)
        try:
            magnitude, dimensionality = _parse(text)
        except Exception as exc:  # pint raises many types; all mean "cannot parse"
            raise CaseError(f"cannot read this as a quantity ({_short(exc)})", path, value) from None
        dimension = None
        for name in allowed:
            if dimensionality == _dimensionality(name):
                dimension = name
                break
        if dimension is None:
            wanted = " or ".join(SI_UNIT_TEXT[a] for a in allowed)
            got = str(dimensionality) if len(dimensionality) else "no dimension"
            raise CaseError(f"wrong dimension {got}; expected {wanted}", path, value)
    else:
        raise CaseError(
            f"expected a number or a string with units, got {type(value).__name__}", path, value
        )
    if not math.isfinite(magnitude):
        raise CaseError("must be a finite number", path, value)
    return magnitude, dimension


def _short(exc: Exception) -> str:
    text = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
    return text[:80]
