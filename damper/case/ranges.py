"""Plausible ranges of physical quantities: one table for refusals and for warnings.

A value outside its *accepted* range makes the numbers meaningless (no aircraft has it;
beyond it the models overflow or lose every digit): the case is refused, naming the
key, the value and the range. A value inside it but outside the *usual* range is merely
suspicious (usually a unit slip): it draws a warning and is analysed (design.md s.8).
Both come from :data:`RANGES`, so the refusal, the warning and docs/errors.md never
disagree. Values are SI.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from ..errors import CaseError

#: Most flight conditions in one case, and most items in any list of a case file; both are
#: counted while the YAML is read, before anything is built.
MAX_CONDITIONS = 2000
MAX_LIST_ITEMS = 10_000

#: Smallest |M_delta| relative to the largest of |M_alpha|, |M_q|, |M_alpha_dot| (per unit
#: inertia): below it the elevator has no effect on the numbers.
MIN_CONTROL_POWER_RATIO = 1e-9


@dataclass(frozen=True)
class Plausible:
    """The accepted and the usual range of one quantity (SI).

    Attributes
    ----------
    what : str
        The quantity in words (for messages).
    unit : str
        Its SI unit.
    low, high : float
        Accepted range; outside it the case is refused (None: no bound).
    why : str
        Why values beyond the accepted range are refused.
    usual_low, usual_high : float or None
        Usual range; outside it (but accepted) a warning (None: no warning).
    hint : str
        The warning's advice.
    """

    what: str
    unit: str
    low: float | None
    high: float | None
    why: str
    usual_low: float | None = None
    usual_high: float | None = None
    hint: str = ""


#: Speed of a circular orbit at the Earth's surface, m/s (about 7.9 km/s; from memory).
ORBITAL_SPEED = 7900.0
#: Largest Mach number damper computes with (supersonic aircraft are below 3.5).
MAX_MACH = 5.0

RANGES = {
    "speed": Plausible("a speed", "m/s", None, ORBITAL_SPEED, "at or above orbital speed (about 7.9 km/s) nothing flies on wings"),
    "mach": Plausible("a Mach number", "-", None, MAX_MACH, "the short-period models here are for subsonic to moderately supersonic flight",
                      usual_high=1.0, hint="a plain number for a speed is m/s; write e.g. '250 kt' (damper/case/written.py)"),
    "altitude": Plausible("an altitude", "m", -2000.0, 80000.0, "the standard atmosphere damper computes with ends there",
                          usual_high=25000.0, hint="a plain number for an altitude is m; write e.g. '8000 ft' "
                          "(damper/case/written.py)"),
    "mass": Plausible("a mass", "kg", 1e-3, 1e7, "no aircraft weighs less than a gram or more than 10,000 t"),
    "inertia": Plausible("a pitch inertia", "kg*m^2", 1e-9, 1e11,
                         "no aircraft has a pitch inertia below 1e-9 or above 1e11 kg m^2"),
    "wing_area": Plausible("a wing area", "m^2", 1e-4, 1e4, "no wing is smaller than 1 cm^2 or larger than 10,000 m^2"),
    "mean_chord": Plausible("a mean chord", "m", 1e-3, 1e3, "no chord is shorter than 1 mm or longer than 1 km"),
    "travel": Plausible("an actuator travel", "rad", None, math.pi, "a surface cannot deflect more than half a turn",
                        usual_high=1.0, hint="plain numbers are radians; write e.g. '10 deg'"),
    "rate_limit": Plausible("an actuator rate limit", "rad/s", None, 1e4, "no surface moves faster than 1e4 rad/s",
                            usual_high=10.0, hint="plain numbers are rad/s; write e.g. '60 deg/s'"),
    "CL_alpha": Plausible("a lift-curve slope", "1/rad", None, None, "", usual_low=0.5,
                          hint="plain numbers are per radian; write e.g. '0.0775 1/deg'"),
}


def check(name, si, path, value) -> None:
    """Refuse `si` outside the accepted range of ``RANGES[name]``.

    Raises
    ------
    CaseError
        Naming the key path, the value as written and the range.
    """
    r = RANGES[name]
    if (r.low is not None and si < r.low) or (r.high is not None and si > r.high):
        lo = "" if r.low is None else f"{r.low:g} {r.unit}"
        hi = "" if r.high is None else f"{r.high:g} {r.unit}"
        span = f"{lo} to {hi}" if lo and hi else (f"at most {hi}" if hi else f"at least {lo}")
        raise CaseError(f"is outside the range damper accepts for {r.what} ({span}): {r.why}", path, value)


def unusual(name, si, where) -> str | None:
    """A warning when `si` is accepted but outside the usual range of ``RANGES[name]``, else None."""
    r = RANGES[name]
    low = r.usual_low is not None and si < r.usual_low
    high = r.usual_high is not None and si > r.usual_high
    if not (low or high):
        return None
    bound = f"below {r.usual_low:g}" if low else f"above {r.usual_high:g}"
    return f"{where} = {si:.4g} {r.unit} is unusually {'small' if low else 'large'} for {r.what} ({bound} {r.unit}): {r.hint}"


__all__ = ["MAX_CONDITIONS", "MAX_LIST_ITEMS", "MAX_MACH", "MIN_CONTROL_POWER_RATIO", "ORBITAL_SPEED", "Plausible",
           "RANGES", "check", "unusual"]
