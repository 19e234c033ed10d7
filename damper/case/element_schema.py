"""The ``loop.filters[]`` schema, from the element registry (:data:`damper.model.elements.ELEMENTS`).

Each filter kind's keys, units, bounds and docs text are its element class's ``parameters``;
the section's docs list every kind with its transfer function. A key two kinds share (same
name) must have the same unit and bounds: ``tests/test_element_registry.py`` checks it.
"""

from __future__ import annotations

from ..model.elements import ELEMENTS, FILTER_KINDS
from .spec_types import Choice, Number, Quantity, Section


def parameter_spec(kinds, p):
    """The schema entry of parameter `p` (:class:`damper.model.elements.Parameter`) of the filter `kinds`."""
    unit = "" if p.unit == "-" else f", {p.unit}"
    doc = f"{', '.join(kinds)}: {p.doc}{unit}."
    if p.dimension == "dimensionless":
        return Number(doc, default=None, low=p.low, high=p.high)
    return Quantity((p.dimension,), doc, default=None, positive=p.positive, nonnegative=p.nonnegative)


def _filter_fields():
    owners = {}  # parameter name -> (parameter, kinds naming it), in the kinds' order
    for kind in FILTER_KINDS:
        for p in ELEMENTS[kind].parameters:
            owners.setdefault(p.name, (p, []))[1].append(kind)
    return {name: parameter_spec(kinds, p) for name, (p, kinds) in owners.items()}


def _filters_doc():
    kinds = "; ".join(f"`{k}`: {ELEMENTS[k].label} {ELEMENTS[k].formula}" for k in FILTER_KINDS)
    return f"A filter in the feedback path (noise or structural filter). Kinds: {kinds}."


FILTER = Section(
    {"kind": Choice(FILTER_KINDS, "Filter type."), **_filter_fields()},
    _filters_doc(),
)
