"""The kinds of keys a case file has (quantity, text, number, choice, section, list) and their checks.

Each kind validates one parsed YAML value and returns it in SI; every error names the key
path and the value. The case file's sections are built from these in
:mod:`damper.case.schema`.
"""

from __future__ import annotations

import difflib
import math
from dataclasses import dataclass, field

from ..errors import CaseError, Raw, kind
from ..units import SI_UNIT_TEXT, parse_quantity
from .ranges import MAX_LIST_ITEMS

REQUIRED = object()

#: Keys whose frequency counts cycles per second (Hz), not radians per second.
#: Every other ``frequency`` quantity is angular (rad/s) and refuses Hz, which
#: pint would otherwise take as 1 rad/s (wrong by 2 pi). ``Quantity(cycles=...)``
#: overrides this per spec.
CYCLE_RATE_KEYS = frozenset({"sample_rate"})


@dataclass(frozen=True)
class Quantity:
    """A physical quantity: a plain number in ``dims[0]``'s SI unit or a string with units.

    ``dims`` lists the accepted dimensions; the first is the plain-number unit.
    The validated value is ``(si_value, dimension)`` when several dimensions are
    accepted, else the SI float. ``cycles`` marks a frequency counted in Hz
    (None: decided by the key name, see :data:`CYCLE_RATE_KEYS`).
    """

    dims: tuple
    doc: str = ""
    default: object = REQUIRED
    positive: bool = False
    nonnegative: bool = False
    low: float | None = None
    high: float | None = None
    nonzero: bool = False
    cycles: bool | None = None
    plausible: str | None = None  # a key of damper.case.ranges.RANGES: refused outside its accepted range
    what: str | None = None  # a dimensionless value's readable type (docs): "Mach number", "per rad", "angle"

    def check(self, value, path):
        cycles = self.cycles if self.cycles is not None else _last_key(path) in CYCLE_RATE_KEYS
        si, dim = parse_quantity(value, self.dims, path, cycles)
        got = ""
        if isinstance(value, str) and dim == self.dims[0] and " ".join(value.split()) != _with_unit(si, dim):
            got = f" (it is {_with_unit(si, dim)})"  # the user's unit converted, e.g. '300000 ft'
        if self.positive and not si > 0:
            raise CaseError("must be positive", path, value)
        if self.nonnegative and not si >= 0:
            raise CaseError("must not be negative", path, value)
        if self.nonzero and si == 0:
            raise CaseError("must not be zero", path, value)
        if self.low is not None and si < self.low:
            raise CaseError(f"must be at least {_with_unit(self.low, self.dims[0])}{got}", path, value)
        if self.high is not None and si > self.high:
            raise CaseError(f"must be at most {_with_unit(self.high, self.dims[0])}{got}", path, value)
        if self.plausible is not None:
            from .ranges import check

            check(self.plausible, si, path, value)
        return (si, dim) if len(self.dims) > 1 else si

    def describe(self) -> str:
        """The readable type of the key for docs/case-file.md ("speed in m/s (plain number: m/s)")."""
        first = self.dims[0]
        if first == "dimensionless":
            text = _DIMENSIONLESS_TYPES.get(self.what or "number", self.what)
        elif len(self.dims) > 1:  # a derivative: the per-unit form or the force / moment form
            others = " or ".join(SI_UNIT_TEXT[d] for d in self.dims[1:])
            text = f"{SI_UNIT_TEXT[first]} (plain number) or {others} per rad"
        else:
            word, unit = _DIMENSION_TYPES.get(first, ("quantity", SI_UNIT_TEXT[first]))
            if self.cycles:
                unit = "Hz"
            text = f"{word} in {unit} (plain number: {unit})"
        if self.plausible is not None:
            from .ranges import RANGES

            r = RANGES[self.plausible]
            span = f"{r.low:g} to {r.high:g}" if r.low is not None else f"at most {r.high:g}"
            text += f"; accepted: {span}"
        return text


