"""The case's ``failures:`` section as a :class:`~damper.case.failure_spec.FailureSpec`.

:func:`failures_from_values` resolves the validated section (keys:
:mod:`damper.case.failures_schema`) against the limit presets :data:`PRESETS` (values from
memory, sources named; docs/failures.md).
"""

from __future__ import annotations

from dataclasses import dataclass

from .failure_spec import (
    KINDS,
    LOAD_FACTOR_SOURCE,
    PASSIVE_SOURCE,
    RECOGNITION_SOURCE,
    TRANSPORT_SOURCE,
    FailureSpec,
    TransientLimits,
)


@dataclass(frozen=True)
class LimitPreset:
    """Transient limits and a recognition time from a named source.

    Attributes
    ----------
    load_factor_g : tuple
        Incremental normal load factor band, g.
    recognition_time_s : float
        s.
    source : str
        Where the values come from (from memory, said so).
    recognition_source : str
    """

    load_factor_g: tuple
    recognition_time_s: float
    source: str
    recognition_source: str


#: Presets by the name the case file uses (``failures.limits.preset``).
PRESETS = {
    "MIL-F-9490D": LimitPreset((-0.5, 0.5), 1.0, LOAD_FACTOR_SOURCE, RECOGNITION_SOURCE),
    "FAA-flight-guidance": LimitPreset((-1.0, 1.0), 3.0, TRANSPORT_SOURCE, TRANSPORT_SOURCE),
}
#: The preset used when the case gives no ``failures.limits``.
DEFAULT_PRESET = "MIL-F-9490D"


def _band(sec):
    return None if sec is None else (float(sec["min"]), float(sec["max"]))


def failures_from_values(section) -> FailureSpec | None:
    """The validated ``failures:`` section (SI values) as the study's settings (None: no section).

    Limits: without ``failures.limits`` the :data:`DEFAULT_PRESET`; with a ``preset`` its
    values, each replaced by a key given beside it; without a preset only the keys given.
    The recognition time: ``failures.recognition_time``, else the preset's (1 s without one).
    """
    raw = section
    if raw is None:
        return None
    lim = raw.get("limits")
    name = DEFAULT_PRESET if lim is None else lim.get("preset")
    preset = PRESETS.get(name) if name is not None else None
    lim = lim or {}
    given = {
        "load_factor_g": _band(lim.get("load_factor")),
        "pitch_attitude_rad": _band(lim.get("pitch_attitude")),
        "angle_of_attack_rad": _band(lim.get("angle_of_attack")),
    }
    words = {"load_factor_g": "load factor", "pitch_attitude_rad": "pitch attitude", "angle_of_attack_rad": "angle of attack"}
    explicit = [words[k] for k, v in given.items() if v is not None]
    if preset is not None and given["load_factor_g"] is None:
        given["load_factor_g"] = preset.load_factor_g
    if preset is None:
        source = "given in the case"
    elif explicit:
        source = f"{name} preset ({preset.source}) with {', '.join(explicit)} given in the case"
    else:
        source = f"{name} preset ({preset.source})"
    limits = TransientLimits(**given, source=source)
    if raw.get("recognition_time") is not None:
        t_r, t_source = float(raw["recognition_time"]), "given in the case"
    elif preset is not None:
        t_r, t_source = preset.recognition_time_s, preset.recognition_source
    else:
        t_r, t_source = 1.0, RECOGNITION_SOURCE
    kinds = tuple(k for k in KINDS if k in (raw.get("kinds") or KINDS))
    level = int(raw.get("passive_level_required") or 2)
    return FailureSpec(
        recognition_time_s=t_r,
        kinds=kinds,
        limits=limits,
        passive_level_required=level,
        passive_category=raw.get("passive_category"),
        step_s=float(raw.get("step") or 1e-3),
        frequency_points=int(raw.get("frequency_points") or 33),
        sources={
            "recognition_time_s": t_source,
            "limits": source,
            "passive_level_required": PASSIVE_SOURCE if level == 2 else "given in the case",
            "frequency_range": "common practice (two decades around the short period)",
        },
    )


__all__ = ["DEFAULT_PRESET", "LimitPreset", "PRESETS", "failures_from_values"]
