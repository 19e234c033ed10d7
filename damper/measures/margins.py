"""Stability margins with the loop broken at the actuator input (batched, exact delays).

Definitions (docs/theory.md, section 5, has the full text and the argument):

* gain crossing: ``|L(jw)| = 1``; its phase margin ``PM = wrap(arg L + 180 deg)``
  in [-180, 180) deg. "The" phase margin is the one of smallest magnitude.
* phase crossing: ``arg L = -180 deg (mod 360)``, including ``w = 0`` when
  ``L(0) < 0``; its gain margin ``GM = -20 log10 |L|`` dB. ``gain_margin_db`` is the
  smallest positive one, ``gain_margin_low_db`` the negative one closest to zero.
* delay margin: ``min over gain crossings of (PM mod 360 deg) / w_c``.
* symmetric disk margin (Seiler, Packard and Gahinet, IEEE CSM 2020):
  ``alpha = 2 / max_w |S - T|`` with ``S = 1/(1+L)``, ``T = L/(1+L)``.

How they are found (no dense grid):

* gain crossings are the positive real roots ``x = w^2`` of the crossing polynomial
  ``k^2 |N(jw)|^2 - |D(jw)|^2`` (the delay is all-pass), found by stacked companion-matrix
  eigenvalues; every root near the positive real axis is tested by the exact
  ``ln |L|`` at it and between it and its neighbours, and each sign change is polished by
  regula falsi on the exact loop; a root where ``|L|`` touches 1 without crossing counts once;
* phase crossings are searched between ``analysis.frequency_low`` and ``frequency_high`` on
  intervals whose rational phase moves by at most 10 deg (:mod:`damper.measures.freqset`);
  with the delay's exact ``-w T`` each level ``-180 deg (mod 360)`` can only be met in a
  window of each interval, whose ends are evaluated exactly; a sign change is polished by
  regula falsi, and where the bound says the phase could reach the level and come back
  between the ends, a golden-section search looks for the touch;
* the disk-margin peak is bracketed by branch and bound: each interval's largest possible
  ``|S - T|`` follows from the bounds on ``|L|`` and ``arg L``; intervals that could still
  beat the best value found are split until none can by more than :data:`DISK_RTOL`.

A missing crossing gives NaN (``null`` in JSON: the margin is unbounded that way). A closed
loop that is already unstable has no margins: every margin value (and its crossover
frequency) is NaN there, while the crossings themselves stay listed.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..model.rational import FactoredLoop, at_zero, crossing_polynomial, factored_loop
from ..quantities import quantity
from . import points
from .freqset import Intervals, bounded_intervals, concat, intervals_between, split
from .refine import golden_max, illinois

DEFAULT_GRID = np.logspace(-3.0, 3.0, 31)  # rad/s: the coarse part (5 points per decade, as a case's default)
#: Relative bound to which branch and bound certifies the disk-margin peak (a golden-section
#: search about the best sample then finds the peak itself).
DISK_RTOL = 2e-2
#: Golden-section steps about the best sample (the bracket shrinks to 1e-5 of a cell, the
#: peak value to about 1e-10 of itself).
PEAK_STEPS = 24
#: Times the golden-section bracket may move when the peak lies at its edge.
PEAK_SHIFTS = 4
DISK_PASSES = 40
#: ``|ln |L||`` below which a root of the crossing polynomial where ``|L|`` touches 1 counts.
TOUCH_NEPERS = 1e-9
#: Relative width below which an interval is not split further.
MIN_WIDTH = 1e-10
#: Levels of -180 deg (mod 360) searched per interval at most.
MAX_LEVELS = 10_000
#: Splitting passes of a window whose ends lie on one side of a level (touch search).
TOUCH_PASSES = 3
#: Golden-section steps of the tangency search that follows them.
TOUCH_STEPS = 40
#: Roots within this angle of the positive real axis (in x = w^2) are tested.
ROOT_ANGLE = np.pi / 4
_CHUNK = 1024
_DB = 20.0 / np.log(10.0)


@dataclass(frozen=True)
class Margins:
    """Margins of a batch of loops (arrays with the batch shape).

    Attributes
    ----------
    gain_margin_db : ndarray
        Smallest upward gain margin, dB (NaN: no phase crossing with |L| < 1).
    gain_margin_low_db : ndarray
        Downward gain margin, dB, negative (NaN: none).
    phase_margin_deg : ndarray
        Phase margin: the phase's distance from -180 deg, in either direction, at the gain
        crossing nearest to it, deg (>= 0; NaN: no gain crossing).
    phase_margin_signed_deg : ndarray
        The same crossing's ``wrap(arg L + 180 deg)`` in [-180, 180), deg (negative when the
        phase leads -180 deg there, e.g. at a washout's low crossing).
    gain_crossover_rad_s : ndarray
        Frequency of the gain crossing that sets the phase margin, rad/s.
    phase_crossover_rad_s : ndarray
        Frequency of the phase crossing that sets ``gain_margin_db``, rad/s.
    phase_crossover_low_rad_s : ndarray
        Frequency of the phase crossing that sets ``gain_margin_low_db``, rad/s.
    delay_margin_s : ndarray
        s (NaN: no gain crossing, or the closed loop is unstable).
    disk_margin : ndarray or None
        Symmetric disk margin alpha (NaN: no loop, or the closed loop is unstable; None: not
        searched, ``loop_margins(..., disk=False)``).
    disk_gain_margin_db : ndarray or None
        Gain variation tolerated by the disk, ``20 log10((1 + a/2)/(1 - a/2))`` dB (NaN for a >= 2).
    disk_phase_margin_deg : ndarray or None
        Phase variation tolerated by the disk, ``2 atan(a/2)`` deg.
    gain_crossings_rad_s, phase_margins_deg : ndarray, shape (..., m)
        Every gain crossing (ascending) and its phase margin, NaN-padded.
    phase_crossings_rad_s, gain_margins_db : ndarray, shape (..., m)
        Every phase crossing (ascending) and its gain margin, NaN-padded.
    """

    gain_margin_db: np.ndarray = quantity("dB")
    gain_margin_low_db: np.ndarray = quantity("dB")
    phase_margin_deg: np.ndarray = quantity("deg")
    phase_margin_signed_deg: np.ndarray = quantity("deg")
    gain_crossover_rad_s: np.ndarray = quantity("rad/s")
    phase_crossover_rad_s: np.ndarray = quantity("rad/s")
    phase_crossover_low_rad_s: np.ndarray = quantity("rad/s")
    delay_margin_s: np.ndarray = quantity("s")
    disk_margin: np.ndarray = quantity("")
    disk_gain_margin_db: np.ndarray = quantity("dB")
    disk_phase_margin_deg: np.ndarray = quantity("deg")
    gain_crossings_rad_s: np.ndarray
    phase_margins_deg: np.ndarray
    phase_crossings_rad_s: np.ndarray
    gain_margins_db: np.ndarray


@dataclass(frozen=True)
class Crossings:
    """Crossings of a flat batch: one entry per crossing (``row`` is the loop)."""

    row: np.ndarray
    w: np.ndarray
    value: np.ndarray  # phase margin (deg) or gain margin (dB)


# ----------------------------------------------------------------------------------
# crossings
# ----------------------------------------------------------------------------------


def _dedupe(row, w, *values, rtol=1e-9):
    """Sort crossings by loop and frequency and drop repeats (same loop, |dw| <= rtol w)."""
    order = np.lexsort((w, row))
    row, w = row[order], w[order]
    values = [v[order] for v in values]
    rep = np.zeros(row.size, bool)
    rep[1:] = (row[1:] == row[:-1]) & (np.abs(w[1:] - w[:-1]) <= rtol * np.abs(w[1:]))
    keep = ~rep
    return (row[keep], w[keep], *(v[keep] for v in values))


# ----------------------------------------------------------------------------------
# gain crossings: roots of the crossing polynomial, tested and polished on the exact loop
# ----------------------------------------------------------------------------------


def _polynomial_roots(poly):
    """Roots of each row's polynomial (lowest power first), padded with NaN: (M, d)."""
    m, size = poly.shape
    nonzero = poly != 0
    degree = np.where(nonzero.any(1), size - 1 - np.argmax(nonzero[:, ::-1], 1), 0)
    out = np.full((m, max(size - 1, 1)), np.nan + 0j)
    for d in sorted(set(degree.tolist())):  # np.unique's first call costs ~13 ms of imports
        if d < 1:
            continue
        r = np.nonzero(degree == d)[0]
        monic = poly[r, :d] / poly[r, d : d + 1]
        comp = np.zeros((r.size, d, d))
        comp[:, 0, :] = -monic[:, ::-1]
        if d > 1:
            comp[:, np.arange(1, d), np.arange(d - 1)] = 1.0
        out[r, :d] = np.linalg.eigvals(comp)
    return out


