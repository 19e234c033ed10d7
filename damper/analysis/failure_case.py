"""The case's ``failures:`` section and the damper's servo limits as analysis settings.

The section is resolved by the case layer (:func:`damper.case.failures.failures_from_values`,
``Case.failures``, with the limit presets :data:`PRESETS`); :func:`servo_limits` reads
``loop.authority``, ``loop.authority_rate_limit`` and the actuator's limits.
"""

from __future__ import annotations

from ..case.failures import DEFAULT_PRESET, PRESETS, LimitPreset  # the case's (old import paths kept)
from .failure_spec import FailureSpec, ServoLimits


def failure_spec(case) -> FailureSpec | None:
    """The case's failure study settings (None when the case has no ``failures:`` section)."""
    return case.failures


def servo_limits(case) -> ServoLimits:
    """The damper servo's limits from ``loop``: its authority (None: the failures run to the
    actuator's travel), its rate limit (``loop.authority_rate_limit``, else the actuator's),
    and the actuator's rate limit and travel."""
    lp = case.loop
    return ServoLimits(authority=lp.authority, authority_rate_limit=lp.damper_rate_limit,
                       rate_limit=lp.rate_limit, travel=lp.travel)


__all__ = ["DEFAULT_PRESET", "LimitPreset", "PRESETS", "failure_spec", "servo_limits"]
