"""The grammar of the unit part of a quantity string (``"120 kt"`` -> ``"kt"``).

pint evaluates a unit string as an arithmetic expression, numbers and powers included, so
``"10**10**10 kt"`` would make it compute a number with ten billion digits (and never
finish). damper hands pint only strings of this grammar, checked here first:

::

    units    := product
    product  := power { ("*" | "/" | spaces) power }
    power    := primary [ ("**" | "^") exponent ]
    primary  := NAME | "1" (only before "/", as in 1/deg) | "(" product ")"
    exponent := [+-] DIGITS [ "." DIGITS ]  |  "(" [+-] DIGITS [ "/" DIGITS ] ")"

with ``NAME`` a letter or ``_`` followed by letters, digits or ``_`` (or ``%``), every
exponent at most :data:`MAX_EXPONENT` in magnitude, no exponent on an exponent or on the
number, parentheses nested at most :data:`MAX_DEPTH` deep and at most
:data:`MAX_TOKENS` tokens. Every accepted string is therefore a product of at most a few
dozen unit names with small powers: pint's work on it is bounded by its length (a quantity
string has at most 100 characters), which bounds the time as well as the size.
"""

from __future__ import annotations

import re

#: Largest magnitude of a unit exponent (m**3, s**-2 ... ; no unit is raised further).
MAX_EXPONENT = 12
#: Deepest nesting of parentheses.
MAX_DEPTH = 4
#: Most tokens in a unit expression.
MAX_TOKENS = 60

_TOKEN = re.compile(r"\s*(?:(\*\*|\^|\*|/|\(|\))|([A-Za-z_][A-Za-z0-9_]*|%)|(\d+(?:\.\d+)?)|([+-]))")


class UnitSyntaxError(ValueError):
    """The unit part does not follow the grammar; the message says what is wrong."""


def _tokens(text):
    out, pos = [], 0
    text = text.rstrip()
    while pos < len(text):
        m = _TOKEN.match(text, pos)
        if m is None or m.end() == pos:
            raise UnitSyntaxError(f"unexpected {text[pos:].strip()[:1]!r} in the unit")
        op, name, number, sign = m.groups()
        out.append(("op", op) if op else ("name", name) if name else ("num", number) if number else ("sign", sign))
        pos = m.end()
        if len(out) > MAX_TOKENS:
            raise UnitSyntaxError(f"the unit is too long (more than {MAX_TOKENS} parts)")
    return out


class _Parser:
    def __init__(self, tokens):
        self.t = tokens
        self.k = 0

    def peek(self, offset=0):
        j = self.k + offset
        return self.t[j] if j < len(self.t) else (None, None)

    def take(self):
        tok = self.peek()
        self.k += 1
        return tok

    def product(self, depth):
        self.power(depth)
        while True:
            kind, value = self.peek()
            if kind == "op" and value in ("*", "/"):
                self.take()
                self.power(depth)
            elif kind in ("name", "num") or (kind == "op" and value == "("):
                self.power(depth)  # juxtaposition: "N m" is N*m
            else:
                return

    def power(self, depth):
        self.primary(depth)
        kind, value = self.peek()
        if kind == "op" and value in ("**", "^"):
            self.take()
            self.exponent()
            kind, value = self.peek()
            if kind == "op" and value in ("**", "^"):
                raise UnitSyntaxError("an exponent cannot itself have an exponent (write one power per unit)")

    def primary(self, depth):
        kind, value = self.take()
        if kind == "name":
            return
        if kind == "num" and value == "1" and self.peek() == ("op", "/"):
            return  # 1/deg, 1/s**2
        if kind == "op" and value == "(":
            if depth >= MAX_DEPTH:
                raise UnitSyntaxError(f"parentheses nested more than {MAX_DEPTH} deep")
            self.product(depth + 1)
            if self.take() != ("op", ")"):
                raise UnitSyntaxError("a '(' is not closed")
            return
        if kind == "op" and value in ("**", "^"):
            raise UnitSyntaxError("a power must follow a unit name, not the number (write the number as e.g. 1e10)")
        if kind is None:
            raise UnitSyntaxError("the unit ends too early")
        raise UnitSyntaxError(f"expected a unit name, found {value!r}")

    def exponent(self):
        kind, value = self.take()
        text = ""
        if kind == "op" and value == "(":
            kind, value = self.take()
            if kind == "sign":
                text, (kind, value) = value, self.take()
            if kind != "num":
                raise UnitSyntaxError("an exponent must be a number")
            text += value
            if self.peek() == ("op", "/"):
                self.take()
                kind, den = self.take()
                if kind != "num" or "." in den or int(den) == 0:
                    raise UnitSyntaxError("a fractional exponent needs a whole, non-zero denominator")
                text += "/" + den
            if self.take() != ("op", ")"):
                raise UnitSyntaxError("a '(' is not closed")
        else:
            if kind == "sign":
                text, (kind, value) = value, self.take()
            if kind != "num":
                raise UnitSyntaxError("an exponent must be a number")
            text += value
        magnitude = abs(float(text.split("/")[0]))
        if magnitude > MAX_EXPONENT:
            raise UnitSyntaxError(f"the exponent {text} is too large (at most {MAX_EXPONENT} in magnitude)")


def check_units(text: str) -> None:
    """Check the unit part of a quantity string (after its number) against the grammar.

    Raises
    ------
    UnitSyntaxError
        With a message in plain words.
    """
    tokens = _tokens(text)
    if not tokens:
        return
    parser = _Parser(tokens)
    parser.product(0)
    if parser.k < len(tokens):
        kind, value = parser.peek()
        if kind == "op" and value == ")":
            raise UnitSyntaxError("a ')' has no matching '('")
        raise UnitSyntaxError(f"unexpected {value!r} in the unit")


__all__ = ["MAX_DEPTH", "MAX_EXPONENT", "MAX_TOKENS", "UnitSyntaxError", "check_units"]