def gain_crossings(fl: FactoredLoop) -> Crossings:
    """Every gain crossing (``|L| = 1``) of every loop, exactly, with its phase margin (deg)."""
    roots = _polynomial_roots(crossing_polynomial(fl))
    near = (roots.real > 0) & (np.abs(roots.imag) <= np.tan(ROOT_ANGLE) * roots.real)
    cand = np.sort(np.where(near, np.sqrt(np.abs(roots.real)), np.nan), 1)  # rad/s, NaN last
    n, d = cand.shape
    nxt = np.concatenate([cand[:, 1:], np.full((n, 1), np.nan)], 1)
    mids = np.where(np.isnan(nxt), 4.0 * cand, np.sqrt(cand * nxt))
    test = np.empty((n, 2 * d + 1))
    test[:, 0] = 0.25 * cand[:, 0]
    test[:, 1::2] = cand
    test[:, 2::2] = mids
    valid = np.isfinite(test)
    r_all = np.broadcast_to(np.arange(n)[:, None], test.shape)
    f = np.full(test.shape, np.nan)
    pl = points.prepared(fl)  # every evaluation below: exact values at one frequency per entry
    f[valid] = points.logmag(pl.take(r_all[valid]), test[valid])
    pos = f >= 0
    change = valid[:, :-1] & valid[:, 1:] & (pos[:, :-1] != pos[:, 1:])
    rr, jj = np.nonzero(change)
    lo, hi = np.log(test[rr, jj]), np.log(test[rr, jj + 1])

    at_rr = pl.take(rr)

    def fn(x, act):
        return points.logmag(at_rr.take(act), np.exp(x))

    x = illinois(fn, lo, hi, f[rr, jj], f[rr, jj + 1]) if rr.size else lo
    # touches: a candidate where |L| reaches 1 without changing side
    tr, tj = np.nonzero(valid & (np.abs(f) <= TOUCH_NEPERS))
    row = np.concatenate([rr, tr])
    w = np.concatenate([np.exp(x), test[tr, tj]])
    phase = points.phase(pl.take(row), w)
    pm = np.rad2deg(np.mod(phase + 2.0 * np.pi, 2.0 * np.pi) - np.pi)
    row, w, pm = _dedupe(row, w, pm)
    return Crossings(row, w, pm)


