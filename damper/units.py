"""Physical quantities in case files.

A plain number is taken in the documented SI unit. A string is a number and a
unit; the unit is checked against damper's own grammar (:mod:`damper.unit_grammar`:
no powers of numbers, small exponents, bounded size), then evaluated with the small table of
:mod:`damper.unit_table` when every name is in it, otherwise parsed with the `pint` units
library (imported lazily: building its registry costs 0.3-0.7 s) and converted to SI base
units. Angles are dimensionless in pint (radian = 1), so ``"-0.05 1/deg"``
becomes ``-2.865`` per radian.
"""

from __future__ import annotations

import math
import re
from functools import lru_cache

from .errors import CaseError
from .unit_grammar import UnitSyntaxError, check_units

#: Smallest positive normal double; a non-zero magnitude below it is subnormal (it has
#: lost precision, and its reciprocal overflows): refused for every quantity.
SMALLEST_NORMAL = 2.2250738585072014e-308

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
    "force_per_speed": "N*s/m",
    "per_length_time": "1/(m*s)",
    "pressure": "Pa",
    "angular_rate": "rad/s",
    "angular_acceleration": "rad/s**2",
}

#: Documented SI unit of each dimension, for messages and docs: :data:`DIMENSIONS` written
#: with ``^`` for powers.
SI_UNIT_TEXT = {dim: unit.replace("**", "^") for dim, unit in DIMENSIONS.items()}
SI_UNIT_TEXT["dimensionless"] = "1 (rad where an angle)"

_SAFE_UNIT_TEXT = re.compile(r"^[\w\s.*/()+\-^%]*$")

#: The number a quantity string must start with (or inf/nan, refused later as non-finite).
_LEADING_NUMBER = re.compile(
    r"^[+-]?(?:(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?|inf(?:inity)?(?![\w])|nan(?![\w]))", re.IGNORECASE
)
#: A further number in the unit part; allowed only as an exponent (``m**2``, ``m^2``) or in ``1/s``.
_INNER_NUMBER = re.compile(r"(?<![\w.])(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?")

#: Longest quantity string accepted (a quantity is a number and a unit).
MAX_QUANTITY_TEXT = 100

#: Human name of each dimension, for "wrong kind of unit" messages.
DIMENSION_WORDS = {
    "dimensionless": "a plain number or an angle",
    "length": "a length",
    "time": "a time",
    "speed": "a speed",
    "frequency": "a frequency",
    "frequency2": "1/s^2",
    "mass": "a mass",
    "area": "an area",
    "inertia": "a moment of inertia",
    "acceleration": "an acceleration",
    "force": "a force",
    "force_time": "a force times time",
    "moment": "a moment",
    "moment_time": "a moment times time",
    "force_per_speed": "a force per speed",
    "per_length_time": "1/(m s)",
    "pressure": "a pressure",
    "angular_rate": "an angular rate",
    "angular_acceleration": "an angular acceleration",
}


@lru_cache(maxsize=1)
def _registry():
    import pint

    ureg = pint.UnitRegistry(autoconvert_offset_to_baseunit=True)
    return ureg


def _dims(dimensionality) -> tuple:
    """pint's dimensionality as damper's canonical form: sorted (base, exponent) pairs, zeros left out."""
    from fractions import Fraction

    return tuple(sorted((str(k), Fraction(v).limit_denominator(1000)) for k, v in dict(dimensionality).items() if v))


def _table_dims(exponents) -> tuple:
    from .unit_table import BASE

    return tuple(sorted((b, e) for b, e in zip(BASE, exponents) if e))


@lru_cache(maxsize=4096)
def _parse(text: str):
    """(magnitude in SI, canonical dimension, unit names) of a checked quantity string.

    The units of :mod:`damper.unit_table` are evaluated there; anything else by pint.
    """
    from .unit_table import NotInTable, evaluate

    lead = _LEADING_NUMBER.match(text)
    if lead is not None:
        try:
            factor, exponents, names = evaluate(text[lead.end():])
        except NotInTable:
            pass
        else:
            return float(text[: lead.end()]) * factor, _table_dims(exponents), names
    ureg = _registry()
    quantity = ureg.Quantity(text)
    base = quantity.to_base_units()
    names = tuple(name for name, _ in quantity.unit_items())
    return float(base.magnitude), _dims(base.dimensionality), names


@lru_cache(maxsize=64)
def _dimensionality(name: str):
    return _parse("1 " + DIMENSIONS[name])[1]


def parse_quantity(value, allowed, path="", cycles=False) -> tuple[float, str]:
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
    cycles : bool
        For a ``frequency`` value: True if it counts cycles per second (a sample
        rate, in Hz), False if it is an angular frequency (rad/s). pint takes
        ``1 Hz = 1 rad/s`` (both are 1/s), which is wrong by 2 pi for an angular
        frequency, so Hz is refused for angular frequencies and angle units are
        refused for cycle rates.

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
        raise CaseError("expected a number or a string with units, got a yes/no value", path, value)
    if isinstance(value, (int, float)):
        try:
            magnitude = float(value)
        except OverflowError:
            raise CaseError("is too large (not a finite number)", path, value) from None
        dimension = allowed[0]
    elif isinstance(value, str):
        text = value.strip()
        plain = _plain_text_number(text, path, value)
        if plain is not None:
            return parse_quantity(plain, allowed, path, cycles)
        magnitude, dimension = _quantity_text(text, allowed, path, value, cycles)
    else:
        from .errors import kind

        raise CaseError(f"expected a number or a string with units, got {kind(value)}", path, value)
    _check_magnitude(magnitude, path, value)
    return magnitude, dimension


