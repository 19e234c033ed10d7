"""Conditions streamed through the analysis in batches, so memory is bounded by the batch.

A gain search holds every measure of its sweep (conditions x gains) while it runs, about
5 MB per condition; a 2,000-condition case in one piece would need 10 GB. ``damper design``
searches (and simulates) :data:`BATCH_CONDITIONS` conditions at a time and keeps only the
results it writes. Every condition's answer is the same whatever batch it is in
(tests/test_design_stream.py), so the outputs do not depend on the batch size.
"""

from __future__ import annotations

import dataclasses

#: Conditions analysed together (one search sweep of 16 x 161 loops holds about 80 MB).
BATCH_CONDITIONS = 16


def condition_batches(n: int, size: int | None = None):
    """``(start, stop)`` of consecutive batches of at most `size` (default :data:`BATCH_CONDITIONS`,
    read at call time) of `n` conditions."""
    size = max(1, int(BATCH_CONDITIONS if size is None else size))
    return [(a, min(n, a + size)) for a in range(0, n, size)]


def sub_case(case, indices):
    """The case restricted to the conditions at `indices` (in that order); everything else is kept."""
    return dataclasses.replace(case, conditions=tuple(case.conditions[i] for i in indices))


__all__ = ["BATCH_CONDITIONS", "condition_batches", "sub_case"]
