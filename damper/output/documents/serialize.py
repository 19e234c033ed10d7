"""One serializer for the numeric fields of result dataclasses.

The JSON key and the unit of each value come from the field's metadata
(:func:`damper.quantities.quantity`), read at run time: this module imports nothing from the
model or the measures. The order of the keys is the document's: each document module names
the attributes it writes, in its order, as a tuple (the documents stay byte-identical).
"""

from __future__ import annotations

import math

import numpy as np

from ...quantities import quantities


def num(x):
    """A JSON number or ``None`` for NaN/inf."""
    x = float(x)
    return x if math.isfinite(x) else None


def point(obj, index=None, names=None, flat=False) -> dict:
    """``{json key: number}`` of the annotated values `names` of `obj` at batch index `index`.

    Parameters
    ----------
    obj : dataclass instance
        A result whose fields are declared with :func:`damper.quantities.quantity`.
    index : tuple or int, optional
        Batch index into each value (None: the values are scalars).
    names : sequence of str, optional
        The attributes, in the document's order (default: every annotated field in
        declaration order).
    flat : bool
        Index each value flattened to one dimension, a single value standing for every
        index (values of different batch shapes, or broadcast).

    Returns
    -------
    dict
        JSON-ready numbers (NaN and infinities as None; a value that is None stays None).
    """
    out = {}
    for q in quantities(obj, names):
        value = getattr(obj, q.attribute)
        if value is not None and index is not None and flat:
            value = np.asarray(value, dtype=float).reshape(-1)
            value = value[index] if value.size > 1 else value[0]
        elif value is not None and index is not None:
            value = np.asarray(value)[index]
        out[q.key] = None if value is None else num(value)
    return out


def series(obj, names=None) -> dict:
    """``{json key: [number, ...]}``: every element (flattened) of the annotated values `names` of `obj`
    (None where a value is None).

    Parameters
    ----------
    obj : dataclass instance
    names : sequence of str, optional
        As :func:`point`.
    """
    out = {}
    for q in quantities(obj, names):
        value = getattr(obj, q.attribute)
        out[q.key] = None if value is None else [num(x) for x in np.ravel(value)]
    return out


def keys(obj, names=None) -> tuple:
    """The JSON keys :func:`point` writes for `names` of `obj` (instance or class), in order."""
    return tuple(q.key for q in quantities(obj, names))
