"""Case-file schema of the ``failures:`` section (the damper's failures and its authority window).

Imported by :mod:`damper.case.schema`; the study itself is :mod:`damper.analysis.failure_study`
and the keys are explained in docs/failures.md. The defaults' sources are in
:mod:`damper.case.failure_spec`; :func:`damper.case.failures.failures_from_values` turns the
validated section into ``Case.failures``.
"""

from __future__ import annotations

from ..errors import CaseError
from .failure_spec import KINDS as FAILURE_KINDS
from .failures import PRESETS
from .spec_types import Choice, Integer, Items, Number, Quantity, Section

#: Failure kinds (the words of :data:`damper.case.failure_spec.KINDS`).
KINDS = FAILURE_KINDS
#: Presets of the transient limits (values and sources in :data:`damper.case.failures.PRESETS`).
LIMIT_PRESETS = tuple(PRESETS)


class BandSection(Section):
    """A limit on a signed change from trim: ``min`` below zero, ``max`` above; one alone is
    mirrored (``max: 0.5`` is -0.5 to 0.5)."""

    def check(self, value, path):
        out = super().check(value, path)
        lo, hi = out["min"], out["max"]
        if lo is None and hi is None:
            raise CaseError("give min, max or both", path)
        lo = -abs(hi) if lo is None else lo
        hi = abs(lo) if hi is None else hi
        if not lo < 0 < hi:
            raise CaseError(f"the band must contain zero (min below 0, max above 0), not {lo:g} to {hi:g}", path)
        return {"min": lo, "max": hi}


class LimitsSection(Section):
    """The transient limits: a preset, limits, or both (an empty section checks nothing)."""

    def check(self, value, path):
        out = super().check(value, path)
        if all(v is None for v in out.values()):
            raise CaseError(f"give a preset ({', '.join(LIMIT_PRESETS)}) or at least one limit "
                            "(load_factor, pitch_attitude, angle_of_attack)", path)
        return out


def _band(doc, spec):
    return BandSection(
        {"min": spec(f"Lower limit ({doc}), below zero."), "max": spec(f"Upper limit ({doc}), above zero.")},
        f"Limit on the {doc} within the recognition time; give min, max or both (one alone is mirrored: "
        "max 0.5 is -0.5 to 0.5).",
        default=None,
    )


def _number(doc):
    return Number(doc, default=None)


def _angle(doc):
    return Quantity(("dimensionless",), doc + " rad (e.g. '5 deg').", default=None, what="angle")


LIMITS = LimitsSection(
    {
        "preset": Choice(
            LIMIT_PRESETS,
            "Transient limits (and recognition time) from a standard, values from memory: MIL-F-9490D "
            "(+/-0.5 g incremental load factor, paragraph 3.1.3.7, lower confidence; 1 s recognition, MIL-F-8785C "
            "3.4.9) or FAA-flight-guidance (load factor 0 to 2 g total, i.e. -1 to +1 g incremental, 3 s "
            "recognition; FAA advisory material on flight-guidance malfunctions, lower confidence). Keys given "
            "here replace the preset's.",
            default=None,
        ),
        "load_factor": _band("incremental normal load factor, g (positive up)", _number),
        "pitch_attitude": _band("pitch-attitude change, rad (positive nose up)", _angle),
        "angle_of_attack": _band("angle-of-attack change, rad (positive nose up)", _angle),
    },
    "Limits on the motion after a hardover or oscillatory failure, as bands on the change from trim "
    "within the recognition time. Absent: the MIL-F-9490D preset (+/-0.5 g). Without a preset only the "
    "limits given are checked.",
    default=None,
)

FAILURES = Section(
    {
        "recognition_time": Quantity(
            ("time",), "Time from the failure until the pilot acts, s (default: the limits' preset's, else 1 s, "
            "MIL-F-8785C 3.4.9, from memory).", default=None, positive=True, high=60.0,
        ),
        "kinds": Items(Choice(KINDS, "A failure kind."), "Failure kinds to study: hardover, oscillatory, passive "
                       "(default all).", default=None, min_items=1, max_items=3),
        "limits": LIMITS,
        "passive_level_required": Integer(
            "Handling level (1-3) the aircraft must keep with the damper off (default 2: MIL-F-8785C 3.1.10, "
            "Level 2 after failures less probable than 1e-2 per flight, from memory).", default=2, low=1, high=3,
        ),
        "passive_category": Choice(
            ("A", "B", "C"), "Flight-phase category for judging the passive level when requirements.preset names "
            "none (without either the level is not judged).", default=None,
        ),
        "step": Quantity(("time",), "Simulation step of the failures, s (shortened so that the recognition time is "
                         "a whole number of steps).", default=1e-3, positive=True, high=0.01),
        "frequency_points": Integer("Points of the oscillatory failure's first frequency grid (two refinements "
                                    "follow).", default=33, low=5, high=401),
    },
    "The damper's failures (hardover, oscillatory, passive) and its authority window; needs loop.authority or "
    "loop.actuator.travel. 'damper design' runs the study and writes failures.json (docs/failures.md). Absent: "
    "no failure study.",
    default=None,
)
