"""What a failure study checks: recognition time, transient limits, the passive level, and
the damper servo's limits (frozen data with documented defaults and their sources; the case's
``failures:`` section becomes a :class:`FailureSpec` in :mod:`damper.case.failures`).

Defaults (docs/failures.md):

* recognition time 1 s: MIL-F-8785C paragraph 3.4.9, "a realistic time delay of at least
  one second between the failure and initiation of pilot corrective action" (from memory);
* incremental normal load factor within +/- 0.5 g: MIL-F-9490D paragraph 3.1.3.7, failure
  transients within the operational flight envelope (from memory, lower confidence);
* pitch-attitude and angle-of-attack changes: no published value known here; not checked
  unless given;
* passive level 2: MIL-F-8785C paragraph 3.1.10 (from memory): Level 2 may follow
  failures whose probability is below 1e-2 per flight, which a damper's is assumed to be.

A preset for transport-category autopilot-like failures is given too
(:data:`TRANSPORT_MALFUNCTION`: load factor 0 to 2 g total, i.e. -1 to +1 g incremental,
and 3 s recognition; from memory of the FAA's advisory material on flight guidance
malfunctions, lower confidence).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..quantities import quantity

#: Failure kinds, in the order of the results.
KINDS = ("hardover", "oscillatory", "passive")

#: Limit names, in the order of :meth:`TransientLimits.bands`.
LIMIT_NAMES = ("load_factor", "pitch_attitude", "angle_of_attack")

RECOGNITION_SOURCE = "MIL-F-8785C 3.4.9: at least 1 s from failure to pilot action (from memory)"
LOAD_FACTOR_SOURCE = "MIL-F-9490D 3.1.3.7: +/-0.5 g failure transients (from memory, lower confidence)"
PASSIVE_SOURCE = "MIL-F-8785C 3.1.10: Level 2 after failures below 1e-2 per flight (from memory)"
TRANSPORT_SOURCE = ("FAA advisory material on flight guidance malfunctions: 0 to 2 g, 3 s recognition "
                    "(from memory, lower confidence)")


def band(value):
    """A limit as a band ``(lower, upper)`` on the signed change: a number x is ``(-x, x)``;
    None stays None (not checked)."""
    if value is None:
        return None
    if np.ndim(value) == 0:
        x = abs(float(value))
        return (-x, x)
    lo, hi = (float(v) for v in value)
    if not lo < 0 < hi:
        raise ValueError(f"a transient band must contain zero, not ({lo:g}, {hi:g})")
    return (lo, hi)


@dataclass(frozen=True)
class TransientLimits:
    """Limits on the motion within the recognition time, as bands on the signed change
    from trim (None: not checked).

    Attributes
    ----------
    load_factor_g : tuple (lower, upper) or None
        Incremental normal load factor, g (positive up). Default +/- 0.5 g
        (:data:`LOAD_FACTOR_SOURCE`).
    pitch_attitude_rad : tuple or None
        Pitch-attitude change, rad (positive nose up).
    angle_of_attack_rad : tuple or None
        Angle-of-attack change, rad.
    source : str
        Where the values come from.
    """

    load_factor_g: tuple | None = quantity("g", default=(-0.5, 0.5))
    pitch_attitude_rad: tuple | None = quantity("rad", default=None)
    angle_of_attack_rad: tuple | None = quantity("rad", default=None)
    source: str = LOAD_FACTOR_SOURCE

    def __post_init__(self):
        for name in ("load_factor_g", "pitch_attitude_rad", "angle_of_attack_rad"):
            object.__setattr__(self, name, band(getattr(self, name)))
        if self.bands() == {}:
            raise ValueError("give at least one transient limit")

    def bands(self) -> dict:
        """``{name: (lower, upper)}`` of the limits that are checked, names from :data:`LIMIT_NAMES`."""
        values = (self.load_factor_g, self.pitch_attitude_rad, self.angle_of_attack_rad)
        return {n: b for n, b in zip(LIMIT_NAMES, values) if b is not None}


#: Transport-category preset (see the module notes; from memory, lower confidence).
TRANSPORT_MALFUNCTION = TransientLimits(load_factor_g=(-1.0, 1.0), source=TRANSPORT_SOURCE)


@dataclass(frozen=True)
class FailureSpec:
    """A failure study's settings.

    Attributes
    ----------
    recognition_time_s : float
        s from the failure until the pilot acts (default 1 s, :data:`RECOGNITION_SOURCE`).
    kinds : tuple of str
        Failure kinds to study, from :data:`KINDS` (default all).
    limits : TransientLimits
    passive_level_required : int
        Handling level (1-3) the aircraft must keep with the damper off (default 2,
        :data:`PASSIVE_SOURCE`).
    passive_category : str or None
        Flight-phase category (A, B, C) for judging the passive level when the
        requirements name none.
    step_s : float
        Simulation step, s (shortened so that the recognition time is a whole number of steps).
    frequency_range : tuple of float
        Oscillatory search range as multiples of the bare short period's undamped
        frequency (default 0.1 to 10).
    frequency_points : int
        Points of the first (log-spaced) frequency grid; two refinements follow.
    sources : dict
        Source of each default, by field name.
    """

    recognition_time_s: float = quantity("s", default=1.0)
    kinds: tuple = KINDS
    limits: TransientLimits = field(default_factory=TransientLimits)
    passive_level_required: int = 2
    passive_category: str | None = None
    step_s: float = 1e-3
    frequency_range: tuple = (0.1, 10.0)
    frequency_points: int = 33
    sources: dict = field(default_factory=lambda: {
        "recognition_time_s": RECOGNITION_SOURCE,
        "limits": LOAD_FACTOR_SOURCE,
        "passive_level_required": PASSIVE_SOURCE,
        "frequency_range": "common practice (two decades around the short period)",
    })

    def __post_init__(self):
        bad = [k for k in self.kinds if k not in KINDS]
        if bad:
            raise ValueError(f"failure kinds must be among {', '.join(KINDS)}, not {', '.join(bad)}")
        if not self.recognition_time_s > 0:
            raise ValueError("the recognition time must be positive")
        if self.passive_level_required not in (1, 2, 3):
            raise ValueError("passive_level_required must be 1, 2 or 3")

    def time_grid(self):
        """``(step, n_steps)``: the step (s, at most `step_s`) that divides the recognition time."""
        n = max(1, int(np.ceil(self.recognition_time_s / self.step_s - 1e-9)))
        return self.recognition_time_s / n, n


@dataclass(frozen=True)
class ServoLimits:
    """The damper servo's limits and the actuator's (numbers broadcast against the conditions).

    Attributes
    ----------
    authority : float or ndarray or None
        The damper's authority, +/- rad of surface (None: the actuator's travel, a
        full-authority damper).
    authority_rate_limit : float or ndarray or None
        The damper command's own rate limit, rad/s (None: none). The case layer resolves
        its default, the actuator's rate limit
        (:func:`damper.analysis.response.damper_rate_limit`).
    rate_limit : float or ndarray or None
        The actuator's rate limit, rad/s (None: none).
    travel : float or ndarray or None
        The actuator's travel, +/- rad, on pilot plus damper command (None: none).
    """

    authority: object = quantity("rad", default=None)
    authority_rate_limit: object = quantity("rad/s", default=None)
    rate_limit: object = quantity("rad/s", key="actuator_rate_limit_rad_s", default=None)
    travel: object = quantity("rad", key="actuator_travel_rad", default=None)

    def failure_authority(self):
        """The authority a failure runs to, rad: `authority`, else `travel`.

        Raises
        ------
        ValueError
            Neither is given.
        """
        value = self.authority if self.authority is not None else self.travel
        if value is None:
            raise ValueError("a failure study needs the damper's authority or the actuator's travel")
        return np.asarray(value, dtype=float)

    def slew_rate(self):
        """The damper command's rate limit, rad/s (inf: none)."""
        r = self.authority_rate_limit
        return np.asarray(np.inf if r is None else r, dtype=float)
