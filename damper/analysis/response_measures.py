"""Measures of simulated time histories (batched): time to half amplitude, settling time,
overshoot, peaks, and the time spent at each limit. Definitions in docs/responses.md."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..quantities import quantity
from .simulation import TimeHistory

#: A second peak below this fraction of the first means "not oscillatory": the
#: time to half amplitude is then read from the signal itself, not its peaks.
OSCILLATORY_RATIO = 0.05
#: Peaks smaller than this fraction of the largest excursion are ignored.
PEAK_FLOOR = 1e-3
#: A step's final pitch rate below this fraction of the largest deviation is not
#: used as the reference (the response is then measured like a pulse's).
STEP_REFERENCE_RATIO = 0.1
#: Settling band, fraction of the largest excursion.
SETTLING_BAND = 0.05


@dataclass(frozen=True)
class ResponseMeasures:
    """Measures of time histories; arrays of the batch shape S (NaN: not defined).

    Attributes
    ----------
    time_to_half : ndarray
        s: time for the pitch-rate envelope to fall to half, from its first peak
        after the input ends (see :func:`measure`); NaN if not reached in the record.
    settling_time : ndarray
        s after the input ends until the pitch rate stays within 5 % of its
        largest excursion (about its final value); NaN if not settled in the record.
    overshoot : ndarray
        Ratio of the first opposite-sign pitch-rate peak to the first peak after
        the input ends (0 when there is none).
    peak_pitch_rate : ndarray
        rad/s, signed value of largest magnitude.
    peak_alpha : ndarray
        rad, signed.
    peak_load_factor : ndarray
        g, signed normal load factor increment of largest magnitude.
    peak_surface : ndarray
        rad, largest |delta|.
    peak_surface_rate : ndarray
        rad/s, largest |delta'|.
    time_at_rate_limit : ndarray
        s spent on the rate limit.
    time_at_position_limit : ndarray
        s spent at the travel limit.
    input_end : ndarray
        s.
    time_at_authority_limit : ndarray
        s during which the damper's demand is at or beyond its authority (0 without an
        authority).
    time_at_authority_rate_limit : ndarray
        s during which the damper command's own rate limit acts (0 without one).
    peak_damper : ndarray
        rad, largest |damper command| at the actuator input (after its limits).
    peak_damper_demand : ndarray
        rad, largest |damper demand| (before its limits): the authority the damper would
        need for this response not to saturate (with an authority, over every evaluation
        of the simulation: :attr:`TimeHistory.damper_demand_peak`; else over the samples).
    """

    time_to_half: np.ndarray = quantity("s")
    settling_time: np.ndarray = quantity("s", key="settling_time_5pct_s")
    overshoot: np.ndarray = quantity("", key="overshoot_ratio")
    peak_pitch_rate: np.ndarray = quantity("rad/s")
    peak_alpha: np.ndarray = quantity("rad")
    peak_load_factor: np.ndarray = quantity("g")
    peak_surface: np.ndarray = quantity("rad")
    peak_surface_rate: np.ndarray = quantity("rad/s")
    time_at_rate_limit: np.ndarray = quantity("s")
    time_at_position_limit: np.ndarray = quantity("s", key="time_at_travel_limit_s")
    input_end: np.ndarray = quantity("s")
    time_at_authority_limit: np.ndarray | None = quantity("s", default=None)
    time_at_authority_rate_limit: np.ndarray | None = quantity("s", default=None)
    peak_damper: np.ndarray | None = quantity("rad", default=None)
    peak_damper_demand: np.ndarray | None = quantity("rad", default=None)


def _signed_peak(x):
    i = np.nanargmax(np.abs(x), axis=-1)
    return np.take_along_axis(x, i[..., None], -1)[..., 0]


def _first(mask):
    """Index of the first True along the last axis and whether there is one."""
    return np.argmax(mask, axis=-1), mask.any(axis=-1)


def _at(x, i):
    return np.take_along_axis(x, i[:, None], -1)[:, 0]


def measure(h: TimeHistory) -> ResponseMeasures:
    """Measures of a batch of time histories (no Python loop over the batch).

    Definitions (pitch rate q, final value q_f: 0 after an input that ends, the
    record's last sample after a step or sharp-edged gust; deviation
    ``e = q - q_f``; input end t_e):

    * peaks: local maxima of ``|e|`` after t_e (strictly), refined by a parabola through
      three samples; those below 0.1 % of the largest ``|e|`` are ignored. For a
      step or sharp-edged gust (t_e is the start) the deviation at the start,
      ``|q_f|``, is the first peak when it is at least 10 % of the largest
      deviation, so the overshoot is the classic step overshoot
      ``(q_peak - q_f) / |q_f|`` and the time to half is that of the deviation
      from the final value (a sharp-edged gust ends with q_f near 0 and is
      measured from its first pitch-rate peak);
    * time to half amplitude: from the first peak (P0 at t0). If a second peak
      exists and is at least 5 % of P0 (oscillatory), the envelope is the
      log-linear interpolation through successive peaks and the time is where it
      reaches P0/2 (exactly ``ln 2 / (zeta wn)`` for a second-order free
      oscillation); otherwise it is the last time ``|e|`` exceeds P0/2, minus t0;
    * overshoot: first peak of opposite sign to P0, divided by P0;
    * settling time: last time ``|e|`` exceeds 5 % of its largest value in the
      record, minus t_e (0 if never after t_e);
    * time at a limit: record samples flagged, times the record step.
    """
    shape = np.shape(h.q)[:-1]
    T = h.time
    n_t = T.size
    dt = h.step
    q = np.reshape(h.q, (-1, n_t))
    t_end = np.broadcast_to(np.asarray(h.input_end, dtype=float), shape).reshape(-1)
    # the final value: 0 after an input that ends (the loop returns to trim), the last
    # sample after a step or sharp-edged gust
    e = q - q[:, -1:] if h.persistent else q
    ae = np.abs(e)
    after = T[None, :] >= t_end[:, None] - 1e-9 * dt
    pk, val, tp = _peaks(ae, T, t_end, after, dt, h.persistent)
    with np.errstate(invalid="ignore", divide="ignore"):
        overshoot, t_half = _overshoot_and_half(ae, np.sign(e), pk, val, tp, T, dt)
        settle = _settling(ae, T, t_end, dt)

    def r(a):
        return np.asarray(a).reshape(shape)

    def flat(x):
        return np.reshape(x, (-1, n_t))

    def seconds(flags):
        return r(np.zeros(len(t_end)) if flags is None else np.sum(flat(flags), -1) * dt)

    def largest(x):
        return r(np.zeros(len(t_end)) if x is None else np.max(np.abs(flat(x)), -1))

    return ResponseMeasures(
        time_to_half=r(t_half),
        settling_time=r(settle),
        overshoot=r(overshoot),
        peak_pitch_rate=r(_signed_peak(flat(h.q))),
        peak_alpha=r(_signed_peak(flat(h.alpha))),
        peak_load_factor=r(_signed_peak(flat(h.load_factor))),
        peak_surface=r(np.max(np.abs(flat(h.surface)), -1)),
        peak_surface_rate=r(np.nanmax(np.abs(flat(np.asarray(h.surface_rate))), -1)),
        time_at_rate_limit=r(np.sum(flat(h.rate_limited), -1) * dt),
        time_at_position_limit=r(np.sum(flat(h.position_limited), -1) * dt),
        input_end=r(t_end),
        time_at_authority_limit=seconds(h.authority_limited),
        time_at_authority_rate_limit=seconds(h.authority_rate_limited),
        peak_damper=largest(h.damper),
        peak_damper_demand=(largest(h.damper_demand) if h.damper_demand_peak is None
                            else r(np.broadcast_to(h.damper_demand_peak, shape))),
    )


def _peaks(ae, T, t_end, after, dt, persistent):
    """Peak flags of ``|e|`` after the input's end, with parabolic values and times."""
    n, n_t = ae.shape
    big = np.max(np.where(after, ae, 0.0), axis=-1)
    pk = np.zeros((n, n_t), bool)
    pk[:, 1:-1] = (ae[:, 1:-1] >= ae[:, :-2]) & (ae[:, 1:-1] > ae[:, 2:])
    # strictly after the input's end: a corner of q at the very end (ideal actuator) is no peak
    pk &= (T[None, :] > t_end[:, None] + 0.5 * dt) & (ae > PEAK_FLOOR * big[:, None]) & (big[:, None] > 0)
    # parabolic refinement of every interior sample (used at peaks only)
    val = ae.copy()
    tp = np.broadcast_to(T, (n, n_t)).copy()
    y0, y1, y2 = ae[:, :-2], ae[:, 1:-1], ae[:, 2:]
    den = y0 - 2.0 * y1 + y2
    with np.errstate(invalid="ignore", divide="ignore"):
        off = np.where((den < 0) & (y0 != y1), 0.5 * (y0 - y2) / np.where(den < 0, den, 1.0), 0.0)
    off = np.clip(off, -0.5, 0.5)
    val[:, 1:-1] = y1 - 0.25 * (y0 - y2) * off
    tp[:, 1:-1] = T[None, 1:-1] + off * dt
    if persistent:
        # step or sharp-edged gust: the deviation at the start (-q_f) is the first "peak",
        # so the overshoot is the classic (q_peak - q_f) / |q_f|
        i_e = np.argmax(after, axis=-1)
        r_e = np.arange(n)
        use = (ae[r_e, i_e] >= STEP_REFERENCE_RATIO * big) & (big > 0)
        pk[r_e, i_e] = np.where(use, True, pk[r_e, i_e])
        val[r_e, i_e] = np.where(use, ae[r_e, i_e], val[r_e, i_e])
        tp[r_e, i_e] = np.where(use, T[i_e], tp[r_e, i_e])
    return pk, val, tp