#: Readable types of dimensioned quantities: dimension -> (word, SI unit of a plain number).
_DIMENSION_TYPES = {
    "length": ("length", "m"),
    "time": ("time", "s"),
    "speed": ("speed", "m/s"),
    "frequency": ("frequency", "rad/s"),
    "mass": ("mass", "kg"),
    "area": ("area", "m^2"),
    "inertia": ("inertia", "kg*m^2"),
    "acceleration": ("acceleration", "m/s^2"),
    "pressure": ("pressure", "Pa"),
    "angular_rate": ("angular rate", "rad/s"),
    "angular_acceleration": ("angular acceleration", "rad/s^2"),
}

#: Readable types of dimensionless quantities (``Quantity.what``).
_DIMENSIONLESS_TYPES = {
    "number": "number",
    "Mach number": "Mach number",
    "per rad": "per rad (plain number; or e.g. '0.09 1/deg')",
    "angle": "angle in rad (plain number: rad; or e.g. '10 deg')",
}


@dataclass(frozen=True)
class Text:
    """A string."""

    doc: str = ""
    default: object = REQUIRED
    max_length: int = 200

    def check(self, value, path):
        if not isinstance(value, str):
            hint = ""
            if isinstance(value, bool):
                hint = " (YAML reads yes, no, on, off, true, false that way; put the text in quotes)"
            elif not isinstance(value, (dict, list)):
                hint = " (put it in quotes to use it as text)"
            raise CaseError(f"expected text, got {_kind(value)}{hint}", path, value)
        if not value.strip():
            raise CaseError("must not be empty", path, value)
        if len(value) > self.max_length:
            raise CaseError(f"is longer than {self.max_length} characters", path, value)
        bad = _first_control_character(value)
        if bad is not None:
            k, ch, cat = bad
            if ch in "\n\r":
                what = "a line break"
            elif ch == "\t":
                what = "a tab"
            else:
                what = {"Cc": "a control character", "Cf": "an invisible formatting character"}.get(
                    cat, "a character that is not printable text")
            raise CaseError(
                f"contains {what} (U+{ord(ch):04X}) at character {k + 1}: text appears in tables, file headers "
                "and the report, so write it on one line with printable characters",
                path,
                value,
            )
        return value

    def describe(self) -> str:
        return "text"


def _first_control_character(text):
    """(index, character, Unicode category) of the first control, format (e.g. bidirectional
    override), surrogate, private-use or unassigned character in `text` (categories C*), or None."""
    import unicodedata

    for k, ch in enumerate(text):
        cat = unicodedata.category(ch)
        if cat[0] == "C":
            return k, ch, cat
    return None


@dataclass(frozen=True)
class Integer:
    """A whole number within [low, high]."""

    doc: str = ""
    default: object = REQUIRED
    low: int = 0
    high: int = 10**9

    def check(self, value, path):
        if isinstance(value, bool) or not isinstance(value, int):
            if isinstance(value, float) and value.is_integer():
                value = int(value)
            elif isinstance(value, float):
                raise CaseError("must be a whole number", path, value)
            else:
                raise CaseError(f"expected a whole number, got {_kind(value)}", path, value)
        if not self.low <= value <= self.high:
            raise CaseError(f"must be between {self.low} and {self.high}", path, value)
        return value

    def describe(self) -> str:
        if self.high is None or self.high >= 2**31:
            return f"whole number, at least {self.low}"
        return f"whole number {self.low}-{self.high}"


