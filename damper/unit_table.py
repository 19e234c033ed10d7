"""A small table of the units case files use most, evaluated without the units library.

Building pint's registry costs 0.3-0.7 s at start-up, more than the whole analysis of a small
case. Unit expressions made only of the names below (with powers, ``*``, ``/``, spaces and
parentheses, the grammar of :mod:`damper.unit_grammar`) are evaluated here; any other name
falls back to pint, so the table changes no result: tests/test_unit_table.py checks every entry
and random products of them against pint itself.

Each entry gives the factor to SI base units, the dimension as exponents of (length, mass,
time), whether the unit is an angle, and pint's canonical name (messages and the Hz check read
it). Angles are dimensionless, as in pint (radian = 1).
"""

from __future__ import annotations

import math
from fractions import Fraction

from .unit_grammar import UnitSyntaxError, _tokens

#: Base dimensions of the table, in the order of the exponent tuples.
BASE = ("[length]", "[mass]", "[time]")

_FT = 0.3048  # m, exact (international foot)
_LB = 0.45359237  # kg, exact (international pound)
_G0 = 9.80665  # m/s^2, standard gravity (exact by definition)
_NMI = 1852.0  # m, exact
_MI = 1609.344  # m, exact
_IN = 0.0254  # m, exact

# name: (factor to SI, (L, M, T), angle, canonical name)
_L, _M, _T = (1, 0, 0), (0, 1, 0), (0, 0, 1)
_NONE = (0, 0, 0)
_SPEED = (1, 0, -1)
_FORCE = (1, 1, -2)
_PRESSURE = (-1, 1, -2)
_FREQ = (0, 0, -1)
_ENTRIES = {
    ("m", "meter", "metre"): (1.0, _L, False, "meter"),
    ("km", "kilometer"): (1e3, _L, False, "kilometer"),
    ("cm", "centimeter"): (1e-2, _L, False, "centimeter"),
    ("mm", "millimeter"): (1e-3, _L, False, "millimeter"),
    ("ft", "foot", "feet"): (_FT, _L, False, "foot"),
    ("inch",): (_IN, _L, False, "inch"),
    ("nmi", "nautical_mile"): (_NMI, _L, False, "nautical_mile"),
    ("mi", "mile"): (_MI, _L, False, "mile"),
    ("kg", "kilogram"): (1.0, _M, False, "kilogram"),
    ("g", "gram"): (1e-3, _M, False, "gram"),
    ("lb", "pound"): (_LB, _M, False, "pound"),
    ("slug",): (_LB * _G0 / _FT, _M, False, "slug"),
    ("s", "second", "sec"): (1.0, _T, False, "second"),
    ("ms", "millisecond"): (1e-3, _T, False, "millisecond"),
    ("min", "minute"): (60.0, _T, False, "minute"),
    ("h", "hr", "hour"): (3600.0, _T, False, "hour"),
    ("kt", "knot"): (_NMI / 3600.0, _SPEED, False, "knot"),
    ("mph",): (_MI / 3600.0, _SPEED, False, "mile_per_hour"),
    ("rad", "radian"): (1.0, _NONE, True, "radian"),
    ("deg", "degree"): (math.pi / 180.0, _NONE, True, "degree"),
    ("Hz", "hertz"): (1.0, _FREQ, False, "hertz"),
    ("N", "newton"): (1.0, _FORCE, False, "newton"),
    ("kN", "kilonewton"): (1e3, _FORCE, False, "kilonewton"),
    ("lbf", "pound_force"): (_LB * _G0, _FORCE, False, "force_pound"),
    ("Pa", "pascal"): (1.0, _PRESSURE, False, "pascal"),
    ("kPa", "kilopascal"): (1e3, _PRESSURE, False, "kilopascal"),
    ("hPa", "hectopascal"): (1e2, _PRESSURE, False, "hectopascal"),
}
#: name -> (factor, dims, angle, canonical)
UNITS = {name: value for names, value in _ENTRIES.items() for name in names}

