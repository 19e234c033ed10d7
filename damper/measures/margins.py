"""Stability margins with the loop broken at the actuator input (batched, exact delays).

Definitions (docs/theory.md has the full text):

* gain crossing: ``|L(jw)| = 1``; its phase margin ``PM = wrap(arg L + 180 deg)``
  in [-180, 180) deg. "The" phase margin is the one of smallest magnitude
  (with a washout there are often two gain crossings; at the low one the
  phase leads and its margin is large).
* phase crossing: ``arg L = -180 deg (mod 360)``, including ``w = 0`` when
  ``L(0) < 0``; its gain margin ``GM = -20 log10 |L|`` dB. Positive values
  (``|L| < 1``) say how much the gain may rise; negative values (``|L| > 1``)
  how much it may fall. ``gain_margin_db`` is the smallest positive one,
  ``gain_margin_low_db`` the negative one closest to zero.
* delay margin: ``min over gain crossings of (PM mod 360 deg) / w_c``.
* symmetric disk margin (Seiler, Packard and Gahinet, IEEE CSM 2020):
  ``alpha = 2 / max_w |S - T|`` with ``S = 1/(1+L)``, ``T = L/(1+L)``.

A missing crossing gives NaN (``null`` in JSON: no such crossing, the margin
is unbounded in that direction). For a closed loop that is already unstable
the delay and disk margins are 0; crossing values are still reported.

Crossings are found on a log grid (default 1e-3..1e3 rad/s, 100 points per
decade), then refined in log-frequency (Illinois regula falsi, all brackets of
the batch at once). Local peaks of ``|L|`` or of the phase that come within
1 dB / 5 deg of a crossing without reaching it on the grid are refined by a
golden-section search, so a grid cannot step over a crossing where the curve
just touches it.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..model.batch import flatten, take
from ..model.loop import loop_response_at_zero, loop_response_function, loop_response_rational

DEFAULT_GRID = np.logspace(-3.0, 3.0, 601)  # rad/s
TOUCH_DB = 1.0
TOUCH_TURNS = 5.0 / 360.0
_ROOT_STEPS = 14
_ROOT_FTOL = 1e-12  # |f| (dB or turns) at which a crossing is final (a few 1e-14 decades in w)
_GOLDEN = 16
_CHUNK = 1024


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
        Phase margin of smallest magnitude, deg (NaN: no gain crossing).
    gain_crossover_rad_s : ndarray
        Frequency of the gain crossing that sets the phase margin, rad/s.
    phase_crossover_rad_s : ndarray
        Frequency of the phase crossing that sets ``gain_margin_db``, rad/s.
    phase_crossover_low_rad_s : ndarray
        Frequency of the phase crossing that sets ``gain_margin_low_db``, rad/s.
    delay_margin_s : ndarray
        s (NaN: no gain crossing; 0: closed loop unstable).
    disk_margin : ndarray
        Symmetric disk margin alpha (0: unstable).
    disk_gain_margin_db : ndarray
        Gain variation tolerated by the disk, ``20 log10((1 + a/2)/(1 - a/2))`` dB (NaN for a >= 2).
    disk_phase_margin_deg : ndarray
        Phase variation tolerated by the disk, ``2 atan(a/2)`` deg.
    gain_crossings_rad_s, phase_margins_deg : ndarray, shape (..., m)
        Every gain crossing (ascending) and its phase margin, NaN-padded.
    phase_crossings_rad_s, gain_margins_db : ndarray, shape (..., m)
        Every phase crossing (ascending) and its gain margin, NaN-padded.
    """

    gain_margin_db: np.ndarray
    gain_margin_low_db: np.ndarray
    phase_margin_deg: np.ndarray
    gain_crossover_rad_s: np.ndarray
    phase_crossover_rad_s: np.ndarray
    phase_crossover_low_rad_s: np.ndarray
    delay_margin_s: np.ndarray
    disk_margin: np.ndarray
    disk_gain_margin_db: np.ndarray
    disk_phase_margin_deg: np.ndarray
    gain_crossings_rad_s: np.ndarray
    phase_margins_deg: np.ndarray
    phase_crossings_rad_s: np.ndarray
    gain_margins_db: np.ndarray


