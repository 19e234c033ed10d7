"""The margins' faster parts give the same bits as the plain forms they replace: the loop at
one frequency per loop (damper.measures.points) against the full evaluation, the intervals
built one factor at a time (damper.measures.freqset) against the per-factor formulas
written out here, and split intervals put in place against the sort they replace; each also
against the factored form's complex product."""

import numpy as np

from damper.measures import freqset, points
from damper.model.airframe import Derivatives
from damper.model.elements import Delay, Lag, LeadLag, Washout
from damper.model.loop import Hardware, Loop
from damper.model.rational import evaluate, factored_loop


def _loops(n=150, seed=11):
    """Invented airframes (some statically unstable) and gains, both signs of M_delta, with an
    actuator, gyro lag, washout, lead-lag and a delay (test data only)."""
    rng = np.random.default_rng(seed)
    d = Derivatives(airspeed=rng.uniform(40, 250, n), Z_alpha=-rng.uniform(80, 1500, n), Z_q=np.zeros(n),
                    Z_delta=-rng.uniform(0, 40, n),
                    M_alpha=-rng.uniform(1, 30, n) * np.where(rng.uniform(size=n) < 0.2, -0.3, 1.0),
                    M_alpha_dot=-rng.uniform(0, 1, n), M_q=-rng.uniform(0.4, 4, n),
                    M_delta=rng.choice([-1.0, 1.0], n) * rng.uniform(5, 50, n))
    hw = Hardware(actuator=Lag(0.05), sensor=Lag(0.01), washout=Washout(1.0), delay=Delay(np.asarray(0.03), 2),
                  filters=(LeadLag(0.2, 0.05),))
    return factored_loop(Loop(d, hw, rng.uniform(0.05, 0.6, n)))[0]


def _by_hand(fl, w):
    """``k prod n_i(jw) / prod d_j(jw) exp(-jwT)`` at ``w`` (M,), the factored form of
    docs/theory.md, section 3, written out as a complex product."""
    s = 1j * w
    out = fl.gain * np.exp(-s * fl.delay)
    for coef, sign in ((fl.num, 1), (fl.den, -1)):
        for i in range(coef.shape[1]):
            out = out * (coef[0, i] + coef[1, i] * s + coef[2, i] * s * s) ** sign
    return out


def test_one_frequency_per_loop_is_the_full_evaluation_bit_for_bit():
    fl = _loops()
    rng = np.random.default_rng(5)
    w = np.exp(rng.uniform(np.log(1e-3), np.log(1e3), fl.size))
    logmag, phase = evaluate(fl, w[:, None])
    p = points.prepared(fl)
    lm, ph = points.logmag_phase(p, w)
    assert np.array_equal(lm, logmag[:, 0]) and np.array_equal(ph, phase[:, 0])
    assert np.array_equal(points.logmag(p, w), lm) and np.array_equal(points.phase(p, w), ph)
    rows = rng.permutation(fl.size)[:60]  # a subset, in another order: each loop its own bits
    assert np.array_equal(points.phase(p.take(rows), w[rows]), ph[rows])
    # Source: the complex product of the factors, written above (phase modulo 2 pi)
    ref = _by_hand(fl, w)
    np.testing.assert_allclose(lm, np.log(np.abs(ref)), rtol=0, atol=1e-10)
    np.testing.assert_allclose(np.angle(np.exp(1j * (ph - np.angle(ref)))), 0.0, atol=1e-10)


def _intervals_by_formula(fl, rows, w, keep):
    """Every field of :class:`damper.measures.freqset.Intervals`, from the per-factor formulas
    (docs/theory.md, section 5) in the order the module documents: phases and squared
    magnitudes of all factors at once, bounds as sums of the factors' smaller and larger
    end values, gathered in loop-major order."""
    f = fl.take(rows)
    ww = w * w
    vals = []
    for coef in (f.num, f.den):
        re = coef[0][:, None, :] - coef[2][:, None, :] * ww
        im = coef[1][:, None, :] * w
        vals.append((np.arctan2(im, re), re * re + im * im))
    (nph, nsq), (dph, dsq) = vals
    arg_k = np.where(f.gain < 0, np.pi, 0.0)
    phase = arg_k - w * f.delay
    th_lo = np.broadcast_to(arg_k, (w.shape[0] - 1, rows.size)).copy()
    th_hi, num, den = th_lo.copy(), np.ones_like(w), np.ones_like(w)
    m_lo, m_hi = np.ones_like(th_lo), np.ones_like(th_lo)
    for ph, sq in zip(nph, nsq):
        phase += ph
        th_lo += np.minimum(ph[:-1], ph[1:])
        th_hi += np.maximum(ph[:-1], ph[1:])
        num *= sq
        m_lo *= np.minimum(sq[:-1], sq[1:])
        m_hi *= np.maximum(sq[:-1], sq[1:])
    for ph, sq in zip(dph, dsq):
        phase -= ph
        th_lo -= np.maximum(ph[:-1], ph[1:])
        th_hi -= np.minimum(ph[:-1], ph[1:])
        den *= sq
        m_lo /= np.maximum(sq[:-1], sq[1:])
        m_hi /= np.minimum(sq[:-1], sq[1:])
    with np.errstate(divide="ignore"):
        g = np.log(np.abs(f.gain))
    lm = g + 0.5 * np.log(num / den)
    sel = keep.T
    a, b = (lambda x: x[:-1].T[sel]), (lambda x: x[1:].T[sel])
    return dict(row=np.broadcast_to(rows[:, None], sel.shape)[sel], wa=a(w), wb=b(w), la=a(lm), lb=b(lm),
                pa=a(phase), pb=b(phase), th_lo=th_lo.T[sel], th_hi=th_hi.T[sel],
                m_lo=(g + 0.5 * np.log(m_lo)).T[sel], m_hi=(g + 0.5 * np.log(m_hi)).T[sel])


