"""A case's ``turbulence:`` section applied to its conditions (docs/turbulence.md, section 6).

Turns the validated section into a :class:`damper.model.dryden.TurbulenceSpec`, finds each
condition's height above ground (altitude minus ``turbulence.ground_elevation``; at least
10 ft, below which the standard's low-altitude model is not defined: from memory of
MIL-F-8785C), and runs :func:`damper.analysis.turbulence.turbulence_for_spec` on the case's
loops at the given gains, with the actuator's rate limit and the damper's authority.
"""

from __future__ import annotations

import numpy as np

from ..errors import DamperError
from ..model import dryden

#: Lowest height above ground the standard's values are read at, m (10 ft; from memory).
MIN_HEIGHT_M = 10.0 * 0.3048


def turbulence_spec(case):
    """The case's :class:`~damper.model.dryden.TurbulenceSpec`, or None without a ``turbulence:`` section."""
    raw = (case.raw or {}).get("turbulence")
    if not raw:
        return None
    if raw.get("severity"):
        return dryden.TurbulenceSpec.from_severity(raw["severity"])
    keys = ("gust_rms", "scale_length", "wind_speed_20ft", "exceedance_probability")
    return dryden.TurbulenceSpec(**{k: raw.get(k) for k in keys})


def heights_above_ground(case):
    """Each condition's height above ground, m (altitude - ground elevation, at least :data:`MIN_HEIGHT_M`)."""
    raw = (case.raw or {}).get("turbulence") or {}
    alt = np.array([c.altitude for c in case.conditions], dtype=float)
    return np.maximum(alt - float(raw.get("ground_elevation") or 0.0), MIN_HEIGHT_M)


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
    if spec is None:
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
