"""Frequency intervals built from a loop's own factors, with bounds between their ends.

The phase crossings and the disk-margin peak are searched on intervals of frequency whose
ends are placed from the loop itself (:mod:`damper.model.rational`):

* a coarse log grid (the case's ``analysis.frequency_low``, ``frequency_high`` and
  ``points_per_decade``);
* for every factor, points at which that factor's own phase has moved by 15, 45, 75 ...
  degrees of its whole swing (a quadratic's 180 deg, a first-order factor's 90 deg), its
  natural frequency, its phase turning point and its gain extremum: a damping ratio of
  0.001 puts its points within 0.4 % of the natural frequency, where the phase moves;
* a lowest frequency :data:`W_ZERO` (1e-9 rad/s): below it only ``w = 0`` itself is
  looked at, exactly.

Between two points every factor's phase and log-magnitude is monotone (the turning points
are points), so on an interval each factor lies between its values at the two ends. The
rises of the rising factors and the falls of the falling ones, summed, bound the loop's
rational phase and log-magnitude anywhere on the interval; the delay adds the exactly
known ``-w T``, which only falls. Where both the rise and the fall of the phase exceed
:data:`PHASE_STEP` (a zero and a pole moving together), the interval is split, so that on
every interval the phase is monotone up to a wiggle of at most 10 deg. Nothing between two
points can escape these bounds: that is the argument by which no crossing and no peak is
missed (docs/theory.md, section 5).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..model.rational import FactoredLoop, gain_phase, log_gain

#: Largest wiggle of the phase allowed within an interval, rad (10 deg): where both the
#: rise and the fall exceed it, the interval is split.
PHASE_STEP = np.deg2rad(10.0)
#: Splitting passes at most (each splits an interval into ceil(wiggle / step) parts).
SUBDIVISION_PASSES = 4
#: Lowest frequency of every set, rad/s (below it only w = 0 itself is looked at, exactly).
W_ZERO = 1e-9
#: Highest frequency placed from a factor, rad/s (a corner beyond it is left out: the loop,
#: strictly proper, is far below |L| = 1 there).
W_TOP = 1e9

_QUAD_PHASES = np.deg2rad([15.0, 45.0, 75.0, 105.0, 135.0, 165.0])
_LIN_PHASES = np.deg2rad([15.0, 45.0, 75.0])
POINTS_PER_FACTOR = 9
_FIELDS = ("row", "wa", "wb", "la", "lb", "pa", "pb", "th_lo", "th_hi", "m_lo", "m_hi")


def _first_order_points(corner, width):
    """Points of a first-order factor with ``corner`` (M, F), padded with NaN to ``width``."""
    pts = np.abs(corner)[..., None] * np.tan(_LIN_PHASES)
    pad = np.full(pts.shape[:-1] + (width - pts.shape[-1],), np.nan)
    return np.concatenate([pts, pad], -1)


def factor_points(coef):
    """Frequencies placed from each factor, rad/s, shape (M, F, 9) (NaN where unused).

    Parameters
    ----------
    coef : ndarray, shape (3, F, M)
        Factor coefficients ``(c0, c1, c2)`` of ``c0 + c1 s + c2 s^2``.

    Returns
    -------
    ndarray, shape (M, F, 9)
    """
    c0, c1, c2 = coef[0].T, coef[1].T, coef[2].T
    k = POINTS_PER_FACTOR
    out = np.full(c0.shape + (k,), np.nan)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        # quadratic with both roots on one side (c0 c2 > 0): steps of its own phase,
        # r^2 + 2 zeta cot(phi) r - 1 = 0 solved without cancellation
        wn = np.sqrt(np.abs(c0 / c2))
        zeta = np.abs(c1) / (2.0 * np.sqrt(np.abs(c0 * c2)))
        zc = zeta[..., None] / np.tan(_QUAD_PHASES)
        root = np.sqrt(1.0 + zc * zc)
        r = np.where(zc > 0, 1.0 / (root + zc), root - zc)
        x_ext = (2.0 * c0 * c2 - c1 * c1) / (2.0 * c2 * c2)  # gain extremum, in w^2
        ext = np.sqrt(np.where(x_ext > 0, x_ext, np.nan))
        quad = np.concatenate([wn[..., None] * r, wn[..., None], ext[..., None], np.full(c0.shape + (1,), np.nan)], -1)
        out = np.where(((c2 != 0) & (c0 * c2 > 0))[..., None], quad, out)
        # quadratic with real roots of opposite signs: each root's corner, and the phase
        # turning point sqrt(-c0/c2)
        disc = np.sqrt(np.abs(c1 * c1 - 4.0 * c0 * c2))
        r1 = (np.abs(c1) + disc) / (2.0 * np.abs(c2))
        r2 = np.abs(c0) / (np.abs(c2) * r1)
        apart = np.concatenate([_first_order_points(r1, 3), _first_order_points(r2, 3), wn[..., None], np.full(c0.shape + (2,), np.nan)], -1)
        out = np.where(((c2 != 0) & (c0 * c2 < 0))[..., None], apart, out)
        # quadratic with a root at the origin: s (c1 + c2 s), corner |c1 / c2|
        out = np.where(((c2 != 0) & (c0 == 0))[..., None], _first_order_points(c1 / c2, k), out)
        # first order with a finite corner
        out = np.where(((c2 == 0) & (c1 != 0) & (c0 != 0))[..., None], _first_order_points(c0 / c1, k), out)
    return np.where(np.isfinite(out) & (out > W_ZERO) & (out < W_TOP), out, np.nan)


@dataclass(frozen=True)
class Intervals:
    """Frequency intervals of a flat batch of loops, sorted by loop, then frequency.

    Attributes
    ----------
    row : ndarray of int, shape (M,)
        Loop of each interval.
    wa, wb : ndarray, shape (M,)
        Ends, rad/s.
    la, lb : ndarray
        Exact ``ln |L|`` at the ends, nepers.
    pa, pb : ndarray
        Exact ``arg L`` at the ends (continuous, delay included), rad.
    th_lo, th_hi : ndarray
        Bounds of the rational phase (``arg L + w T``) anywhere on the interval, rad.
    m_lo, m_hi : ndarray
        Bounds of ``ln |L|`` anywhere on the interval, nepers.
    """

    row: np.ndarray
    wa: np.ndarray
    wb: np.ndarray
    la: np.ndarray
    lb: np.ndarray
    pa: np.ndarray
    pb: np.ndarray
    th_lo: np.ndarray
    th_hi: np.ndarray
    m_lo: np.ndarray
    m_hi: np.ndarray

    def select(self, keep) -> "Intervals":
        """The intervals where ``keep`` (bool) holds, or at ``keep`` (integer indices), in that order."""
        keep = np.asarray(keep)
        idx = np.flatnonzero(keep) if keep.dtype == bool else keep
        return Intervals(*(getattr(self, n).take(idx) for n in _FIELDS))

    def renumbered(self, kept) -> "Intervals":
        """The same intervals with ``row`` counted among the loops where ``kept`` (bool) holds."""
        new_index = np.cumsum(kept) - 1
        return Intervals(new_index[self.row], *(getattr(self, n) for n in _FIELDS[1:]))

    def phase_range(self, fl: FactoredLoop):
        """Bounds of ``arg L`` (rad, delay included) on each interval."""
        t = fl.delay[self.row]
        return self.th_lo - self.wb * t, self.th_hi - self.wa * t

    def wiggle(self, fl: FactoredLoop):
        """How far the phase can move against its overall direction within each interval, rad.

        The rational phase can rise ``th_hi - theta(wa)`` and fall ``theta(wa) - th_lo``;
        the delay only falls.
        """
        t = fl.delay[self.row]
        theta_a = self.pa + self.wa * t
        return np.minimum(self.th_hi - theta_a, theta_a - self.th_lo + (self.wb - self.wa) * t)


def _accumulate(coef, sign, w, ww, acc, buf):
    """Add (``sign`` +1) or subtract (-1) every factor of ``coef`` (3, F, M) at ``w`` (K, M)
    into the accumulators ``acc`` = (phase, th_lo, th_hi, |.|^2 product, m_lo, m_hi).

    Each factor's ``c0 - c2 w^2``, ``c1 w``, its phase and squared magnitude are the
    operations of :func:`damper.model.rational.factor_values`, element for element, in
    buffers reused from factor to factor; the accumulations run in factor order.
    """
    phase, th_lo, th_hi, prod, m_lo, m_hi = acc
    re, im, ph, lo, hi = buf
    for i in range(coef.shape[1]):
        np.multiply(coef[2, i], ww, out=re)
        np.subtract(coef[0, i], re, out=re)
        np.multiply(coef[1, i], w, out=im)
        np.arctan2(im, re, out=ph)
        np.multiply(re, re, out=re)
        np.multiply(im, im, out=im)
        sq = np.add(re, im, out=re)
        np.minimum(ph[:-1], ph[1:], out=lo)
        np.maximum(ph[:-1], ph[1:], out=hi)
        if sign > 0:
            phase += ph
            th_lo += lo
            th_hi += hi
        else:
            phase -= ph
            th_lo -= hi
            th_hi -= lo
        prod *= sq
        np.minimum(sq[:-1], sq[1:], out=lo)
        np.maximum(sq[:-1], sq[1:], out=hi)
        if sign > 0:
            m_lo *= lo
            m_hi *= hi
        else:
            m_lo /= hi
            m_hi /= lo


def intervals_between(fl: FactoredLoop, rows, w, keep) -> Intervals:
    """Intervals between consecutive frequencies ``w[k], w[k + 1]`` where ``keep[k]`` holds.

    Parameters
    ----------
    fl : FactoredLoop
    rows : ndarray of int, shape (M,)
        The loop of each column of ``w``.
    w : ndarray, shape (K, M)
        Ascending frequencies of each column, rad/s.
    keep : ndarray of bool, shape (K - 1, M)

    Everything is computed on this layout (slices, no gathers; the loop axis last), one
    factor at a time in reused buffers, and gathered at the end in loop order.
    """
    f = fl.take(rows)
    w = np.ascontiguousarray(w, dtype=float)
    k, m = w.shape
    ww = w * w
    g_p = gain_phase(f)
    phase = g_p - w * f.delay  # exact arg L at every frequency
    th_lo = np.empty((k - 1, m))
    th_lo[...] = g_p
    th_hi = th_lo.copy()
    num = np.ones_like(w)  # |N|^2 and |D|^2 at every frequency
    den = np.ones_like(w)
    m_lo = np.ones_like(th_lo)  # bounds of |N|^2 / |D|^2 on every interval
    m_hi = np.ones_like(th_lo)
    buf = (np.empty_like(w), np.empty_like(w), np.empty_like(w), np.empty_like(th_lo), np.empty_like(th_lo))
    with np.errstate(divide="ignore", invalid="ignore", over="ignore", under="ignore"):
        _accumulate(f.num, 1, w, ww, (phase, th_lo, th_hi, num, m_lo, m_hi), buf)  # numerator factors add
        _accumulate(f.den, -1, w, ww, (phase, th_lo, th_hi, den, m_lo, m_hi), buf)  # denominator factors subtract
        g_m = log_gain(f)
        lm = g_m + 0.5 * np.log(num / den)
        m_lo = g_m + 0.5 * np.log(m_lo)
        m_hi = g_m + 0.5 * np.log(m_hi)
    # loop-major order: (loop, k) pairs where keep holds, as flat indices into the (K, M) and (K - 1, M) arrays
    col, kk = np.nonzero(np.asarray(keep).T)
    ia = kk * m + col  # interval start in (K, M); its end is one row on; in (K - 1, M) the same index

    def at(x, i):
        return x.reshape(-1).take(i)

    ib = ia + m
    return Intervals(rows[col], at(w, ia), at(w, ib), at(lm, ia), at(lm, ib), at(phase, ia), at(phase, ib),
                     at(th_lo, ia), at(th_hi, ia), at(m_lo, ia), at(m_hi, ia))


def base_frequencies(fl: FactoredLoop, coarse):
    """The points of :func:`base_intervals`: the coarse grid, every factor's points and
    :data:`W_ZERO`, ascending per loop.

    Returns
    -------
    w : ndarray, shape (K, N)
        Frequencies of each loop (column), rad/s; 1.0 where a loop has fewer than K points.
    keep : ndarray of bool, shape (K - 1, N)
        Where ``w[k], w[k + 1]`` is an interval (both real points, strictly ascending).
    """
    n = fl.size
    parts = [np.broadcast_to(np.asarray(coarse, dtype=float), (n, len(coarse))), np.full((n, 1), W_ZERO)]
    for coef in (fl.num, fl.den):
        if coef.shape[1]:
            parts.append(factor_points(coef).reshape(n, coef.shape[1] * POINTS_PER_FACTOR))
    w = np.sort(np.concatenate(parts, -1), -1)  # NaN last
    w = np.ascontiguousarray(w[:, : int(np.isfinite(w).sum(1).max())].T)  # (K, N)
    keep = np.isfinite(w[1:]) & (w[1:] > w[:-1])
    return np.where(np.isfinite(w), w, 1.0), keep


def base_intervals(fl: FactoredLoop, coarse) -> Intervals:
    """Intervals between consecutive points of :func:`base_frequencies`."""
    w, keep = base_frequencies(fl, coarse)
    return intervals_between(fl, np.arange(fl.size), w, keep)


def split(fl: FactoredLoop, iv: Intervals, parts, where=None) -> Intervals:
    """Split interval ``k`` into ``parts[k]`` (>= 1) geometric pieces, in order.

    With ``where`` (bool, one per interval of ``iv``), only the intervals where it holds are
    split (``parts`` then has one entry per such interval): ``split(fl, iv.select(where),
    parts)`` without gathering the fields the pieces do not use.
    """
    row, wa, wb = iv.row, iv.wa, iv.wb
    if where is not None:
        idx = np.flatnonzero(where)
        row, wa, wb = row.take(idx), wa.take(idx), wb.take(idx)
    parts = np.asarray(parts, dtype=int)
    p_max = int(parts.max()) if parts.size else 1
    j = np.arange(p_max + 1)[:, None]  # (p_max + 1, 1): cut number
    w = wa * (wb / wa) ** np.minimum(j / parts, 1.0)
    w = np.where(j >= parts, wb, w)
    w[0] = wa
    return intervals_between(fl, row, w, j[:-1] < parts)


def bounded_intervals(fl: FactoredLoop, coarse) -> Intervals:
    """Intervals on which the phase wiggles by at most :data:`PHASE_STEP`.

    Built by :func:`base_intervals` and split where both the rise and the fall exceed the
    step, for at most :data:`SUBDIVISION_PASSES` passes.
    """
    iv = base_intervals(fl, coarse)
    for _ in range(SUBDIVISION_PASSES):
        wig = iv.wiggle(fl)
        bad = wig > PHASE_STEP
        if not np.any(bad):
            break
        parts = np.where(bad, np.minimum(np.ceil(wig / PHASE_STEP), 64), 1).astype(int)
        iv = _replaced(iv, bad, parts, split(fl, iv, parts[bad], where=bad))
    return iv


def _replaced(iv: Intervals, bad, parts, pieces: Intervals) -> Intervals:
    """``_merge(iv.select(~bad), pieces)``, where ``pieces`` holds ``parts[k]`` pieces of each
    interval ``k`` where ``bad`` holds, in order: each such interval is replaced by its
    pieces in place (no sort). That is the merge's order whenever the result is strictly
    ascending by loop, then frequency (a unique order); otherwise the merge itself is done.
    """
    count = np.where(bad, parts, 1)
    first = np.cumsum(count) - count  # position of each interval's first piece
    source = np.empty(int(count.sum()), dtype=np.intp)
    n_kept = int(np.count_nonzero(~bad))
    source[first[~bad]] = np.arange(n_kept)
    nb = count[bad]
    start = np.repeat(first[bad] - (np.cumsum(nb) - nb), nb)  # position minus the piece's own index
    source[start + np.arange(nb.sum())] = n_kept + np.arange(nb.sum())
    out = concat([iv.select(~bad), pieces]).select(source)
    r, wa = out.row, out.wa
    if np.all((r[1:] > r[:-1]) | ((r[1:] == r[:-1]) & (wa[1:] > wa[:-1]))):
        return out
    return _merge(iv.select(~bad), pieces)


def concat(parts) -> Intervals:
    """The intervals of every set in ``parts``, in that order."""
    return Intervals(*(np.concatenate([getattr(p, n) for p in parts]) for n in _FIELDS))


def _merge(a: Intervals, b: Intervals) -> Intervals:
    """Both sets of intervals, sorted by loop, then frequency."""
    both = concat([a, b])
    order = np.lexsort((both.wa, both.row))
    return both.select(order)