# ----------------------------------------------------------------------------------
# phase crossings: level windows on bounded intervals
# ----------------------------------------------------------------------------------


def _level_windows(fl: FactoredLoop, iv: Intervals):
    """Every (interval, level) pair where ``arg L`` could meet ``-180 deg + 360 n``.

    On an interval the rational phase lies in ``[th_lo, th_hi]`` and the delay adds
    ``-w T``, so the level ``l`` can only be met where ``w T`` lies in
    ``[th_lo - l, th_hi - l]``: that window is returned (rad/s) with the level (rad) and
    the interval's wiggle (how far the phase can move against its direction, rad).
    """
    t = fl.delay[iv.row]
    n_lo = np.ceil((iv.th_lo - iv.wb * t + np.pi) / (2.0 * np.pi))
    n_hi = np.floor((iv.th_hi - iv.wa * t + np.pi) / (2.0 * np.pi))
    count = np.where(np.isfinite(n_hi - n_lo), np.clip(n_hi - n_lo + 1, 0, MAX_LEVELS), 0).astype(int)
    k = np.repeat(np.arange(count.size), count)
    first = np.concatenate([[0], np.cumsum(count)[:-1]])
    level = 2.0 * np.pi * (n_lo[k] + (np.arange(k.size) - first[k])) - np.pi
    tk = t[k]
    with np.errstate(divide="ignore", invalid="ignore"):
        lo = np.where(tk > 0, np.maximum(iv.wa[k], (iv.th_lo[k] - level) / tk), iv.wa[k])
        hi = np.where(tk > 0, np.minimum(iv.wb[k], (iv.th_hi[k] - level) / tk), iv.wb[k])
    ok = lo <= hi
    return iv.row[k][ok], lo[ok], hi[ok], level[ok], iv.wiggle(fl)[k][ok]


