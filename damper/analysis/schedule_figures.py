"""What the schedule figures draw beyond the schedule's result, computed once before they are drawn.

The figures of :mod:`damper.output.figures.schedule` compute nothing: they receive a
:class:`ScheduleFigureInputs` with the envelope's view (:mod:`damper.analysis.envelope_view`)
and the scheduled gain interpolated between the breakpoints on the grids they draw
(:meth:`damper.analysis.schedule_types.Schedule.gain_at`, here and nowhere in output).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .envelope_view import EnvelopeView, envelope_view

#: Points of a drawn gain line (1-D law, and each altitude breakpoint's line of a 2-D table).
DENSE = 241
#: The 2-D gain map's grid: (altitudes, speed-variable values).
MAP_GRID = (160, 200)


@dataclass(frozen=True)
class GainLine:
    """A 1-D schedule's gain on a dense grid a little beyond its breakpoints and verification points.

    Attributes
    ----------
    x : ndarray, shape (m,)
        The schedule variable (SI: Pa, m/s or Mach); only positive values for dynamic pressure.
    gain_s : ndarray, shape (m,)
        The scheduled gain K there, s (held constant beyond the table).
    """

    x: np.ndarray
    gain_s: np.ndarray


@dataclass(frozen=True)
class GainMap:
    """A 2-D schedule's gain over (altitude, speed variable), over the breakpoints and verification points.

    Attributes
    ----------
    altitude_range_m : tuple of float
        (lowest, highest) altitude drawn, m.
    speed_range : tuple of float
        (lowest, highest) value of the speed variable drawn (SI: Pa, m/s or Mach).
    gain_s : ndarray, shape MAP_GRID
        K on the grid [altitude, speed] spanning both ranges evenly, s (bilinear between nodes).
    line_speed : ndarray, shape (DENSE,)
        The speed variable along each altitude breakpoint's line (SI), evenly over `speed_range`.
    line_gain_s : ndarray, shape (n_altitude_breakpoints, DENSE)
        K along each altitude breakpoint, s.
    """

    altitude_range_m: tuple
    speed_range: tuple
    gain_s: np.ndarray
    line_speed: np.ndarray
    line_gain_s: np.ndarray


@dataclass(frozen=True)
class ScheduleFigureInputs:
    """The inputs of the schedule figures that the schedule's result does not hold.

    Attributes
    ----------
    envelope : EnvelopeView or None
        The flight envelope (None: a schedule over the case's conditions).
    line : GainLine or None
        The gain of a 1-D schedule (None for a 2-D table).
    map : GainMap or None
        The gain of a 2-D table (None for a 1-D schedule).
    """

    envelope: EnvelopeView | None
    line: GainLine | None = None
    map: GainMap | None = None


def gain_line(result) -> GainLine:
    """The scheduled gain of a 1-D schedule on :data:`DENSE` points, 4 % beyond what it spans.

    Parameters
    ----------
    result : damper.analysis.schedule_types.ScheduleResult

    Returns
    -------
    GainLine
    """
    sch = result.schedule
    bp = np.asarray(sch.breakpoints[0], float)
    xv = np.asarray(result.verification.points.values[0], float)
    lo = float(np.nanmin(np.concatenate([bp, xv])))
    hi = float(np.nanmax(np.concatenate([bp, xv])))
    span = max(hi - lo, abs(hi) * 0.1, 1e-9)
    xd = np.linspace(lo - 0.04 * span, hi + 0.04 * span, DENSE)
    if sch.variables[0] == "dynamic_pressure":
        xd = xd[xd > 0]
    return GainLine(x=xd, gain_s=sch.gain_at([xd]))


def gain_map(result) -> GainMap:
    """The scheduled gain of a 2-D table (altitude and a speed variable) on the figures' grids.

    Parameters
    ----------
    result : damper.analysis.schedule_types.ScheduleResult

    Returns
    -------
    GainMap
    """
    sch = result.schedule
    ia = sch.variables.index("altitude")
    hb = np.asarray(sch.breakpoints[ia], float)
    sb = np.asarray(sch.breakpoints[1 - ia], float)
    hv = np.asarray(result.verification.points.values[ia], float)
    sv = np.asarray(result.verification.points.values[1 - ia], float)
    h_lo, h_hi = min(hb[0], np.nanmin(hv)), max(hb[-1], np.nanmax(hv))
    s_lo, s_hi = min(sb[0], np.nanmin(sv)), max(sb[-1], np.nanmax(sv))
    Hm, Sm = np.meshgrid(np.linspace(h_lo, h_hi, MAP_GRID[0]), np.linspace(s_lo, s_hi, MAP_GRID[1]), indexing="ij")
    grid = sch.gain_at([Hm.ravel(), Sm.ravel()] if ia == 0 else [Sm.ravel(), Hm.ravel()]).reshape(Hm.shape)
    sdense = np.linspace(s_lo, s_hi, DENSE)
    lines = []
    for h in hb:
        hh = np.full(sdense.size, h)
        lines.append(sch.gain_at([hh, sdense] if ia == 0 else [sdense, hh]))
    return GainMap(altitude_range_m=(h_lo, h_hi), speed_range=(s_lo, s_hi), gain_s=grid, line_speed=sdense,
                   line_gain_s=np.array(lines).reshape(hb.size, DENSE))


def schedule_figure_inputs(case, result) -> ScheduleFigureInputs:
    """The envelope view and the interpolated gain the schedule figures of `result` draw.

    Parameters
    ----------
    case : Case
    result : damper.analysis.schedule_types.ScheduleResult
        Of :func:`damper.analysis.schedule.design_schedule` on `case`.

    Returns
    -------
    ScheduleFigureInputs
    """
    env = envelope_view(case, result)
    if len(result.schedule.variables) == 1:
        return ScheduleFigureInputs(envelope=env, line=gain_line(result))
    return ScheduleFigureInputs(envelope=env, map=gain_map(result))


__all__ = ["DENSE", "MAP_GRID", "GainLine", "GainMap", "ScheduleFigureInputs", "gain_line", "gain_map",
           "schedule_figure_inputs"]
