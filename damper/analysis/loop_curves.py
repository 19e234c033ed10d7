"""The loop response ``L(jw)`` of one condition at one gain, as the loop-response figure draws it.

The frequency range comes from the loop (docs/plots.md): a decade below and above the
crossings that set the reported margins and the bare short-period frequency, inside the
case's frequency range. The curve is :func:`damper.model.loop.loop_response` (exact delay);
every margin and crossing comes from the assessment (the same numbers as design.json).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: Points of the drawn curve across the chosen frequency range.
CURVE_POINTS = 600
#: Decades drawn beyond the outermost frequency that matters.
MARGIN_DECADES = 1.0


@dataclass(frozen=True)
class LoopCurve:
    """The loop response of one condition at one gain, with the margins that annotate it.

    Attributes
    ----------
    condition : str
        The condition's name.
    gain_s : float
        K, s.
    frequency_rad_s, gain_db, phase_deg : ndarray
        L(jw) on the grid (exact delay); phase unwrapped from the case's lowest frequency
        like the margin search (rational part unwrapped, minus ``w T`` of the delay).
    gain_crossings_rad_s_deg : tuple of (float, float)
        (frequency rad/s, signed phase offset from -180 deg (mod 360), deg) of every gain
        crossing, from the assessment.
    phase_crossings_rad_s_db : tuple of (float, float)
        (frequency rad/s, -20 log10 |L| dB) of every phase crossing, from the assessment.
    gain_margin_db, gain_margin_low_db, phase_margin_deg, phase_margin_signed_deg : float
        The reported margins (NaN: undefined, unbounded, or the closed loop unstable).
    gain_crossover_rad_s, phase_crossover_rad_s, phase_crossover_low_rad_s : float
        Frequencies of the crossings that set the phase margin, the gain margin and the
        downward gain margin, rad/s (NaN: none).
    delay_margin_s, disk_margin : float
        s and - (NaN: none).
    short_period_rad_s : float
        Bare-airframe short-period natural frequency, rad/s.
    delay_s : float
        The loop's pure delay, s (0 without one).
    stable : bool
        Closed-loop stability at this gain.
    per_unit_gain : bool
        The chosen gain is 0 (the loop is open): the curve is L per unit gain (K = 1 s).
    """

    condition: str
    gain_s: float
    frequency_rad_s: np.ndarray
    gain_db: np.ndarray
    phase_deg: np.ndarray
    gain_crossings_rad_s_deg: tuple
    phase_crossings_rad_s_db: tuple
    gain_margin_db: float
    gain_margin_low_db: float
    phase_margin_deg: float
    phase_margin_signed_deg: float
    gain_crossover_rad_s: float
    phase_crossover_rad_s: float
    phase_crossover_low_rad_s: float
    delay_margin_s: float
    disk_margin: float
    short_period_rad_s: float
    delay_s: float
    stable: bool
    per_unit_gain: bool = False


def _at(x, i):
    a = np.asarray(x)
    return float(a.ravel()[i] if a.size > 1 else a.ravel()[0])


def loop_curve(case, assessment, i, w=None) -> LoopCurve:
    """The loop-response data of condition `i` at the gain of `assessment` (batch (n_conditions,)).

    Parameters
    ----------
    case : Case
    assessment : Assessment
        E.g. ``design.chosen``, or :func:`damper.analysis.assess.assess` at other gains.
    i : int
    w : ndarray, optional
        rad/s, ascending; default :func:`frequency_grid`. The phase is unwrapped from the
        case's lowest frequency whatever `w` is, so its branch matches the margin search.
    """
    from ..model.batch import map_arrays
    from ..model.loop import Loop, loop_response

    w = frequency_grid(case, assessment, i) if w is None else np.asarray(w, dtype=float)
    grid = case.settings.grid()
    lead = grid[grid < w[0]]
    w_all = np.concatenate([lead, w])
    gain = float(np.asarray(assessment.gains)[i])
    d = map_arrays(case.derivatives(), lambda a: a[[i]] if np.ndim(a) else a)
    hw = case.loop.hardware()
    per_unit = gain == 0.0
    L = loop_response(Loop(d, hw, np.array([1.0 if per_unit else gain])), w_all[None, :])[0]
    T = 0.0 if hw.delay is None else float(np.asarray(hw.delay.time))
    phase = np.rad2deg(np.unwrap(np.angle(L * np.exp(1j * w_all * T))) - w_all * T)[lead.size :]
    with np.errstate(divide="ignore"):
        gain_db = 20.0 * np.log10(np.abs(L[lead.size :]))
    m = assessment.margins

    def pairs(x, y):
        x, y = np.asarray(x)[i], np.asarray(y)[i]
        ok = np.isfinite(x) & np.isfinite(y)
        return tuple((float(a), float(b)) for a, b in zip(x[ok], y[ok]))

    return LoopCurve(
        condition=case.conditions[i].name, gain_s=gain, frequency_rad_s=w, gain_db=gain_db, phase_deg=phase,
        gain_crossings_rad_s_deg=pairs(m.gain_crossings_rad_s, m.phase_margins_deg),
        phase_crossings_rad_s_db=pairs(m.phase_crossings_rad_s, m.gain_margins_db),
        gain_margin_db=_at(m.gain_margin_db, i), gain_margin_low_db=_at(m.gain_margin_low_db, i),
        phase_margin_deg=_at(m.phase_margin_deg, i), phase_margin_signed_deg=_at(m.phase_margin_signed_deg, i),
        gain_crossover_rad_s=_at(m.gain_crossover_rad_s, i), phase_crossover_rad_s=_at(m.phase_crossover_rad_s, i),
        phase_crossover_low_rad_s=_at(m.phase_crossover_low_rad_s, i),
        delay_margin_s=_at(m.delay_margin_s, i), disk_margin=_at(m.disk_margin, i),
        short_period_rad_s=_at(assessment.bare.natural_frequency, i), delay_s=T,
        stable=bool(np.asarray(assessment.modes.stable)[i]), per_unit_gain=per_unit,
    )


def frequency_range(case, assessment, i):
    """(low, high) rad/s: a decade beyond the crossings that set the margins and the short period.

    The frequencies that matter are the bare short-period natural frequency and the
    crossings that set the reported gain, downward gain and phase margins (from the
    assessment), or every gain crossing when the closed loop is unstable; the range is clipped to the case's frequency range and spans at least two
    decades.
    """
    m = assessment.margins
    keys = [m.gain_crossover_rad_s, m.phase_crossover_rad_s, m.phase_crossover_low_rad_s]
    pts = [_at(k, i) for k in keys] + [_at(assessment.bare.natural_frequency, i)]
    if not bool(np.asarray(assessment.modes.stable)[i]):  # no margins: the gain crossings matter
        pts += list(np.asarray(m.gain_crossings_rad_s)[i])
    pts = np.array([p for p in pts if np.isfinite(p) and p > 0])
    grid = case.settings.grid()
    if pts.size == 0:
        return float(grid[0]), float(grid[-1])
    lo, hi = np.log10(pts.min()) - MARGIN_DECADES, np.log10(pts.max()) + MARGIN_DECADES
    if hi - lo < 2.0:
        mid = 0.5 * (hi + lo)
        lo, hi = mid - 1.0, mid + 1.0
    return float(max(10.0**lo, grid[0])), float(min(10.0**hi, grid[-1]))


def frequency_grid(case, assessment, i) -> np.ndarray:
    """The drawn grid: :data:`CURVE_POINTS` log-spaced points over :func:`frequency_range`
    plus every crossing inside it (so each marker sits on the drawn curve), rad/s."""
    lo, hi = frequency_range(case, assessment, i)
    m = assessment.margins
    extra = np.concatenate([np.asarray(m.gain_crossings_rad_s)[i], np.asarray(m.phase_crossings_rad_s)[i]])
    extra = extra[np.isfinite(extra) & (extra > lo) & (extra < hi)]
    return np.unique(np.concatenate([np.logspace(np.log10(lo), np.log10(hi), CURVE_POINTS), extra]))


__all__ = ["CURVE_POINTS", "LoopCurve", "frequency_grid", "frequency_range", "loop_curve"]