def _as_intervals(fl, row, lo, hi):
    """Intervals ``[lo, hi]`` with their own bounds (factor values at both ends)."""
    return intervals_between(fl, row, np.stack([lo, hi]), np.ones((1, row.size), bool))


def _window_brackets(fl, row, lo, hi, level):
    """Brackets of every crossing of ``level`` by ``arg L`` inside the windows ``[lo, hi]``.

    Each window gets its own bounds from its factors' values at its ends. A window whose
    ends straddle the level is a bracket. A window whose ends lie on one side is dropped
    when its bounds show the level out of reach (the phase would have to move against its
    direction by more than the window's wiggle), and split in two otherwise, for at most
    :data:`TOUCH_PASSES` passes; what is left after that (a tangency) is decided by a
    golden-section search for the point nearest the level.
    """
    parts = ([], [], [], [])
    tangent = []  # (intervals, levels) left for the golden-section search
    iv = _as_intervals(fl, row, lo, hi)
    lev = level
    for n_pass in range(TOUCH_PASSES + 1):
        s_lo, s_hi = iv.pa - lev, iv.pb - lev
        straddle = (s_lo >= 0) != (s_hi >= 0)
        for acc, new in zip(parts, (iv.row, iv.wa, iv.wb, lev)):
            acc.append(new[straddle])
        reach = ~straddle & (np.minimum(np.abs(s_lo), np.abs(s_hi)) <= iv.wiggle(fl))
        go = reach & (iv.wb > iv.wa * (1.0 + MIN_WIDTH)) & (n_pass < TOUCH_PASSES)
        tangent.append((iv.select(reach & ~go), lev[reach & ~go]))
        if not np.any(go):
            break
        iv, lev = split(fl, iv, np.full(int(go.sum()), 2), where=go), np.repeat(lev[go], 2)
    iv = concat([t[0] for t in tangent])
    lev = np.concatenate([t[1] for t in tangent])
    toward = np.where(iv.pa - lev >= 0, -1.0, 1.0)
    sub = points.prepared(fl).take(iv.row)

    def closeness(x):
        return toward * (points.phase(sub, np.exp(x)) - lev)

    x_star, f_star = golden_max(closeness, np.log(iv.wa), np.log(iv.wb), steps=TOUCH_STEPS)
    hit = f_star >= 0
    w_star = np.exp(x_star[hit])
    for acc, new in zip(parts, (iv.row[hit], iv.wa[hit], w_star, lev[hit])):
        acc.append(new)
    for acc, new in zip(parts, (iv.row[hit], w_star, iv.wb[hit], lev[hit])):
        acc.append(new)
    return tuple(np.concatenate(a) for a in parts)


