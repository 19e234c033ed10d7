"""The registry of criteria: every :class:`~damper.requirements.kind.CriterionKind`, in order.

To add a criterion: write its kind (a module in :mod:`damper.requirements.kinds`, or a new
entry in the module of its family) and add it to :data:`CRITERIA` (one line). The order here
is the order of the requirements in every output and of the band keys in docs/case-file.md.
``tests/test_criteria_registry.py`` checks every kind has a label, a unit, a docs entry, a
report label and a preset source.
"""

from __future__ import annotations

from .kinds import bandwidth, margins, phugoid, short_period

CRITERIA = (
    short_period.STABILITY,
    short_period.DAMPING_RATIO,
    short_period.NATURAL_FREQUENCY,
    short_period.CAP,
    short_period.EQUIVALENT_TIME_DELAY,
    margins.GAIN_MARGIN,
    margins.PHASE_MARGIN,
    margins.DELAY_MARGIN,
    margins.DISK_MARGIN,
    short_period.OTHER_MODE_DAMPING,
    bandwidth.BANDWIDTH,
    bandwidth.PHASE_DELAY,
    short_period.EQUIVALENT_MISMATCH,
    phugoid.PHUGOID_DAMPING_RATIO,
    phugoid.PHUGOID_TIME_TO_DOUBLE,
)

#: Kind by name.
KINDS = {k.name: k for k in CRITERIA}
#: Criteria a band in the case may name (``requirements.<name>``), in order.
BAND_KEYS = tuple(k.name for k in CRITERIA if k.band_kind)
#: Criteria of the four-state longitudinal model only.
LONGITUDINAL_KEYS = tuple(k.name for k in CRITERIA if k.longitudinal_only)
#: Criteria judging handling-qualities levels, in the order of the levels' outputs.
LEVEL_CRITERIA = tuple(k.name for k in sorted((k for k in CRITERIA if k.level), key=lambda k: k.level))


def label(name: str) -> str:
    """The registered label of criterion `name`; other names (e.g. ``"sweep range"``) in plain words."""
    kind = KINDS.get(name)
    return kind.label if kind is not None else str(name).replace("_", " ")