def _unwrap_turns(angle):
    """Continuous phase in turns along the last axis (angles in rad, steps below half a turn)."""
    t = angle / (2.0 * np.pi)
    step = np.diff(t, axis=-1)
    step -= np.round(step)
    out = np.empty_like(t)
    out[..., 0] = t[..., 0]
    np.cumsum(step, axis=-1, out=out[..., 1:])
    out[..., 1:] += t[..., :1]
    return out


def _delay_time(loop, n):
    delay = loop.hardware.delay
    if delay is None:
        return np.zeros(n)
    return np.broadcast_to(np.asarray(delay.time, dtype=float), (n,))


def _bisect(fn, lo, hi, f_lo):
    """Vectorised root refinement of ``fn`` on brackets [lo, hi] (log10 w) with a sign change.

    The Illinois variant of regula falsi (superlinear, keeps the bracket), falling back to
    bisection where the secant step is not usable; ``_ROOT_STEPS`` steps take a bracket of
    a grid cell well below 1e-10 in log10 w for the smooth curves met here.  A bracket stops
    once its better end is within ``_ROOT_FTOL`` of zero (usually after 5-7 steps); the loop
    ends when every bracket has stopped.
    """
    f_hi = fn(hi)
    a, b, fa, fb = lo.copy(), hi.copy(), f_lo.copy(), f_hi
    side = np.zeros(a.shape, int)
    done = np.minimum(np.abs(fa), np.abs(fb)) <= _ROOT_FTOL
    for _ in range(_ROOT_STEPS):
        if done.all():
            break
        with np.errstate(invalid="ignore", divide="ignore"):
            x = (a * fb - b * fa) / (fb - fa)
        bad = ~np.isfinite(x) | (x <= np.minimum(a, b)) | (x >= np.maximum(a, b))
        x = np.where(bad, 0.5 * (a + b), x)
        fx = fn(x)
        left = (np.sign(fx) == np.sign(fa)) & ~done  # root between x and b
        right = ~left & ~done
        a_new = np.where(left, x, a)
        fa_new = np.where(left, fx, fa)
        b_new = np.where(right, x, b)
        fb_new = np.where(right, fx, fb)
        # Illinois: halve the stale end's value when the same end is kept twice
        fb_new = np.where(left & (side == 1), 0.5 * fb_new, fb_new)
        fa_new = np.where(right & (side == -1), 0.5 * fa_new, fa_new)
        side = np.where(left, 1, np.where(right, -1, side))
        a, b, fa, fb = a_new, b_new, fa_new, fb_new
        # a bracket whose better end is within _ROOT_FTOL of zero is final (per bracket,
        # so a bracket's answer never depends on the others of the batch)
        done = done | (np.minimum(np.abs(fa), np.abs(fb)) <= _ROOT_FTOL)
    return np.where(np.abs(fa) < np.abs(fb), a, b)


def _golden_max(fn, lo, hi):
    """Vectorised golden-section search for the maximum of ``fn`` on [lo, hi]."""
    r = (np.sqrt(5.0) - 1.0) / 2.0
    a, b = lo.copy(), hi.copy()
    c = b - r * (b - a)
    d = a + r * (b - a)
    fc, fd = fn(c), fn(d)
    for _ in range(_GOLDEN):
        keep_left = fc > fd
        b = np.where(keep_left, d, b)
        a = np.where(keep_left, a, c)
        new_c = b - r * (b - a)
        new_d = a + r * (b - a)
        c_next = np.where(keep_left, new_c, d)
        d_next = np.where(keep_left, c, new_d)
        f_c_next = np.where(keep_left, fn(new_c), fd)
        f_d_next = np.where(keep_left, fc, fn(new_d))
        c, d, fc, fd = c_next, d_next, f_c_next, f_d_next
    x = 0.5 * (a + b)
    return x, fn(x)