def phase_crossings(fl: FactoredLoop, iv: Intervals, w_low, w_high) -> Crossings:
    """Every phase crossing in ``[w_low, w_high]`` (and at ``w = 0``), with its gain margin (dB).

    Within a window the phase moves one way except for a wiggle bounded by the factors'
    values at the window's ends: ends on both sides of the level bracket a crossing; ends
    on one side within the wiggle of the level may hide two (:func:`_window_brackets`).
    """
    inside = (iv.wb > w_low) & (iv.wa < w_high)
    row, lo, hi, level, _ = _level_windows(fl, iv.select(inside))
    lo, hi = np.maximum(lo, w_low), np.minimum(hi, w_high)
    ok = lo < hi
    row, lo, hi, level = _window_brackets(fl, row[ok], lo[ok], hi[ok], level[ok])

    sub = points.prepared(fl).take(row)

    def fn(x, act):
        return points.phase(sub.take(act), np.exp(x)) - level[act]

    f_lo = points.phase(sub, lo) - level
    f_hi = points.phase(sub, hi) - level
    x = illinois(fn, np.log(lo), np.log(hi), f_lo, f_hi) if row.size else np.log(lo)
    w = np.exp(x)
    gm = -_DB * points.logmag(sub, w)
    real = np.isfinite(gm)  # a phase jump through a zero or pole on the axis is no crossing
    row, w, gm = row[real], w[real], gm[real]
    # zero frequency: L(0) real and negative
    l0 = at_zero(fl)
    dc = np.nonzero(np.isfinite(l0) & (l0 < 0))[0]
    row = np.concatenate([row, dc])
    w = np.concatenate([w, np.zeros(dc.size)])
    with np.errstate(divide="ignore"):
        gm = np.concatenate([gm, -_DB * np.log(-l0[dc])])
    row, w, gm = _dedupe(row, w, gm)
    return Crossings(row, w, gm)


# ----------------------------------------------------------------------------------
# disk margin: branch and bound on |S - T|
# ----------------------------------------------------------------------------------


def disk_ratio(logmag, phase):
    """``|S - T| = |1 - L| / |1 + L|`` from ``ln|L|`` and ``arg L`` (real arithmetic).

    ``|1 -+ L|^2 = 1 -+ 2 |L| cos(arg L) + |L|^2``; for ``|L| > 1`` both are divided by
    ``|L|^2`` so that no square overflows. ``L = -1`` gives inf.
    """
    big = logmag > 0
    inv = np.exp(-np.abs(np.clip(logmag, -700.0, 700.0)))  # |L| or 1/|L|, both <= 1
    two_c = 2.0 * np.cos(phase) * inv
    sq = inv * inv
    # (first - 2c) + last and (first + 2c) + last: first |L|^-2 scaled square, or 1
    first, last = np.where(big, sq, 1.0), np.where(big, 1.0, sq)
    with np.errstate(divide="ignore", invalid="ignore"):
        num = first - two_c
        num += last
        den = first + two_c
        den += last
        ratio = np.sqrt(np.maximum(num, 0.0) / den)
    return np.where(np.isfinite(ratio), ratio, np.inf)