@dataclass(frozen=True)
class Number:
    """A plain dimensionless number (no unit string)."""

    doc: str = ""
    default: object = REQUIRED
    low: float | None = None
    high: float | None = None

    def check(self, value, path):
        raw = value
        if isinstance(value, str):
            try:
                value = float(value)
            except ValueError:
                raise CaseError("expected a plain number (no units)", path, raw) from None
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise CaseError(f"expected a number, got {_kind(value)}", path, raw)
        try:
            value = float(value)
        except OverflowError:
            raise CaseError("is too large (not a finite number)", path, raw) from None
        if not math.isfinite(value):
            raise CaseError("must be a finite number", path, raw)
        if self.low is not None and value < self.low:
            raise CaseError(f"must be at least {self.low:g}", path, raw)
        if self.high is not None and value > self.high:
            raise CaseError(f"must be at most {self.high:g}", path, raw)
        return value

    def describe(self) -> str:
        return "number"


@dataclass(frozen=True)
class Choice:
    """One of a fixed set of words."""

    options: tuple
    doc: str = ""
    default: object = REQUIRED

    def check(self, value, path):
        if not isinstance(value, str) or value not in self.options:
            hint = _suggest(str(value), self.options) if isinstance(value, str) else ""
            raise CaseError(f"must be one of {', '.join(self.options)}{hint}", path, value)
        return value

    def describe(self) -> str:
        return " | ".join(self.options)


@dataclass(frozen=True)
class Section:
    """A mapping with known keys.

    ``exactly_one`` lists groups of keys of which exactly one must be given;
    ``at_most_one`` groups of which at most one may be given.
    """

    fields: dict
    doc: str = ""
    default: object = REQUIRED
    exactly_one: tuple = ()
    at_most_one: tuple = ()

    def check(self, value, path):
        if not isinstance(value, dict):
            raise CaseError(f"expected a section of keys, got {_kind(value)}", path, value)
        lines = getattr(value, "lines", {})
        for key in value:
            if key not in self.fields:
                hint = _suggest(key, self.fields) if isinstance(key, str) else ""
                if not hint:
                    hint = _belongs_elsewhere(key, path)
                if not hint and len(self.fields) <= 12:
                    hint = f" (the keys here are {', '.join(self.fields)})"
                raise CaseError(
                    f"unknown key {_show_key(key)}{hint}", _join(path, str(key)), line=lines.get(key)
                )
        for group in self.exactly_one:
            given = [k for k in group if k in value]
            if not given:
                raise CaseError(f"needs one of {_or(group)} (none is given)", path, line=_first_line(value))
            if len(given) > 1:
                raise CaseError(
                    f"give only one of {_or(group)} (found {' and '.join(given)})",
                    path,
                    line=lines.get(given[1], _first_line(value)),
                )
        for group in self.at_most_one:
            given = [k for k in group if k in value]
            if len(given) > 1:
                raise CaseError(
                    f"give at most one of {_or(group)} (found {' and '.join(given)})",
                    path,
                    line=lines.get(given[1], _first_line(value)),
                )
        out = {}
        for key, spec in self.fields.items():
            sub = _join(path, key)
            if key in value:
                item = value[key]
                try:
                    if item is None:
                        out[key] = _null(spec, sub)
                    else:
                        out[key] = spec.check(item, sub)
                except CaseError as exc:
                    if exc.line is None and key in lines:
                        exc = exc.with_location(line=lines[key])
                    texts = getattr(value, "texts", {})
                    if isinstance(item, bool) and key in texts and exc.path == sub:
                        exc = CaseError(exc.message, exc.path, Raw(texts[key]), exc.file, exc.line)
                    raise exc from None
            elif spec.default is REQUIRED:
                in_group = any(key in g for g in self.exactly_one)
                if not in_group:
                    where = f"in {path}" if path else "at the top level"
                    raise CaseError(f"missing required key {key!r} {where}", line=_first_line(value))
                out[key] = None
            elif isinstance(spec, Section) and isinstance(spec.default, dict):
                out[key] = spec.check(spec.default, sub)
            else:
                out[key] = spec.default
        return out

    def describe(self) -> str:
        return "section"