def _plain_text_number(text, path, value):
    """The number a text without a unit holds (YAML 1.1 reads '1e4', no dot, as text), else None.

    Raises
    ------
    CaseError
        An empty or too long text, or a plain number that is not finite ('1e400', 'inf', 'nan').
    """
    if not text:
        raise CaseError("empty value; expected a number or a string with units", path, value)
    if len(text) > MAX_QUANTITY_TEXT:
        raise CaseError(f"is too long for a number with units (more than {MAX_QUANTITY_TEXT} characters)", path, value)
    try:
        plain = float(text)
    except ValueError:
        return None
    if not math.isfinite(plain):  # name the text as written
        raise CaseError("must be a finite number", path, value)
    return plain


def _quantity_text(text, allowed, path, value, cycles):
    """``(magnitude in SI, dimension)`` of a number with units, its dimension among `allowed`
    (frequencies: Hz only for a cycle rate, angles only for an angular frequency)."""
    if not _SAFE_UNIT_TEXT.match(text) or "__" in text:
        raise CaseError("not a number with units (unexpected characters)", path, value)
    _check_unit_text(text, path, value)
    try:
        magnitude, dimensionality, unit_names = _parse(text)
    except Exception as exc:  # pint raises many types; all mean "cannot parse"
        raise CaseError(f"cannot read this as a number with units ({_short(exc)})", path, value) from None
    dimension = next((name for name in allowed if dimensionality == _dimensionality(name)), None)
    if dimension is None:
        wanted = " or ".join(SI_UNIT_TEXT[a] for a in allowed)
        got = _dimension_word(dimensionality)
        raise CaseError(f"wrong kind of unit ({got}); expected {wanted}", path, value)
    if dimension == "frequency" and math.isfinite(magnitude):
        hertz = any(n.endswith("hertz") for n in unit_names)
        if hertz and not cycles:
            raise CaseError(
                f"Hz is ambiguous for an angular frequency; write rad/s ({magnitude:.6g} Hz = "
                f"{2 * math.pi * magnitude:.6g} rad/s)",
                path,
                value,
            )
        if cycles and _has_angle(unit_names):
            raise CaseError("is a rate of samples: give it in Hz (or 1/s), not as an angle per time", path, value)
    return magnitude, dimension


def _check_magnitude(magnitude, path, value) -> None:
    """Refuse a non-finite or subnormal SI value."""
    if not math.isfinite(magnitude):
        raise CaseError("must be a finite number", path, value)
    if magnitude != 0.0 and abs(magnitude) < SMALLEST_NORMAL:
        raise CaseError(
            f"is a subnormal number (not zero, but below {SMALLEST_NORMAL:.4g} in magnitude): too small to compute "
            "with; check the value and its unit",
            path,
            value,
        )


def _check_unit_text(text, path, value) -> None:
    """One leading number, then a unit of the grammar of :mod:`damper.unit_grammar` (checked before pint)."""
    lead = _LEADING_NUMBER.match(text)
    if not lead:
        raise CaseError(f"needs a number before the unit (e.g. '1 {text}'; a unit alone is not a value)", path, value)
    unit_part = text[lead.end():]
    for extra in _INNER_NUMBER.finditer(unit_part):
        before = unit_part[: extra.start()].rstrip().rstrip("+-").rstrip()
        if before.endswith("^") or before.endswith("**"):
            continue  # an exponent: "m**2", "s^-1"
        rest = unit_part[extra.end():].lstrip()
        if extra.group() == "1" and rest.startswith("/"):
            continue  # "1/deg", "1/s**2"
        raise CaseError(
            f"has a second number {extra.group()!r} after the first; write one number and a unit", path, value
        )
    try:  # only a checked subset reaches pint, which evaluates what it is given (10**10**10 ...)
        check_units(unit_part)
    except UnitSyntaxError as exc:
        raise CaseError(f"not a unit damper accepts: {exc}", path, value) from None


def _dimension_word(dimensionality) -> str:
    for name, word in DIMENSION_WORDS.items():
        if dimensionality == _dimensionality(name):
            return word
    if not dimensionality:
        return "no dimension"
    return " * ".join(f"{b}" if e == 1 else f"{b} ** {e}" for b, e in dimensionality)


@lru_cache(maxsize=256)
def _is_angle_unit(name: str) -> bool:
    from .unit_table import is_angle

    known = is_angle(name)
    if known is not None:
        return known
    _, root = _registry().get_root_units(name)
    return "radian" in str(root)


def _has_angle(unit_names) -> bool:
    return any(_is_angle_unit(n) for n in unit_names)


def _short(exc: Exception) -> str:
    names = getattr(exc, "unit_names", None)
    if names and isinstance(names, (tuple, list)):
        return f"unknown unit {names[0]!r}"
    if isinstance(exc, (ArithmeticError, ValueError)) and "too large" in str(exc):
        return "a number is too large"
    return "not a valid unit expression"