def _disk_bound(fl: FactoredLoop, iv: Intervals):
    """Largest ``|S - T|`` each interval could hold, from its bounds on ``|L|`` and ``arg L``.

    On an interval ``|L|`` lies in ``[rho_lo, rho_hi]`` and ``arg L`` in ``[p_lo, p_hi]``;
    ``|1 + L|^2 = rho^2 + 2 rho cos(arg L) + 1`` is least where the cosine is least (at -1
    when the range holds an odd multiple of pi) and ``rho`` nearest ``-cos``;
    ``|1 - L|^2 = rho^2 - 2 rho cos(arg L) + 1`` is largest where the cosine is least too,
    at one end of the ``rho`` range.
    """
    m_lo, m_hi = iv.m_lo, iv.m_hi
    p_lo, p_hi = iv.phase_range(fl)

    def holds(angle):  # the phase range holds angle + 2 pi n
        return np.floor((p_hi - angle) / (2.0 * np.pi)) >= np.ceil((p_lo - angle) / (2.0 * np.pi))

    c_lo, c_hi = np.cos(p_lo), np.cos(p_hi)
    c_min = np.where(holds(np.pi), -1.0, np.minimum(c_lo, c_hi))
    rho_lo = np.exp(np.clip(m_lo, -300.0, 300.0))
    rho_hi = np.exp(np.clip(m_hi, -300.0, 300.0))
    rho = np.where(c_min < 0, np.clip(-c_min, rho_lo, rho_hi), rho_lo)
    den = np.maximum(rho * rho + 2.0 * rho * c_min + 1.0, 0.0)
    num = np.maximum(rho_lo * rho_lo - 2.0 * rho_lo * c_min, rho_hi * rho_hi - 2.0 * rho_hi * c_min) + 1.0
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.sqrt(np.maximum(num, 0.0) / den)


def _keep_best(best, best_w, best_h, row, ratio, w, h):
    """Raise each loop's best |S - T| with samples ``(row, ratio)`` at ``w`` (resolution ``h``).

    ``row`` is sorted (intervals are kept in loop order).
    """
    if row.size == 0:
        return
    starts = np.concatenate([[0], np.flatnonzero(row[1:] != row[:-1]) + 1])
    seg_max = np.fmax.reduceat(ratio, starts)
    r = row[starts]
    better = seg_max > best[r]
    if not np.any(better):
        return
    seg = np.repeat(np.arange(starts.size), np.diff(np.append(starts, row.size)))
    at_max = np.nonzero((ratio == seg_max[seg]) & better[seg])[0]
    first = at_max[np.concatenate([[True], seg[at_max[1:]] != seg[at_max[:-1]]])]
    rr = row[first]
    best[rr], best_w[rr], best_h[rr] = ratio[first], w[first], h[first]


def disk_peak(fl: FactoredLoop, iv: Intervals) -> np.ndarray:
    """``max_w |S - T|`` of every loop (shape (N,)).

    Branch and bound certifies the peak to :data:`DISK_RTOL` (no interval can hold a value
    above the best sample by more than that); a golden-section search about the best
    sample then finds the peak itself.
    """
    n = fl.size
    l0 = at_zero(fl)
    with np.errstate(divide="ignore", invalid="ignore"):
        r0 = np.abs(1.0 - l0) / np.abs(1.0 + l0)
    # w -> infinity: L -> 0 (the loop is strictly proper); w = 0 exactly (|L| infinite: 1)
    best = np.fmax(np.ones(n), np.where(np.isfinite(l0), r0, 1.0))
    best_w, best_h = np.zeros(n), np.ones(n)
    h = iv.wb / iv.wa
    _keep_best(best, best_w, best_h, iv.row, disk_ratio(iv.la, iv.pa), iv.wa, h)
    _keep_best(best, best_w, best_h, iv.row, disk_ratio(iv.lb, iv.pb), iv.wb, h)
    for _ in range(DISK_PASSES):
        bound = _disk_bound(fl, iv)
        open_ = bound > best[iv.row] * (1.0 + DISK_RTOL)
        # an interval this narrow that can still hold more holds a pole of S on the axis
        # (L = -1, or |L| infinite): its bound is the answer
        tiny = open_ & (iv.wb <= iv.wa * (1.0 + MIN_WIDTH))
        np.maximum.at(best, iv.row[tiny], bound[tiny])
        open_ &= ~tiny
        if not np.any(open_):
            break
        iv = split(fl, iv, np.full(int(open_.sum()), 4), where=open_)
        _keep_best(best, best_w, best_h, iv.row, disk_ratio(iv.lb, iv.pb), iv.wb, iv.wb / iv.wa)
    rows = np.nonzero((best_w > 0) & np.isfinite(best))[0]
    half = np.log(np.minimum(best_h[rows], 1e6))  # a cell each side of the best sample
    x0 = np.log(best_w[rows])
    pl = points.prepared(fl)
    for _ in range(PEAK_SHIFTS if rows.size else 0):  # a peak at the bracket's edge: move the bracket there
        # (only those loops search again: every loop's search is its own, so the rest would repeat theirs)
        sub = pl.take(rows)
        x_star, peak = golden_max(lambda x: disk_ratio(*points.logmag_phase(sub, np.exp(x))), x0 - half, x0 + half,
                                  steps=PEAK_STEPS)
        best[rows] = np.fmax(best[rows], peak)
        edge = np.abs(x_star - x0) > 0.99 * half
        if not np.any(edge):
            break
        rows, half, x0 = rows[edge], half[edge], x_star[edge]
    return best