def _touch_brackets(f, lw, rows_ok, tol, fn_builder):
    """Brackets for curves that come within `tol` of zero between grid points without crossing.

    Returns (rows, lo, hi, f_lo, peak_index) of the extra brackets: for each
    refined peak that crosses zero, two brackets (left side, right side).
    """
    # screen the grid for points within `tol` of zero (few), then test those for a peak
    # below zero or a trough above it
    r, i = np.nonzero(np.abs(f[:, 1:-1]) < tol)
    fm, f0, fp = f[r, i], f[r, i + 1], f[r, i + 2]
    peak = (f0 > fm) & (f0 > fp) & (f0 < 0)
    trough = (f0 < fm) & (f0 < fp) & (f0 > 0)
    cand = (peak | trough) & rows_ok[r]
    r, i, peak = r[cand], i[cand], peak[cand]
    if r.size == 0:
        empty = np.zeros(0)
        return np.zeros(0, int), empty, empty, empty, np.zeros(0, int)
    sign = np.where(peak, 1.0, -1.0)
    fn = fn_builder(r, i + 1)
    x, fx = _golden_max(lambda z: sign * fn(z), lw[i], lw[i + 2])
    crossed = fx >= 0.0
    r, i, x, sign, fx = r[crossed], i[crossed], x[crossed], sign[crossed], fx[crossed]
    lo = np.concatenate([lw[i], x])
    hi = np.concatenate([x, lw[i + 2]])
    rows = np.concatenate([r, r])
    ii = np.concatenate([i, i])
    f_lo = np.concatenate([f[r, i], sign * fx])  # value at each bracket's left end
    return rows, lo, hi, f_lo, ii + 1


def _per_row_pad(rows, n, *values):
    """Scatter per-crossing values into NaN-padded (n, m) arrays, ascending by the first value."""
    order = np.lexsort((values[0], rows))
    rows = rows[order]
    vals = [v[order] for v in values]
    counts = np.bincount(rows, minlength=n)
    m = int(counts.max()) if counts.size and rows.size else 0
    first = np.concatenate([[0], np.cumsum(counts)[:-1]])
    rank = np.arange(rows.size) - first[rows]
    out = []
    for v in vals:
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


def _disk_ratio(mag, cos_phase):
    """``|S - T| = |(1 - L) / (1 + L)|`` from ``|L|`` and ``cos(arg L)`` (real arithmetic).

    ``|1 -+ L|^2 = 1 -+ 2 |L| cos(arg L) + |L|^2``; for ``|L| > 1`` both are divided by
    ``|L|^2`` so that no square overflows.  A zero denominator (``L = -1``) gives inf.
    """
    big = mag > 1.0
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        inv = np.where(big, 1.0 / mag, mag)  # |L| or 1/|L|, both <= 1
        two_c = 2.0 * cos_phase * inv
        sq = inv * inv
        num = np.where(big, sq - two_c + 1.0, 1.0 - two_c + sq)
        den = np.where(big, sq + two_c + 1.0, 1.0 + two_c + sq)
        ratio = np.sqrt(np.maximum(num, 0.0) / den)
    return np.where(np.isfinite(ratio), ratio, np.inf)


def _disk_peak_index(mag, turns):
    """Per row, the grid index where ``|S - T|`` is largest (last axis).

    ``|S - T|^2 = (1 - 2u) / (1 + 2u)`` with ``u = |L| cos(arg L) / (1 + |L|^2)
    = cos(arg L) / (|L| + 1/|L|)``, which falls as ``u`` rises: the peak is where ``u`` is
    least, found with two passes over the grid instead of the ratio's ten.  ``turns`` is
    ``arg L`` in turns; its cosine is taken in single precision (numpy's float64 cosine
    is scalar code, about 25 times slower), which only chooses the grid point: two points
    whose ratios differ by less than about 1e-6 relative may swap, and the caller refines
    the peak around the chosen point in double precision.  NaN (a loop whose response is
    not finite) is taken first, as the ratio's inf would be.
    """
    frac = turns - np.rint(turns)  # same cosine, argument within half a turn
    frac *= 2.0 * np.pi
    u = np.cos(frac.astype(np.float32)).astype(np.float64)
    with np.errstate(divide="ignore", invalid="ignore"):
        den = 1.0 / mag
        den += mag
        u /= den
    return np.argmin(u, axis=-1)


