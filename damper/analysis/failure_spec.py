"""A failure study's settings (:mod:`damper.case.failure_spec`, the case's types) and the slack of a
transient against its limits."""

from __future__ import annotations

import numpy as np

from ..case.failure_spec import (  # the case's types (old import paths kept)
    FailureSpec,
    KINDS,
    LIMIT_NAMES,
    LOAD_FACTOR_SOURCE,
    PASSIVE_SOURCE,
    RECOGNITION_SOURCE,
    ServoLimits,
    TRANSPORT_MALFUNCTION,
    TRANSPORT_SOURCE,
    TransientLimits,
    band,
)


def extremes_slack(top, bottom, bands: dict):
    """Normalised slack of each limit and the tightest, for a transient and its mirror image.

    Parameters
    ----------
    top, bottom : dict of ndarray
        Largest and smallest value of each limited quantity within the window (keys as
        :data:`LIMIT_NAMES`), any batch shape.
    bands : dict
        :meth:`TransientLimits.bands`.

    Returns
    -------
    slack : dict of ndarray
        ``min((upper - top) / |upper|, (bottom - lower) / |lower|)`` per limit (positive:
        met; 0.1: 10 % of the limit to spare), like the requirements' slack.
    tightest : ndarray
        The smallest slack over the limits.
    binding : ndarray of int
        Index into ``list(bands)`` of the tightest limit.
    """
    slack = {}
    for name, (lo, hi) in bands.items():
        slack[name] = np.minimum((hi - top[name]) / abs(hi), (bottom[name] - lo) / abs(lo))
    stack = np.stack(list(slack.values()))
    return slack, np.min(stack, 0), np.argmin(stack, 0)


__all__ = [
    "FailureSpec",
    "KINDS",
    "LIMIT_NAMES",
    "LOAD_FACTOR_SOURCE",
    "PASSIVE_SOURCE",
    "RECOGNITION_SOURCE",
    "ServoLimits",
    "TRANSPORT_MALFUNCTION",
    "TRANSPORT_SOURCE",
    "TransientLimits",
    "band",
    "extremes_slack",
]