def test_intervals_one_factor_at_a_time_are_the_formulas_bit_for_bit():
    fl = _loops()
    rng = np.random.default_rng(8)
    rows = rng.integers(0, fl.size, 300)
    w = np.sort(np.exp(rng.uniform(np.log(1e-3), np.log(1e3), (7, rows.size))), 0)
    keep = rng.uniform(size=(6, rows.size)) < 0.8
    iv = freqset.intervals_between(fl, rows, w, keep)
    ref = _intervals_by_formula(fl, rows, w, keep)
    for name, value in ref.items():
        assert np.array_equal(getattr(iv, name), value, equal_nan=True), name
    # Source: the complex product at the ends; the bounds hold the loop at the interval's middle
    with np.errstate(divide="ignore", invalid="ignore"):
        l_end = _by_hand(fl.take(iv.row), iv.wa)
        np.testing.assert_allclose(iv.la, np.log(np.abs(l_end)), rtol=0, atol=1e-9)
        mid = np.sqrt(iv.wa * iv.wb)
        l_mid = np.log(np.abs(_by_hand(fl.take(iv.row), mid)))
    assert np.all((l_mid >= iv.m_lo - 1e-9) & (l_mid <= iv.m_hi + 1e-9))


def test_split_intervals_in_place_equal_the_sorted_merge():
    fl = _loops(40)
    iv = freqset.base_intervals(fl, np.logspace(-3, 3, 31))
    rng = np.random.default_rng(2)
    bad = rng.uniform(size=iv.row.size) < 0.3
    parts = np.where(bad, rng.integers(2, 6, iv.row.size), 1)
    pieces = freqset.split(fl, iv.select(bad), parts[bad])
    merged = freqset._merge(iv.select(~bad), pieces)
    placed = freqset._replaced(iv, bad, parts, pieces)
    for name in freqset._FIELDS:
        assert np.array_equal(getattr(placed, name), getattr(merged, name), equal_nan=True), name
    # a piece starting where a kept interval starts (a tie the sort breaks by its stable
    # order): the merge's order is kept
    tie = freqset.concat([pieces.select(np.arange(1)), pieces.select(np.arange(1))])
    ref = freqset._merge(iv.select(np.arange(0)), tie)
    got = freqset._replaced(iv.select(np.arange(1)), np.array([True]), np.array([2]), tie)
    for name in freqset._FIELDS:
        assert np.array_equal(getattr(got, name), getattr(ref, name), equal_nan=True), name
    # Source: common practice (a sorted set's definition): by loop, then by frequency; and
    # these intervals hold a tie of their own (a piece of width 1e-16 that rounds onto the
    # next interval's start), which the in-place order must leave to the merge
    assert np.all(np.diff(placed.row) >= 0)
    same = placed.row[1:] == placed.row[:-1]
    assert np.all(placed.wa[1:][same] >= placed.wa[:-1][same])
    assert np.any(same & (placed.wa[1:] == placed.wa[:-1]))


def test_disk_ratio_is_its_two_branch_formula_bit_for_bit():
    from damper.measures.margins import disk_ratio

    rng = np.random.default_rng(4)
    logmag = np.concatenate([rng.normal(0, 3, 5000), [0.0, 800.0, -800.0, np.inf, -np.inf, np.nan]])
    phase = np.concatenate([rng.uniform(-10, 10, 5000), [np.pi, 1.0, 2.0, 0.5, 0.5, 0.5]])
    # Source: |S - T|^2 = |1 - L|^2 / |1 + L|^2 with |1 -+ L|^2 = 1 -+ 2|L|cos(arg L) + |L|^2,
    # divided by |L|^2 where |L| > 1 (the docstring's formula, written out in its order)
    inv = np.exp(-np.abs(np.clip(logmag, -700.0, 700.0)))
    two_c = 2.0 * np.cos(phase) * inv
    sq = inv * inv
    big = logmag > 0
    with np.errstate(divide="ignore", invalid="ignore"):
        num = np.where(big, sq - two_c + 1.0, 1.0 - two_c + sq)
        den = np.where(big, sq + two_c + 1.0, 1.0 + two_c + sq)
        ref = np.sqrt(np.maximum(num, 0.0) / den)
    ref = np.where(np.isfinite(ref), ref, np.inf)
    assert np.array_equal(disk_ratio(logmag, phase), ref)
    lm, ph = logmag[:100], phase[:100]
    with np.errstate(over="ignore"):
        L = np.exp(lm + 1j * ph)
        np.testing.assert_allclose(disk_ratio(lm, ph), np.abs(1 - L) / np.abs(1 + L), rtol=1e-9)