@dataclass(frozen=True)
class Items:
    """A list of items of one spec."""

    item: object
    doc: str = ""
    default: object = REQUIRED
    min_items: int = 1
    max_items: int = MAX_LIST_ITEMS

    def check(self, value, path):
        if not isinstance(value, list):
            raise CaseError(f"expected a list (items starting with '- '), got {_kind(value)}", path, value)
        if len(value) < self.min_items:
            raise CaseError(f"needs at least {self.min_items} item{'s' if self.min_items > 1 else ''}", path, value)
        if len(value) > self.max_items:
            raise CaseError(f"has more than {self.max_items} items ({len(value)})", path)
        lines = getattr(value, "lines", [])
        out = []
        for i, item in enumerate(value):
            sub = f"{path}[{i}]"
            try:
                if item is None:
                    raise CaseError("empty list item (a '-' with nothing after it)", sub)
                out.append(self.item.check(item, sub))
            except CaseError as exc:
                if exc.line is None and i < len(lines):
                    exc = exc.with_location(line=lines[i])
                raise exc from None
        return out

    def describe(self) -> str:
        if isinstance(self.item, (Quantity, Number, Integer, Text, Choice)):
            return f"list, each: {self.item.describe()}"
        return "list"


def _kind(value) -> str:
    return kind(value)


def _join(path, key):
    return f"{path}.{key}" if path else key


def _last_key(path: str) -> str:
    return path.rsplit(".", 1)[-1].split("[", 1)[0]


def _first_line(value):
    lines = getattr(value, "lines", None)
    if isinstance(lines, dict) and lines:
        return min(lines.values())
    return None


def _suggest(word, options):
    lower = {o.lower(): o for o in options}
    if word.lower() in lower:  # case slips first: 'm_q' is 'M_q', not 'Z_q'
        close = [lower[word.lower()]]
    else:
        close = difflib.get_close_matches(word, list(options), n=1, cutoff=0.6)
    if close:
        return f"; did you mean {close[0]!r}?"
    return ""


def _or(keys) -> str:
    keys = list(keys)
    return ", ".join(keys[:-1]) + " or " + keys[-1] if len(keys) > 1 else "".join(keys)


def _show_key(key) -> str:
    from ..errors import _show

    return _show(key)


def _with_unit(si: float, dim: str) -> str:
    unit = SI_UNIT_TEXT[dim]
    return f"{si:g}" if dim == "dimensionless" else f"{si:g} {unit}"


def _null(spec, path):
    """The value of a key written with nothing after it (YAML null)."""
    if spec.default is None or (isinstance(spec, Items) and spec.default in ((), [])):
        if not isinstance(spec, Section):
            return spec.default  # optional with no default value: empty means absent
    if spec.default is REQUIRED or isinstance(spec, Section):
        raise CaseError("has no value", path)
    default = spec.default
    if isinstance(spec, Quantity) and isinstance(default, (int, float)):
        default = _with_unit(float(default), spec.dims[0])
    raise CaseError(f"has no value; give one, or remove the key to use the default ({default})", path)


def _belongs_elsewhere(key, path) -> str:
    """'; it belongs in aircraft' when `key` is a known key of another section."""
    from . import schema  # the whole case (built from the kinds here)

    root = getattr(schema, "CASE", None)
    if root is None or not isinstance(key, str):
        return ""
    found = []
    stack = [("", root)]
    while stack:
        where, spec = stack.pop()
        if isinstance(spec, Items):
            stack.append((where + "[]", spec.item))
        elif isinstance(spec, Section):
            if key in spec.fields and where != _generic(path):
                found.append(where or "the top level")
            for k, sub in spec.fields.items():
                stack.append((_join(where, k), sub))
    if not found:
        return ""
    found = sorted(set(found))
    return f"; it belongs in {' or '.join(found[:2])}"


def _generic(path: str) -> str:
    """``conditions[3].derivatives`` -> ``conditions[].derivatives``."""
    import re

    return re.sub(r"\[\d+\]", "[]", path)