class NotInTable(Exception):
    """The expression uses a name (or a form) the table does not cover: ask pint."""


class _Eval:
    """Evaluate a unit expression already accepted by :func:`damper.unit_grammar.check_units`.

    Operators are left-associative with equal precedence (``a/b*c`` is ``(a/b)*c``, as pint
    reads it); juxtaposition multiplies.
    """

    def __init__(self, tokens):
        self.t, self.k = tokens, 0

    def peek(self):
        return self.t[self.k] if self.k < len(self.t) else (None, None)

    def take(self):
        tok = self.peek()
        self.k += 1
        return tok

    @staticmethod
    def _combine(a, b, sign):
        (f, d, n), (g, e, m) = a, b
        names = dict(n)
        for k, v in m.items():
            names[k] = names.get(k, 0) + sign * v
        return (f * g if sign > 0 else f / g), tuple(x + sign * y for x, y in zip(d, e)), names

    def product(self):
        acc = self.power()
        while True:
            kind, value = self.peek()
            if kind == "op" and value in ("*", "/"):
                self.take()
                acc = self._combine(acc, self.power(), 1 if value == "*" else -1)
            elif kind in ("name", "num") or (kind == "op" and value == "("):
                acc = self._combine(acc, self.power(), 1)
            else:
                return acc

    def power(self):
        f, d, n = self.primary()
        kind, value = self.peek()
        if kind == "op" and value in ("**", "^"):
            self.take()
            p = self.exponent()
            f, d, n = f ** float(p), tuple(a * p for a in d), {k: v * p for k, v in n.items()}
        return f, d, n

    def primary(self):
        kind, value = self.take()
        if kind == "name":
            if value not in UNITS:
                raise NotInTable(value)
            f, d, _, canonical = UNITS[value]
            return f, tuple(Fraction(x) for x in d), {canonical: Fraction(1)}
        if kind == "num" and value == "1":
            return 1.0, (Fraction(0),) * len(BASE), {}
        if kind == "op" and value == "(":
            out = self.product()
            self.take()
            return out
        raise NotInTable(value)

    def exponent(self):
        kind, value = self.take()
        closing = kind == "op" and value == "("
        if closing:
            kind, value = self.take()
        sign = 1
        if kind == "sign":
            sign = -1 if value == "-" else 1
            kind, value = self.take()
        p = Fraction(value)
        if closing:
            if self.peek() == ("op", "/"):
                self.take()
                p /= Fraction(self.take()[1])
            self.take()
        return sign * p


def evaluate(unit_part: str):
    """Factor to SI, dimension exponents over :data:`BASE` and canonical names of a unit.

    Parameters
    ----------
    unit_part : str
        The unit after the number (grammar of :mod:`damper.unit_grammar`, already checked).

    Returns
    -------
    factor : float
        SI value of one of the unit.
    dims : tuple of Fraction
        Exponents of length, mass and time.
    names : tuple of str
        pint's canonical name of each unit named.

    Raises
    ------
    NotInTable
        A name or form outside the table (the caller asks pint).
    """
    try:  # the grammar's own tokens (the expression was checked against it before)
        tokens = _tokens(unit_part)
    except UnitSyntaxError:
        raise NotInTable(unit_part) from None
    if not tokens:
        return 1.0, (Fraction(0),) * len(BASE), ()
    ev = _Eval(tokens)
    factor, dims, names = ev.product()
    if ev.k != len(tokens):
        raise NotInTable(unit_part)
    return float(factor), tuple(dims), tuple(k for k, v in names.items() if v)  # as pint: cancelled units drop


def is_angle(canonical: str):
    """True/False for a canonical name of the table, None for a name it does not hold."""
    for f, d, angle, c in UNITS.values():
        if c == canonical:
            return angle
    return None
