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

INF = float("inf")


@dataclass(frozen=True)
class CriterionKind:
    """How one criterion is measured.

    Attributes
    ----------
    name : str
        Key used in case files and outputs.
    label : str
        Plain words for tables.
    unit : str
    floor : float
        Smallest normalising scale, in `unit`.
    undefined_is_met : bool
        Whether a NaN value meets the requirement (e.g. no crossing: an unbounded margin).
    needs_stability : bool
        A stability margin: not met where the closed loop is unstable (it has no margins
        there, whatever the value).
    """

    name: str
    label: str
    unit: str
    floor: float
    undefined_is_met: bool
    needs_stability: bool = False


KINDS = {
    k.name: k
    for k in (
        CriterionKind("stability", "closed-loop stability (largest eigenvalue real part)", "1/s", 1.0, False),
        CriterionKind("damping_ratio", "short-period damping ratio", "-", 0.1, False),
        CriterionKind("natural_frequency", "short-period natural frequency", "rad/s", 0.5, False),
        CriterionKind("cap", "control anticipation parameter", "(rad/s^2)/g", 0.05, False),
        CriterionKind("equivalent_time_delay", "equivalent time delay", "s", 0.02, False),
        CriterionKind("gain_margin", "gain margin (smallest of up and down)", "dB", 1.0, True, True),
        CriterionKind("phase_margin", "phase margin (distance from -180 deg at the nearest crossing)", "deg", 5.0, True, True),
        CriterionKind("delay_margin", "delay margin", "s", 0.01, True, True),
        CriterionKind("disk_margin", "symmetric disk margin", "-", 0.1, False, True),
        CriterionKind("other_mode_damping", "least damping of the other closed-loop modes", "-", 0.05, True),
        CriterionKind("bandwidth", "pitch-attitude bandwidth", "rad/s", 0.5, False),
        CriterionKind("phase_delay", "pitch-attitude phase delay", "s", 0.02, False),
        CriterionKind("equivalent_mismatch", "equivalent-system mismatch", "-", 1.0, False),
        CriterionKind("phugoid_damping_ratio", "phugoid damping ratio (closed loop)", "-", 0.05, False),
        CriterionKind("phugoid_time_to_double", "phugoid time to double amplitude (closed loop; none when stable)",
                      "s", 10.0, True),
    )
}


@dataclass(frozen=True)
class Criterion:
    """One requirement: a band on one measure.

    Attributes
    ----------
    name : str
        A key of :data:`KINDS`.
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
    """The value of `criterion`'s measure from a :class:`damper.analysis.assess.Assessment`-like bundle."""
    name = criterion.name
    if name == "stability":
        return np.max(m.modes.eigenvalues.real, -1)
    if name == "damping_ratio":
        return m.damping_ratio(criterion.measure)
    if name == "natural_frequency":
        return m.natural_frequency(criterion.measure)
    if name == "cap":
        return m.cap(criterion.measure)
    if name == "equivalent_time_delay":
        return m.equivalent.time_delay
    if name == "equivalent_mismatch":
        return m.equivalent.mismatch
    if name == "gain_margin":
        up = np.where(np.isnan(m.margins.gain_margin_db), INF, m.margins.gain_margin_db)
        down = np.where(np.isnan(m.margins.gain_margin_low_db), INF, -m.margins.gain_margin_low_db)
        both = np.minimum(up, down)
        return np.where(np.isinf(both), np.nan, both)
    if name == "phase_margin":
        # distance of the phase from -180 deg in either direction at the nearest gain
        # crossing: a crossing with leading phase (e.g. the washout's low one, signed PM
        # near -170) tolerates that much phase change
        return m.margins.phase_margin_deg
    if name == "delay_margin":
        return m.margins.delay_margin_s
    if name == "disk_margin":
        return m.margins.disk_margin
    if name == "other_mode_damping":
        return m.modes.other_damping_ratio
    if name == "bandwidth":
        return m.bandwidth.bandwidth
    if name == "phase_delay":
        return m.bandwidth.phase_delay
    if name == "phugoid_damping_ratio":
        return m.modes.phugoid.damping_ratio
    if name == "phugoid_time_to_double":
        return m.modes.phugoid.time_to_double
    raise KeyError(name)


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
