"""Helpers for frozen dataclasses whose fields are (broadcastable) numpy arrays.

Every model in :mod:`damper.model` holds its parameters as arrays with leading
batch axes (conditions x gains x samples ...). The measures flatten a batch to
one axis, work on it in chunks, and reshape the results back.
"""

from __future__ import annotations

import dataclasses

import numpy as np


def _is_array_like(value) -> bool:
    return isinstance(value, (np.ndarray, float, int, np.floating, np.integer)) and not isinstance(
        value, bool
    )


_FIELDS: dict = {}


def _fields_of(cls):
    names = _FIELDS.get(cls)
    if names is None:
        skip = getattr(cls, "_structure", ())
        names = tuple(f.name for f in dataclasses.fields(cls) if f.name not in skip)
        _FIELDS[cls] = names
    return names


def map_arrays(obj, fn):
    """Return a copy of `obj` with `fn` applied to every numeric field, recursively.

    Dataclasses are rebuilt with the same field values except the numeric ones;
    tuples are mapped element-wise; other values (strings, None) are kept.
    Fields listed in a class attribute ``_structure`` are never mapped.
    """
    if obj is None:
        return None
    if isinstance(obj, tuple):
        return tuple(map_arrays(o, fn) for o in obj)
    if dataclasses.is_dataclass(obj):
        cls = type(obj)
        values = dict(obj.__dict__)
        for name in _fields_of(cls):
            value = values[name]
            if _is_array_like(value):
                values[name] = fn(np.asarray(value, dtype=float))
            elif value is not None and (isinstance(value, tuple) or dataclasses.is_dataclass(value)):
                values[name] = map_arrays(value, fn)
        new = object.__new__(cls)
        new.__dict__.update(values)
        return new
    return obj


def array_fields(obj):
    """All numeric fields of `obj` (recursively), as arrays."""
    found = []
    map_arrays(obj, lambda a: found.append(a) or a)
    return found


def batch_shape(obj) -> tuple:
    """The broadcast shape of every numeric field of `obj`."""
    return np.broadcast_shapes(*(np.shape(a) for a in array_fields(obj)))


def flatten(obj):
    """Broadcast every numeric field to the common batch shape and ravel it.

    Returns
    -------
    flat : same type as `obj`
        Every numeric field is a contiguous 1-D array of length ``prod(shape)``.
    shape : tuple
        The batch shape, for reshaping results.
    """
    shape = batch_shape(obj)
    flat = map_arrays(obj, lambda a: np.ascontiguousarray(np.broadcast_to(a, shape)).reshape(-1))
    return flat, shape


def take(obj, index):
    """Index every numeric field of a flattened `obj` with `index` (ints or slice)."""
    return map_arrays(obj, lambda a: a[index])


def expand(obj, axis=-1):
    """Add a trailing axis to every field (to broadcast against a frequency axis)."""
    return map_arrays(obj, lambda a: np.expand_dims(a, axis))
