"""Criteria: what each requirement measures, its band, its source; slack and met, batched.

Slack is signed and normalised: for a band ``[lower, upper]`` it is::

    slack = min((value - lower) / s_lower, (upper - value) / s_upper),  s = max(|bound|, floor)

so 0.1 means "10 % of the bound to spare" and a negative value says by how much the
requirement is missed. ``floor`` (in the criterion's unit) keeps bounds at or near zero
meaningful. A value that is not defined (NaN) is met or failed as the criterion says:
a missing gain crossing means an unbounded phase margin (met); a divergent short period
has no damping ratio (failed).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .kind import CriterionKind  # noqa: F401 - the kind's type, imported from here by older code
from .registry import KINDS

INF = float("inf")


@dataclass(frozen=True)
class Criterion:
    """One requirement: a band on one measure.

    Attributes
    ----------
    name : str
        A key of :data:`KINDS` (the registry, :mod:`damper.requirements.registry`).
    lower, upper : float
        The band (``-inf``/``inf`` when one-sided), in the kind's unit.
    source : str
        Where the numbers come from ("case file", or a standard with "(from memory)").
    measure : str
        Which measure supplies the value (e.g. "equivalent" or "modal" for damping).
    """

    name: str
    lower: float
    upper: float
    source: str
    measure: str = ""

    @property
    def kind(self) -> CriterionKind:
        return KINDS[self.name]


def slack(criterion: Criterion, value) -> np.ndarray:
    """Signed normalised slack of `value` (batched); see the module docstring."""
    k = criterion.kind
    v = np.asarray(value, dtype=float)
    with np.errstate(invalid="ignore"):
        s_lo = max(abs(criterion.lower), k.floor) if np.isfinite(criterion.lower) else 1.0
        s_hi = max(abs(criterion.upper), k.floor) if np.isfinite(criterion.upper) else 1.0
        lo = (v - criterion.lower) / s_lo if np.isfinite(criterion.lower) else np.full(v.shape, INF)
        hi = (criterion.upper - v) / s_hi if np.isfinite(criterion.upper) else np.full(v.shape, INF)
        out = np.minimum(lo, hi)
    undefined = np.isnan(v)
    return np.where(undefined, INF if k.undefined_is_met else -INF, out)


def measure_values(criterion: Criterion, m) -> np.ndarray:
    """The value of `criterion`'s measure from a :class:`damper.analysis.assess.Assessment`-like bundle.

    The measure is the registered kind's (:mod:`damper.requirements.registry`).
    """
    return criterion.kind.measure(m, criterion.measure)


@dataclass(frozen=True)
class CriteriaResult:
    """Every criterion evaluated on a batch.

    Attributes
    ----------
    criteria : tuple of Criterion
    values : ndarray, shape (n_criteria, ...)
    slacks : ndarray, shape (n_criteria, ...)
    """

    criteria: tuple
    values: np.ndarray
    slacks: np.ndarray

    @property
    def met(self) -> np.ndarray:
        return self.slacks >= 0

    @property
    def all_met(self) -> np.ndarray:
        return np.all(self.met, 0)

    @property
    def worst_slack(self) -> np.ndarray:
        return np.min(self.slacks, 0)

    def binding(self) -> np.ndarray:
        """Index of the criterion with the least slack, per batch point."""
        return np.argmin(self.slacks, 0)


def evaluate(criteria, measures) -> CriteriaResult:
    """Evaluate `criteria` on a measures bundle (batched).

    A stability margin (``needs_stability``) is not met where the closed loop is unstable.
    """
    values = [np.asarray(measure_values(c, measures), dtype=float) for c in criteria]
    shape = np.broadcast_shapes(*(v.shape for v in values))
    values = np.stack([np.broadcast_to(v, shape) for v in values])
    slacks = np.stack([slack(c, v) for c, v in zip(criteria, values)])
    if any(c.kind.needs_stability for c in criteria):
        stable = np.broadcast_to(np.asarray(measures.modes.stable, bool), shape)
        for k, c in enumerate(criteria):
            if c.kind.needs_stability:
                slacks[k] = np.where(stable, slacks[k], -INF)
    return CriteriaResult(tuple(criteria), values, slacks)