def _margins_flat(loop, w, stable):
    n = int(np.size(loop.gain))
    lw = np.log10(w)
    T = _delay_time(loop, n)
    rational = loop_response_rational(loop, w[None, :])
    wT = w[None, :] * T[:, None]
    mag = np.abs(rational)  # |L| (the delay is all-pass)
    mag_db = 20.0 * np.log10(np.maximum(mag, 1e-300))
    turns = _unwrap_turns(np.angle(rational)) - wT / (2.0 * np.pi)
    g = turns + 0.5  # integer values of g are phase crossings (-180 deg mod 360)
    ok = np.all(np.isfinite(rational), -1) & (np.asarray(loop.gain) != 0)

    cache = {}

    def eval_L(rows, lwq):
        key = id(rows)
        hit = cache.get(key)
        if hit is None or hit[0] is not rows:
            hit = (rows, loop_response_function(take(loop, rows)))
            cache[key] = hit
        return hit[1]((10.0**lwq)[:, None])[:, 0]

    # ---- gain crossings -------------------------------------------------
    def gain_fn(rows, _i):
        return lambda z: 20.0 * np.log10(np.maximum(np.abs(eval_L(rows, z)), 1e-300))

    pos = mag_db >= 0.0
    r, i = np.nonzero((pos[:, :-1] != pos[:, 1:]) & ok[:, None])
    lo, hi, f_lo = lw[i], lw[i + 1], mag_db[r, i]
    tr, tlo, thi, tf, tpk = _touch_brackets(mag_db, lw, ok, TOUCH_DB, gain_fn)
    r_g = np.concatenate([r, tr])
    lo_g = np.concatenate([lo, tlo])
    hi_g = np.concatenate([hi, thi])
    f_g = np.concatenate([f_lo, tf])
    ig = np.concatenate([i, tpk - 1])
    x_g = _bisect(gain_fn(r_g, None), lo_g, hi_g, f_g) if r_g.size else lo_g
    wc = 10.0**x_g

    # phase at the gain crossings, continued from the grid point left of it
    def phase_turns(rows, i_left, lwq):
        wq = 10.0**lwq
        Lq = eval_L(rows, lwq) * np.exp(1j * wq * T[rows])
        base = rational[rows, i_left]
        step = np.angle(Lq / base) / (2.0 * np.pi)
        return turns[rows, i_left] + step - (wq - w[i_left]) * T[rows] / (2.0 * np.pi)

    if r_g.size:
        phase_deg = 360.0 * phase_turns(r_g, ig, x_g)
        pm = np.mod(phase_deg + 180.0 + 180.0, 360.0) - 180.0
        dm = np.deg2rad(np.mod(pm, 360.0)) / wc
    else:
        pm = dm = np.zeros(0)

    # ---- phase crossings ------------------------------------------------
    fl = np.floor(g)
    r, i = np.nonzero((fl[:, :-1] != fl[:, 1:]) & ok[:, None])
    target = np.maximum(fl[r, i], fl[r, i + 1])

    def phase_fn_builder(rows, i_left, tgt):
        return lambda z: phase_turns(rows, i_left, z) + 0.5 - tgt

    # touches of -180 deg: peaks/troughs of g that approach an integer from one side
    nearest = np.round(g)

    def touch_fn(rows, i_peak):
        return phase_fn_builder(rows, i_peak - 1, nearest[rows, i_peak])

    tr, tlo, thi, _, tpk = _touch_brackets(g - nearest, lw, ok, TOUCH_TURNS, touch_fn)
    ti = tpk - 1
    ttgt = nearest[tr, tpk]
    r_p = np.concatenate([r, tr])
    i_p = np.concatenate([i, ti])
    t_p = np.concatenate([target, ttgt])
    lo_p = np.concatenate([lw[i], tlo])
    hi_p = np.concatenate([lw[i + 1], thi])
    if r_p.size:
        fn = phase_fn_builder(r_p, i_p, t_p)
        x_p = _bisect(fn, lo_p, hi_p, fn(lo_p))
        wp = 10.0**x_p
        gm = -20.0 * np.log10(np.maximum(np.abs(eval_L(r_p, x_p)), 1e-300))
    else:
        wp = gm = np.zeros(0)
    # zero-frequency crossing (L(0) real and negative)
    L0 = loop_response_at_zero(loop)
    dc = ok & np.isfinite(L0) & (L0 < 0)
    r_dc = np.nonzero(dc)[0]
    r_p = np.concatenate([r_p, r_dc])
    wp = np.concatenate([wp, np.zeros(r_dc.size)])
    gm = np.concatenate([gm, -20.0 * np.log10(-L0[r_dc])])

    # ---- reductions -------------------------------------------------------
    up = gm > 0
    gm_up, w_up = _select(r_p[up], n, gm[up], wp[up])
    low = ~up
    neg_gm_low, w_low = _select(r_p[low], n, -gm[low], wp[low])
    _, pm_min, wc_min = _select(r_g, n, np.abs(pm), pm, wc)
    dm_min = _select(r_g, n, dm)[0]

    gx, gpm = _per_row_pad(r_g, n, wc, pm)
    px, pgm = _per_row_pad(r_p, n, wp, gm)

    # ---- disk margin ------------------------------------------------------
    k = _disk_peak_index(mag, turns)
    rows = np.arange(n)
    st_grid = _disk_ratio(mag[rows, k], np.cos(2.0 * np.pi * turns[rows, k]))
    k0 = np.clip(k - 1, 0, len(w) - 1)
    k1 = np.clip(k + 1, 0, len(w) - 1)

    def st_fn(z):
        Lz = eval_L(rows, z)
        return np.abs((1.0 - Lz) / (1.0 + Lz))

    _, peak = _golden_max(st_fn, lw[k0], lw[k1])
    peak = np.maximum(peak, st_grid)
    with np.errstate(divide="ignore", invalid="ignore"):
        alpha = np.where(np.isfinite(peak), 2.0 / peak, 0.0)
        if stable is not None:
            alpha = np.where(stable, alpha, 0.0)
            dm_min = np.where(stable, dm_min, 0.0)
        disk_gm = np.where(alpha < 2.0, 20.0 * np.log10((1.0 + alpha / 2.0) / (1.0 - alpha / 2.0)), np.nan)
        disk_pm = np.rad2deg(2.0 * np.arctan(alpha / 2.0))
    never = ~ok
    alpha = np.where(never & (np.asarray(loop.gain) == 0), np.nan, alpha)
    return [gm_up, -neg_gm_low, pm_min, wc_min, w_up, w_low, dm_min, alpha, disk_gm, disk_pm], [gx, gpm, px, pgm]