# ----------------------------------------------------------------------------------
# reductions and the public entry point
# ----------------------------------------------------------------------------------


def _per_row_pad(rows, n, *values):
    """Scatter per-crossing values (sorted by row, then frequency) into NaN-padded (n, m) arrays."""
    counts = np.bincount(rows, minlength=n)
    m = int(counts.max()) if rows.size else 0
    first = np.concatenate([[0], np.cumsum(counts)[:-1]])
    rank = np.arange(rows.size) - first[rows]
    out = []
    for v in values:
        a = np.full((n, max(m, 1)), np.nan)
        a[rows, rank] = v
        out.append(a)
    return out


def _select(rows, n, key, *values):
    """Per row, the values at the smallest `key` (NaN where a row has none)."""
    out_key = np.full(n, np.nan)
    outs = [np.full(n, np.nan) for _ in values]
    if rows.size == 0:
        return (out_key, *outs)
    order = np.lexsort((key, rows))
    r = rows[order]
    firsts = np.unique(r, return_index=True)[1]
    sel = order[firsts]
    out_key[rows[sel]] = key[sel]
    for o, v in zip(outs, values):
        o[rows[sel]] = v[sel]
    return (out_key, *outs)


_SCALARS = (
    "gain_margin_db", "gain_margin_low_db", "phase_margin_deg", "phase_margin_signed_deg", "gain_crossover_rad_s",
    "phase_crossover_rad_s", "phase_crossover_low_rad_s", "delay_margin_s", "disk_margin", "disk_gain_margin_db",
    "disk_phase_margin_deg",
)
_CROSSINGS = ("gain_crossings_rad_s", "phase_margins_deg", "phase_crossings_rad_s", "gain_margins_db")


