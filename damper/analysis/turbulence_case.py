"""A case's ``turbulence:`` section applied to its conditions (docs/turbulence.md, section 6).

Reads the case's :class:`damper.model.dryden.TurbulenceSpec` (``Case.turbulence``), finds each
condition's height above ground (altitude minus ``turbulence.ground_elevation``; at least
10 ft, below which the standard's low-altitude model is not defined: from memory of
MIL-F-8785C), and runs :func:`damper.analysis.turbulence.turbulence_for_spec` on the case's
loops at the given gains, with the actuator's rate limit and the damper's authority.
"""

from __future__ import annotations

import numpy as np

from ..case.sections import TURBULENCE_REQUIREMENTS
from ..errors import DamperError

#: Lowest height above ground the standard's values are read at, m (10 ft; from memory).
MIN_HEIGHT_M = 10.0 * 0.3048


def turbulence_spec(case):
    """The case's :class:`~damper.model.dryden.TurbulenceSpec`, or None without a ``turbulence:`` section."""
    return None if case.turbulence is None else case.turbulence.spec


def heights_above_ground(case):
    """Each condition's height above ground, m (altitude - ground elevation, at least :data:`MIN_HEIGHT_M`)."""
    ground = 0.0 if case.turbulence is None else case.turbulence.ground_elevation_m
    alt = np.array([c.altitude for c in case.conditions], dtype=float)
    return np.maximum(alt - ground, MIN_HEIGHT_M)


def case_turbulence(case, gains):
    """Bare and augmented turbulence responses at every condition of `case` (None without the section).

    Parameters
    ----------
    case : damper.case.model.Case
    gains : float or array_like, shape (n_conditions,)
        K, s.

    Returns
    -------
    damper.analysis.turbulence.TurbulenceStudy or None
        Arrays of shape (n_conditions,).
    """
    from .assess import build_loop
    from .turbulence import turbulence_for_spec

    spec = turbulence_spec(case)
    if spec is None:  # a turbulence requirement without the section is refused by the case layer
        return None
    height = heights_above_ground(case)
    try:
        spec.at(height)
    except ValueError as exc:
        raise DamperError(f"{case.file}: turbulence: {exc} (at the conditions' heights above ground "
                          f"{', '.join(f'{h:.0f}' for h in height)} m)") from None
    authority = getattr(case.loop, "authority", None)  # the damper's authority when the case gives one
    return turbulence_for_spec(build_loop(case, gains), spec, height, rate_limit=case.loop.rate_limit,
                               authority=authority)


#: The turbulence requirements: case key -> (TurbulenceResult field, unit).
REQUIREMENTS = {
    "turbulence_load_factor_rms": ("rms_load_factor_g", "g"),
    "rate_limit_exceedances": ("rate_limit_exceedances_per_s", "1/s"),
}


def turbulence_requirements(case) -> dict:
    """``{requirement: max}`` of the case's turbulence requirements (empty when none is given)."""
    given = case.requirements_given
    out = {k: getattr(given, TURBULENCE_REQUIREMENTS[k]) for k in REQUIREMENTS}
    return {k: v for k, v in out.items() if v is not None}


def check_turbulence(case, result) -> list:
    """Each condition's turbulence requirements checked on the augmented result.

    Parameters
    ----------
    case : damper.case.model.Case
    result : damper.analysis.turbulence.TurbulenceResult
        The closed loop's (one member per condition).

    Returns
    -------
    list of list of dict
        Per condition: ``{name, value, max, unit, slack, met, reason}``. ``slack`` is
        ``(max - value) / max`` (``-value`` when max is 0): negative when missed, like every
        requirement's slack. A value that is undefined or unbounded (``None``, with the
        reason from the analysis) is not met.
    """
    limits = turbulence_requirements(case)
    out = []
    for i in range(len(case.conditions)):
        checks = []
        for name, hi in limits.items():
            field, unit = REQUIREMENTS[name]
            value = float(np.asarray(getattr(result, field)).reshape(-1)[i])
            reason = result.reasons_at((i,)).get(field, "")
            if not np.isfinite(value):
                checks.append({"name": name, "value": None, "max": hi, "unit": unit, "slack": None, "met": False,
                               "reason": reason or "not defined"})
                continue
            slack = (hi - value) / hi if hi > 0 else -value
            checks.append({"name": name, "value": value, "max": hi, "unit": unit, "slack": slack,
                           "met": bool(value <= hi), "reason": ""})
        out.append(checks)
    return out


def turbulence_items(case, checks):
    """The turbulence requirements not met, as :class:`damper.verdict.Item` of part ``design`` (for the verdict)."""
    from ..verdict import Detail, Item

    items = []
    for cond, per in zip(case.conditions, checks):
        for c in per:
            if not c["met"]:
                text = (f"{c['value']:.4g} {c['unit']} above {c['max']:.4g}" if c["value"] is not None
                        else c["reason"])
                items.append(Item("design", cond.name, c["name"], False,
                                  Detail(c["value"], None, c["max"],
                                         None if c["value"] is None else c["max"] - c["value"], c["unit"]), f"in turbulence: {text}"))
    return tuple(items)