def loop_margins(loop, stable=None, w=None, chunk=_CHUNK) -> Margins:
    """Margins of every loop in the batch.

    Parameters
    ----------
    loop : Loop
        Any batch shape ``S``.
    stable : array_like of bool, optional
        Closed-loop stability (shape ``S``); where False, the delay and disk
        margins are 0.
    w : ndarray, optional
        Search grid, rad/s (ascending, log-spaced); default :data:`DEFAULT_GRID`.
    chunk : int
        Loops evaluated together (bounds memory).

    Returns
    -------
    Margins
    """
    w = DEFAULT_GRID if w is None else np.asarray(w, dtype=float)
    flat, shape = flatten(loop)
    n = int(np.prod(shape)) if shape else 1
    st = None if stable is None else np.broadcast_to(np.asarray(stable, bool), shape).reshape(-1)
    scalars, ragged = [], []
    for start in range(0, n, chunk):
        sl = slice(start, min(n, start + chunk))
        s, r = _margins_flat(take(flat, sl), w, None if st is None else st[sl])
        scalars.append(s)
        ragged.append(r)
    cols = [np.concatenate([c[j] for c in scalars]).reshape(shape) for j in range(len(scalars[0]))]
    m = max(a.shape[1] for r in ragged for a in r)
    pads = []
    for j in range(4):
        parts = [np.pad(r[j], ((0, 0), (0, m - r[j].shape[1])), constant_values=np.nan) for r in ragged]
        pads.append(np.concatenate(parts).reshape(shape + (m,)))
    return Margins(*cols, *pads)
