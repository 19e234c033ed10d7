"""What the robustness figures draw beyond the study's result, decided once before they are queued.

The figures of :mod:`damper.output.figures.robustness` judge nothing: they receive a
:class:`RobustnessFigureInputs` with the conditions that get figures (the lowest pass
fractions first on a large study) and, per condition, the shown samples split by what they
meet (the sign of their slacks, read here and nowhere in output).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: Conditions that get their own robustness figures by default.
FIGURE_CONDITIONS = 48
#: The requirements on the scatter figure's axes.
AXES_CRITERIA = ("damping_ratio", "gain_margin")


@dataclass(frozen=True)
class SampleSplit:
    """The shown samples of one condition, split by what they meet.

    Attributes
    ----------
    meets_all : ndarray of bool, shape (shown,)
        The sample meets every requirement (every slack >= 0).
    misses_off_axes : ndarray of bool, shape (shown,)
        The sample meets the damping and gain-margin requirements (:data:`AXES_CRITERIA`,
        the scatter figure's axes) but misses another.
    missed_off_axes : tuple of str
        Keys of the other requirements those samples miss, in the study's criteria order.
    """

    meets_all: np.ndarray
    misses_off_axes: np.ndarray
    missed_off_axes: tuple


@dataclass(frozen=True)
class RobustnessFigureInputs:
    """The robustness figures' conditions and sample splits.

    Attributes
    ----------
    shown : tuple of int
        Indices of the conditions with figures, in condition order.
    splits : tuple of SampleSplit
        One per entry of `shown`.
    """

    shown: tuple
    splits: tuple

    def split(self, i) -> SampleSplit:
        """The :class:`SampleSplit` of condition `i` (one of `shown`)."""
        return self.splits[self.shown.index(i)]


def figure_conditions(result, limit=FIGURE_CONDITIONS) -> tuple:
    """Conditions with figures: all when at most `limit`, else the `limit` with the lowest pass fraction.

    Parameters
    ----------
    result : RobustnessResult
    limit : int
        Conditions at most.

    Returns
    -------
    tuple of int
        In condition order (ties of the pass fraction broken by index).
    """
    n = len(result.conditions)
    if n <= limit:
        return tuple(range(n))
    order = sorted(range(n), key=lambda i: (result.conditions[i].fraction_all, i))
    return tuple(sorted(order[:limit]))


def sample_split(result, i) -> SampleSplit:
    """The shown samples of condition `i` split by the signs of their slacks.

    Parameters
    ----------
    result : RobustnessResult
        (``criteria`` names and ``slacks``, shape (n_criteria, n_conditions, shown), are read.)
    i : int
        Condition index.

    Returns
    -------
    SampleSplit
    """
    names = [cr.name for cr in result.criteria]
    sl = result.slacks[:, i, :]
    on = [j for j, n in enumerate(names) if n in AXES_CRITERIA]
    rest = [j for j in range(len(names)) if j not in on]
    on_ok = np.all(sl[on] >= 0, 0) if on else np.ones(sl.shape[1], bool)
    off = on_ok & (np.any(sl[rest] < 0, 0) if rest else np.zeros(sl.shape[1], bool))
    missed = tuple(names[j] for j in rest if np.any(off & (sl[j] < 0)))
    return SampleSplit(meets_all=np.all(sl >= 0, 0), misses_off_axes=off, missed_off_axes=missed)


def robustness_figure_inputs(result, limit=FIGURE_CONDITIONS) -> RobustnessFigureInputs:
    """The conditions with figures and their sample splits.

    Parameters
    ----------
    result : RobustnessResult
    limit : int
        Conditions with figures at most (:func:`figure_conditions`).

    Returns
    -------
    RobustnessFigureInputs
    """
    shown = figure_conditions(result, limit)
    return RobustnessFigureInputs(shown=shown, splits=tuple(sample_split(result, i) for i in shown))


__all__ = ["AXES_CRITERIA", "FIGURE_CONDITIONS", "RobustnessFigureInputs", "SampleSplit", "figure_conditions",
           "robustness_figure_inputs", "sample_split"]
