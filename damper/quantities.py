"""Units of result fields, written once beside the field: what the JSON documents read.

A result dataclass declares each numeric field with :func:`quantity` (or a derived value with
:func:`quantity_property`); the documents (``damper/output/documents/serialize.py``) read the
unit and the JSON key from here at run time with :func:`dataclasses.fields`, so no key is
typed by hand and output imports nothing from the model or the measures.

The key rule (:func:`json_key`): the attribute name followed by the unit's suffix
(:func:`unit_suffix`: ``"rad/s"`` -> ``_rad_s``, ``"1/s"`` -> ``_1_s``, ``"dB"`` -> ``_db``,
dimensionless -> nothing), unless the name already ends with it (``gain_margin_db``); a
field whose published key differs from the rule (kept so documents stay byte-identical) gives
its key explicitly.

This module imports nothing from damper: every layer may use it.
"""

from __future__ import annotations

import dataclasses
import functools

#: Metadata key of a field's unit, as written in the docs (``"rad/s"``; ``""``: dimensionless).
UNIT = "damper_unit"
#: Metadata key of a field's JSON key when it is not the rule's (None: the rule's).
KEY = "damper_key"
#: Metadata key of a field's one-line description (may be empty).
DOC = "damper_doc"

#: Units written as dimensionless.
DIMENSIONLESS = ("", "-", "1")


def quantity(unit: str, key: str | None = None, doc: str = "", **kwargs):
    """A :func:`dataclasses.field` carrying a unit and, optionally, its JSON key.

    Parameters
    ----------
    unit : str
        The unit as the docs write it (``"rad/s"``, ``"dB"``, ``"kg m^2"``; ``""`` for a
        dimensionless value).
    key : str, optional
        The JSON key when it is not :func:`json_key`'s rule (a published key kept as it is).
    doc : str
        One line on the value (optional; the class's docstring is the full description).
    **kwargs
        Passed to :func:`dataclasses.field` (``default``, ``compare`` ...).
    """
    meta = dict(kwargs.pop("metadata", None) or {})
    meta.update({UNIT: unit, KEY: key, DOC: doc})
    return dataclasses.field(metadata=meta, **kwargs)


class QuantityProperty(property):
    """A read-only property carrying a unit and a JSON key like a :func:`quantity` field."""

    unit: str = ""
    key: str | None = None
    doc: str = ""


def quantity_property(unit: str, key: str | None = None, doc: str = ""):
    """Decorator: a property computed from the fields, serialised like a :func:`quantity` field.

    Parameters
    ----------
    unit, key, doc
        As :func:`quantity`.
    """

    def wrap(fn):
        prop = QuantityProperty(fn)
        prop.unit, prop.key, prop.doc = unit, key, doc
        return prop

    return wrap


def unit_suffix(unit: str) -> str:
    """The JSON key suffix of a unit, without its leading underscore ("" when dimensionless).

    Lower case; ``/`` and spaces become ``_``; ``^``, ``*`` and parentheses are dropped:
    ``"rad/s"`` -> ``"rad_s"``, ``"1/s"`` -> ``"1_s"``, ``"m/s^2"`` -> ``"m_s2"``,
    ``"kg m^2"`` -> ``"kg_m2"``, ``"1/(m s)"`` -> ``"1_m_s"``, ``"dB"`` -> ``"db"``.
    """
    if unit in DIMENSIONLESS:
        return ""
    text = unit.lower()
    for gone in "^*()":
        text = text.replace(gone, "")
    return "_".join(text.replace("/", " ").split())


def rule_key(name: str, unit: str) -> str:
    """`name` with the suffix of `unit` (unless it already ends with it)."""
    suffix = unit_suffix(unit)
    if not suffix or name.endswith("_" + suffix):
        return name
    return f"{name}_{suffix}"


@dataclasses.dataclass(frozen=True)
class Quantity:
    """One annotated value of a result type.

    Attributes
    ----------
    attribute : str
        The field's (or property's) name.
    key : str
        Its JSON key.
    unit : str
        Its unit as the docs write it (``""``: dimensionless).
    doc : str
        One line on it (may be empty).
    """

    attribute: str
    key: str
    unit: str
    doc: str = ""


@functools.lru_cache(maxsize=None)
def _declared(cls) -> dict:
    """Every annotated field and property of `cls`, by attribute name, in declaration order.

    Cached per class (a class's fields do not change; the documents ask once per value written).
    Callers must not change the dict.
    """
    out = {}
    for f in dataclasses.fields(cls):
        if UNIT in f.metadata:
            m = f.metadata
            out[f.name] = Quantity(f.name, m[KEY] or rule_key(f.name, m[UNIT]), m[UNIT], m[DOC])
    for klass in reversed(cls.__mro__):
        for name, value in vars(klass).items():
            if isinstance(value, QuantityProperty):
                out[name] = Quantity(name, value.key or rule_key(name, value.unit), value.unit, value.doc)
    return out


def quantities(obj, names=None) -> tuple:
    """The :class:`Quantity` of each annotated value of a result dataclass (instance or class).

    Parameters
    ----------
    obj : dataclass instance or class
    names : sequence of str, optional
        The attributes wanted, in this order (the document's order). Default: every
        annotated field in declaration order, then the annotated properties.

    Raises
    ------
    KeyError
        A name that is not an annotated field or property of `obj`.
    """
    cls = obj if isinstance(obj, type) else type(obj)
    return _chosen(cls, None if names is None else tuple(names))


@functools.lru_cache(maxsize=4096)
def _chosen(cls, names) -> tuple:
    declared = _declared(cls)
    if names is None:
        return tuple(declared.values())
    missing = [n for n in names if n not in declared]
    if missing:
        raise KeyError(f"{cls.__name__} has no annotated quantity {', '.join(missing)}")
    return tuple(declared[n] for n in names)


def annotated(cls) -> bool:
    """True when the dataclass `cls` declares at least one quantity."""
    return dataclasses.is_dataclass(cls) and bool(_declared(cls))
