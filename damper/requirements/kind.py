"""What one criterion is: its key, measure, label, unit, preset source and docs text.

A :class:`CriterionKind` is the one place a handling-qualities or stability criterion is
described; the ordered registry of every kind is :mod:`damper.requirements.registry`.
Every consumer reads it from there: the case schema (band keys and their docs text), the
requirements (presets, levels), the evaluation (:func:`damper.requirements.criteria.evaluate`),
the verdict items, the JSON documents (unit) and the report (label).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

#: ``CriterionKind.which``: the measure is the case's ``requirements.damping_measure``.
DAMPING_MEASURE = "damping_measure"
#: ``CriterionKind.preset_source`` of a criterion that no preset supplies.
NO_PRESET = "no preset: a band in the case file"


@dataclass(frozen=True)
class CriterionKind:
    """How one criterion is measured, named and documented.

    Attributes
    ----------
    name : str
        Key used in case files (``requirements.<name>``) and outputs.
    label : str
        Plain words for tables and the report.
    unit : str
        Unit of the measured value and of the band (``"-"``: dimensionless).
    floor : float
        Smallest normalising scale of the slack, in `unit`.
    undefined_is_met : bool
        Whether a NaN value meets the requirement (e.g. no crossing: an unbounded margin).
    measure : callable
        ``measure(bundle, which) -> ndarray``: the value, in `unit`, from a
        :class:`damper.analysis.assess.Assessment`-like bundle; `which` is the criterion's
        :attr:`damper.requirements.criteria.Criterion.measure` (``"equivalent"``,
        ``"modal"`` or ``""``). A module-level function (kinds are pickled by reference).
    doc : str
        What the case file's band bounds (docs/case-file.md, ``requirements.<name>``), with
        its unit; empty for a criterion the case cannot name (stability).
    band_kind : str
        How the band's bounds are written: ``"number"`` (plain), ``"time"`` (s) or
        ``"rate"`` (rad/s); empty when the case cannot name it.
    preset_source : str
        Where preset values of this criterion come from (a standard, named as in
        :mod:`damper.requirements.presets`), or :data:`NO_PRESET`.
    needs_stability : bool
        A stability margin: not met where the closed loop is unstable (it has no margins
        there, whatever the value).
    which : str
        The measure variant the case's bands apply to: :data:`DAMPING_MEASURE` (the case's
        ``damping_measure``), ``"equivalent"``, or ``""`` (only one).
    level : int
        Position among the criteria that judge handling-qualities levels (1 first), 0: none.
    longitudinal_only : bool
        Needs the four-state longitudinal model (the phugoid).
    needs_bandwidth : bool
        Its measure is the pitch-attitude bandwidth's (computed only when a criterion needs it).
    needs_disk_margin : bool
        Its measure is the symmetric disk margin's (an assessment of the criteria alone,
        ``scope="criteria"``, searches the disk-margin peak only when a criterion needs it).
    """

    name: str
    label: str
    unit: str
    floor: float
    undefined_is_met: bool
    measure: Callable
    doc: str
    band_kind: str
    preset_source: str
    needs_stability: bool = False
    which: str = ""
    level: int = 0
    longitudinal_only: bool = False
    needs_bandwidth: bool = False
    needs_disk_margin: bool = False

    def measure_for(self, damping_measure: str) -> str:
        """The measure variant of this criterion when the case's damping measure is `damping_measure`."""
        return damping_measure if self.which == DAMPING_MEASURE else self.which