def _overshoot_and_half(ae, sgn, pk, val, tp, T, dt):
    """Overshoot ratio and time to half amplitude, s (NaN: not defined)."""
    n, n_t = ae.shape
    idx = np.broadcast_to(np.arange(n_t), (n, n_t))
    f, has1 = _first(pk)
    p0, t0, s0 = _at(val, f), _at(tp, f), _at(sgn, f)
    later = pk & (idx > f[:, None])
    s, has2 = _first(later)
    p1 = _at(val, s)
    opp, has_opp = _first(later & (sgn != s0[:, None]))
    overshoot = np.where(has1, np.where(has_opp, _at(val, opp) / p0, 0.0), np.nan)
    oscill = has2 & (p1 >= OSCILLATORY_RATIO * p0)
    half = 0.5 * p0
    # oscillatory: first later peak at or below half, and the peak before it
    m, has_m = _first(later & (val <= half[:, None]))
    prev = np.where(pk, idx, -1)
    prev = np.maximum.accumulate(prev, axis=-1)
    prev_before = np.concatenate([np.full((n, 1), -1), prev[:, :-1]], -1)
    pm = _at(prev_before, m)
    pm = np.where(pm < 0, f, pm)
    vp, tpp = _at(val, pm), _at(tp, pm)
    vm, tm = _at(val, m), _at(tp, m)
    frac = np.log(vp / half) / np.log(vp / vm)
    t_osc = np.where(has_m, tpp + (tm - tpp) * frac - t0, np.nan)
    # not oscillatory: last sample with |e| above half (from the first peak on)
    above = (ae >= half[:, None]) & (idx >= f[:, None])
    last = n_t - 1 - np.argmax(above[:, ::-1], axis=-1)
    nxt = np.minimum(last + 1, n_t - 1)
    a_l, a_n = _at(ae, last), _at(ae, nxt)
    cross = T[last] + dt * np.where(a_l > a_n, (a_l - half) / (a_l - a_n), 0.0)
    t_dir = np.where(last < n_t - 1, cross - t0, np.nan)
    return overshoot, np.where(has1, np.where(oscill, t_osc, t_dir), np.nan)


def _settling(ae, T, t_end, dt):
    """Settling time into the 5 % band after the input's end, s (NaN: not settled)."""
    n_t = ae.shape[-1]
    band = SETTLING_BAND * np.max(ae, axis=-1)
    outside = ae > band[:, None]
    lastout = n_t - 1 - np.argmax(outside[:, ::-1], axis=-1)
    any_out = outside.any(-1)
    nx = np.minimum(lastout + 1, n_t - 1)
    o_l, o_n = _at(ae, lastout), _at(ae, nx)
    t_cross = T[lastout] + dt * np.where(o_l > o_n, (o_l - band) / (o_l - o_n), 0.0)
    return np.where(~any_out, 0.0, np.where(lastout >= n_t - 1, np.nan, np.maximum(t_cross - t_end, 0.0)))
