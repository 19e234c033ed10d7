"""The flight envelope as the schedule figures draw it: its outline and its speed ranges.

The figures of :mod:`damper.output.figures.schedule` compute nothing: they receive an
:class:`EnvelopeView` (or None for a schedule over the case's conditions) and ask it for the
speed range at an altitude, the airspeed of a schedule variable's value, and whether a point
is inside (the same functions as :mod:`damper.analysis.envelope`).
"""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class EnvelopeView:
    """A schedule's flight envelope with the queries its figures need.

    Attributes
    ----------
    envelope : damper.analysis.envelope.Envelope
        The case's envelope (altitudes m, speeds SI).
    """

    envelope: object

    @property
    def altitude(self) -> tuple:
        """(lowest, highest) altitude, m."""
        return self.envelope.altitude

    def speed_limits(self, altitude_m):
        """(lowest, highest) true airspeed at `altitude_m`, m/s (NaN where the envelope has none)."""
        from .envelope import speed_limits

        return speed_limits(self.envelope, altitude_m)

    def speed_range_in(self, variable, altitude_m):
        """The speed range at `altitude_m` in schedule variable `variable` (SI: Pa, m/s, Mach)."""
        from .envelope import variable_value

        lo, hi = self.speed_limits(altitude_m)
        return variable_value(variable, altitude_m, lo), variable_value(variable, altitude_m, hi)

    def airspeed_for(self, variable, value, altitude_m):
        """True airspeed, m/s, at which `variable` has `value` (SI) at `altitude_m`."""
        from .envelope import airspeed_for

        return airspeed_for(variable, value, altitude_m)

    def inside(self, altitude_m, airspeed_m_s, tol=1e-9):
        """Whether each point (m, m/s) is inside the envelope (bool array)."""
        from .envelope import inside

        return inside(self.envelope, altitude_m, airspeed_m_s, tol=tol)


def envelope_view(case, result):
    """The :class:`EnvelopeView` of a schedule designed over the envelope, else None.

    Parameters
    ----------
    case : Case
    result : damper.analysis.schedule_types.ScheduleResult

    Returns
    -------
    EnvelopeView or None
    """
    if result.source != "envelope":
        return None
    from .envelope import envelope_from_case

    return EnvelopeView(envelope_from_case(case)[0])


__all__ = ["EnvelopeView", "envelope_view"]