def _margins_flat(fl: FactoredLoop, coarse, stable, disk=True):
    """Margins of a flat batch: (dict of scalar arrays, dict of NaN-padded crossing arrays).

    With ``disk`` False the disk-margin peak is not searched (its fields stay NaN here)."""
    n = fl.size
    live = (fl.gain != 0) & np.isfinite(fl.gain)
    ok = live if stable is None else live & stable  # an unstable closed loop has no margins
    sub = np.nonzero(live)[0]
    part = fl if sub.size == n else fl.take(sub)  # every loop live (the usual case): no copy
    peak = np.full(n, np.nan)
    if sub.size:
        gc = gain_crossings(part)
        iv = bounded_intervals(part, coarse)
        pc = phase_crossings(part, iv, coarse[0], coarse[-1])
        keep = ok[sub] & disk
        if np.any(keep):
            if np.all(keep):  # every loop (the usual case): the same loops and intervals, nothing gathered
                peak[sub] = disk_peak(part, iv)
            else:
                peak[sub[keep]] = disk_peak(part.take(np.nonzero(keep)[0]), iv.select(keep[iv.row]).renumbered(keep))
    else:
        gc = pc = Crossings(np.zeros(0, int), np.zeros(0), np.zeros(0))
    g_row, g_w, pm = sub[gc.row], gc.w, gc.value
    p_row, p_w, gm = sub[pc.row], pc.w, pc.value

    up = gm > 0
    out = {}
    out["gain_margin_db"], out["phase_crossover_rad_s"] = _select(p_row[up], n, gm[up], p_w[up])
    neg_low, out["phase_crossover_low_rad_s"] = _select(p_row[~up], n, -gm[~up], p_w[~up])
    out["gain_margin_low_db"] = -neg_low
    out["phase_margin_deg"], out["phase_margin_signed_deg"], out["gain_crossover_rad_s"] = _select(
        g_row, n, np.abs(pm), pm, g_w
    )
    with np.errstate(divide="ignore", invalid="ignore"):
        dm = np.deg2rad(np.mod(pm, 360.0)) / g_w
        out["delay_margin_s"] = _select(g_row, n, dm)[0]
        alpha = np.where(np.isnan(peak), np.nan, 2.0 / peak)  # an infinite peak: alpha 0
        out["disk_margin"] = alpha
        out["disk_gain_margin_db"] = np.where(alpha < 2.0, _DB * np.log((1.0 + alpha / 2.0) / (1.0 - alpha / 2.0)), np.nan)
        out["disk_phase_margin_deg"] = np.rad2deg(2.0 * np.arctan(alpha / 2.0))
    for name in _SCALARS:
        out[name] = np.where(ok, out[name], np.nan)
    pads = dict(zip(_CROSSINGS, (*_per_row_pad(g_row, n, g_w, pm), *_per_row_pad(p_row, n, p_w, gm))))
    return out, pads


def loop_margins(loop, stable=None, w=None, chunk=_CHUNK, disk=True) -> Margins:
    """Margins of every loop in the batch.

    Parameters
    ----------
    loop : Loop
        Any batch shape ``S``.
    stable : array_like of bool, optional
        Closed-loop stability (shape ``S``); where False, every margin value is NaN (the
        crossings are still listed) and the disk-margin search is skipped.
    w : ndarray, optional
        Coarse frequency grid, rad/s (ascending, log-spaced): its ends bound the search
        for phase crossings; the loop's own factors add the points that matter. Default
        :data:`DEFAULT_GRID`.
    chunk : int
        Loops evaluated together (bounds memory; results do not depend on it).
    disk : bool
        Search the disk-margin peak (the costliest margin). False: the three disk fields
        are None, every other field is the same, bit for bit.

    Returns
    -------
    Margins
    """
    coarse = DEFAULT_GRID if w is None else np.asarray(w, dtype=float)
    fl_all, shape = factored_loop(loop)
    n = fl_all.size
    st = None if stable is None else np.broadcast_to(np.asarray(stable, bool), shape).reshape(-1)
    scalars, ragged = [], []
    for start in range(0, n, chunk):
        sl = np.arange(start, min(n, start + chunk))
        s, r = _margins_flat(fl_all.take(sl), coarse, None if st is None else st[sl], disk)
        scalars.append(s)
        ragged.append(r)
    fields = {name: np.concatenate([c[name] for c in scalars]).reshape(shape) for name in _SCALARS}
    m = max(r[name].shape[1] for r in ragged for name in _CROSSINGS)
    for name in _CROSSINGS:
        parts = [np.pad(r[name], ((0, 0), (0, m - r[name].shape[1])), constant_values=np.nan) for r in ragged]
        fields[name] = np.concatenate(parts).reshape(shape + (m,))
    if not disk:
        fields.update(disk_margin=None, disk_gain_margin_db=None, disk_phase_margin_deg=None)
    return Margins(**fields)
