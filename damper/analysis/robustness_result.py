"""Results of a robustness study (:func:`damper.analysis.robustness.robustness`)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from ..quantities import quantity

if TYPE_CHECKING:  # annotations only
    from ..case.uncertainty import UncertaintySpec
    from .uncertainty import Axes


@dataclass(frozen=True)
class WorstCase:
    """The worst point found for one criterion at one condition.

    Attributes
    ----------
    criterion : str
    value : float
        The criterion's measure there (its unit; NaN: undefined).
    slack : float
        Normalised slack (negative: missed).
    u : ndarray, shape (p,)
        Normalised coordinates.
    parameters : ndarray, shape (p,)
        Physical values of every axis (see ``RobustnessResult.axes.units``).
    source : str
        ``"sample"``, ``"corner"``, ``"refined"`` or ``"nominal"`` (nothing uncertain).
    index : int
        Sample or corner index (-1 for refined).
    start_slack : float
        Slack of the worst evaluated point (sample or corner) before refinement.
    evaluations : int
        Loops the refinement evaluated for this criterion (0 if not refined).
    values, slacks : ndarray, shape (n_criteria,)
        Every criterion's value and slack at this point.
    damping : float
        Damping ratio there (by the requirements' damping measure).
    gain_margin : float
        Smallest gain margin there, dB (NaN: unbounded).
    phase_margin : float
        deg (NaN: no gain crossing).
    """

    criterion: str
    value: float
    slack: float = quantity("")
    u: np.ndarray
    parameters: np.ndarray
    source: str
    index: int
    start_slack: float = quantity("", key="worst_evaluated_slack")
    evaluations: int = 0
    values: np.ndarray = None
    slacks: np.ndarray = None
    damping: float = quantity("", key="damping_ratio", default=float("nan"))
    gain_margin: float = quantity("dB", default=float("nan"))
    phase_margin: float = quantity("deg", default=float("nan"))

    @property
    def met(self) -> bool:
        """Whether `criterion` is met at this point (slack >= 0)."""
        return bool(self.slack >= 0)

    @property
    def all_met(self):
        """Whether every criterion is met at this point (bool; None when `slacks` is not kept)."""
        return bool(np.all(self.slacks >= 0)) if self.slacks is not None else None

    @property
    def bounded(self) -> bool:
        """Whether the slack is finite or -inf (+inf: the criterion cannot be missed here)."""
        return bool(self.slack != np.inf)


@dataclass(frozen=True)
class ConditionRobustness:
    """Robustness at one condition.

    Attributes
    ----------
    name : str
    gain : float
        Nominal gain K, s.
    nominal_values, nominal_slacks : ndarray, shape (n_criteria,)
    nominal_met : bool
        Every requirement met at the nominal point.
    samples : int
    passed : ndarray of int, shape (n_criteria,)
        Samples meeting each requirement.
    passed_all : int
    fraction, lower, upper : ndarray, shape (n_criteria,)
        Pass fraction and its Clopper-Pearson interval.
    fraction_all, lower_all, upper_all : float
    worst : tuple of WorstCase
        One per criterion, in the order of ``RobustnessResult.criteria``.
    sensitivity : ndarray, shape (p, n_criteria + 1)
        Spearman rank correlation of each axis with each criterion's slack; last column:
        with the worst slack. NaN for an axis without width here or a constant slack.
    ranking : tuple of int
        Axis indices by decreasing ``|rho|`` with the worst slack (NaN last).
    shown : int
        Samples in the subsample behind `sensitivity` and the plots (the first ones).
    worst_slack_histogram : ndarray of int64, shape (len(SLACK_EDGES) + 2,)
        Worst slack over all criteria, every sample: [undefined, below -1, one per bin of
        :data:`~damper.analysis.sample_stats.SLACK_EDGES`, above 1].
    corners : int
    corners_passed_all : int
    unconverged_fits : int
        Samples whose equivalent-system fit did not converge.
    ambiguous_modes : int
        Samples whose short-period pick was ambiguous.
    cg_source : str
    """

    name: str
    gain: float = quantity("s")
    nominal_values: np.ndarray
    nominal_slacks: np.ndarray
    nominal_met: bool
    samples: int
    passed: np.ndarray
    passed_all: int
    fraction: np.ndarray
    lower: np.ndarray
    upper: np.ndarray
    fraction_all: float
    lower_all: float
    upper_all: float
    worst: tuple
    sensitivity: np.ndarray
    ranking: tuple
    shown: int
    worst_slack_histogram: np.ndarray
    corners: int
    corners_passed_all: int
    unconverged_fits: int
    ambiguous_modes: int
    cg_source: str

    def top_driver(self):
        """Index of the axis most correlated with the worst slack (None if none)."""
        if not self.ranking or not np.isfinite(self.sensitivity[self.ranking[0], -1]):
            return None
        return self.ranking[0]


@dataclass(frozen=True)
class RobustnessResult:
    """Monte Carlo, corners and worst-case search at every condition.

    Attributes
    ----------
    spec : UncertaintySpec
    axes : Axes
    criteria : tuple of Criterion
    damping_measure : str
    gains : ndarray, shape (n_conditions,)
        s.
    conditions : tuple of ConditionRobustness
    joint_passed : int
        Samples meeting every requirement at every condition.
    joint_fraction, joint_lower, joint_upper : float
    shown : int
        The subsample kept for the plots and the rank correlations: the first
        ``min(samples, shown_limit(n_conditions))`` samples (all of a smaller study).
    samples_u : ndarray, shape (shown, p)
        Their normalised coordinates.
    values, slacks : ndarray, shape (n_criteria, n_conditions, shown)
        Each criterion's measure (its unit) and normalised slack in the subsample.
    damping : ndarray, shape (n_conditions, shown)
        Short-period damping ratio by ``damping_measure``.
    gain_margin : ndarray, shape (n_conditions, shown)
        Smallest of the up and down gain margins, dB (NaN: unbounded).
    phase_margin : ndarray, shape (n_conditions, shown)
        deg.
    corners_u : ndarray, shape (n_corners, p)
    corners_complete : bool
    corner_slacks : ndarray, shape (n_criteria, n_conditions, shown corners)
        Slacks of the first corners (every corner unless conditions x corners is above
        the subsample bound).
    evaluations : int
        Loops evaluated in all.
    """

    spec: UncertaintySpec
    axes: Axes
    criteria: tuple
    damping_measure: str
    gains: np.ndarray
    conditions: tuple
    joint_passed: int
    joint_fraction: float
    joint_lower: float
    joint_upper: float
    shown: int
    samples_u: np.ndarray
    values: np.ndarray
    slacks: np.ndarray
    damping: np.ndarray
    gain_margin: np.ndarray
    phase_margin: np.ndarray
    corners_u: np.ndarray
    corners_complete: bool
    corner_slacks: np.ndarray
    evaluations: int


__all__ = ["ConditionRobustness", "RobustnessResult", "WorstCase"]
