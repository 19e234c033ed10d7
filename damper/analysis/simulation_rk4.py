"""The RK4 loop of the time simulation with fewer numpy calls per step (same arithmetic).

:func:`integrate` computes what :func:`damper.analysis.simulation_parts.integrate` computes,
bit for bit: every floating-point operation is the same, on the same operands, in the same
order. What changes is the number of Python-level numpy calls per step:

* inputs known before the step are evaluated for many steps at once: the pilot command
  and gust (per chunk of steps, as before), the gust's term ``E alpha_g`` (1/s per state),
  the delayed measurement read from the history for a block of steps (a block is at most
  as long as the shortest delay, so every sample it reads is already stored), and from it
  the damper's demand ``u_d`` (rad), its command after its own limits and the actuator
  input ``u`` (rad);
* the state, the stage state and the four stage derivatives live in buffers allocated
  once, updated in place (``out=``), with their views (actuator columns, plant block)
  taken once;
* a travel limit is applied to a stage only when a member has reached it (clipping a
  value inside the limits returns it unchanged);
* the records of the state are copied once per step, those of the inputs once per block.

The damper's authority and its own rate limiter (sequential state) are
:mod:`damper.analysis.simulation_authority`'s: with every member's measurement delayed the
commands of a block are computed before it, otherwise at each stage from the state. Every
model runs here (:func:`supported`); the reference loop is kept for the tests.
"""

from __future__ import annotations

import numpy as np

from . import simulation_authority as authority
from . import simulation_linear as linear
from . import simulation_parts as sp

#: Advance blocks of steps in which no limit acts by one matrix product
#: (:mod:`damper.analysis.simulation_linear`): faster, but the results differ from the
#: step-by-step loop in the last bits, so off (docs/performance.md).
LINEAR_BLOCKS = True

#: Bytes of the per-chunk gust term ``E alpha_g`` (chunk shortened to stay below).
CHUNK_BYTES = 32_000_000


def supported(model: sp.Model) -> bool:
    """Whether :func:`integrate` handles `model`: every model (with or without an authority
    of the damper's own, :mod:`damper.analysis.simulation_authority`)."""
    return True


def _reads(line: sp.DelayLine, k0, count, weights):
    """Measured signal at ``t_k + c h - T`` for steps ``k0 .. k0+count-1`` and c = 0, 0.5, 1:
    shape ``(count, 3, N)`` (the interpolation of :func:`simulation_parts.read`)."""
    n_b, total = line.width // 2, line.length * line.width
    steps = (k0 + np.arange(count)) * line.width
    idx = (weights.base_index[None, :, :] + steps[:, None, None]) % total
    vals = np.take(line.buf, idx).reshape(count, 3, 4, n_b)
    return np.einsum("bcij,bcij->bcj", weights.stacked[:count], vals)


class _Taps:
    """The delay line's taps for the three stage times, stacked for a block of steps."""

    def __init__(self, line: sp.DelayLine, count):
        n_b = line.width // 2
        self.base_index = np.stack([line.taps[c][0] for c in (0.0, 0.5, 1.0)])
        w = np.stack([line.taps[c][1] for c in (0.0, 0.5, 1.0)])
        self.stacked = np.ascontiguousarray(np.broadcast_to(w, (count, 3, 4, n_b)))


class _Views:
    """A state buffer (N, n_a + n) and its views: actuator columns, plant block, both
    as columns for the batched products."""

    def __init__(self, X, na):
        self.X = X
        self.x0 = X[:, 0] if na else None
        self.col0 = X[:, 0:1] if na else None
        self.xp = X[:, na:]
        self.xp3 = X[:, na:, None]
        self.k1 = X[:, 1] if na > 1 else None


def _linear_rates(model: sp.Model):
    """``f(src, dlt_col, eg, kp)``: ``kp = A x + B_v delta + E_v alpha_g`` in place (1/s terms
    as :func:`simulation_parts.derivative` sums them: matvec, then surface, then gust)."""
    A, Bv = model.lin.A, model.lin.Bv
    n_b, n = A.shape[0], A.shape[-1]
    mv3 = np.empty((n_b, n, 1))
    mv, bd = mv3[:, :, 0], np.empty((n_b, n))
    add, mul, matmul, einsum = np.add, np.multiply, np.matmul, np.einsum

    if n_b <= sp.MATMUL_BATCH:  # the same dispatch as simulation_parts._matvec
        def rates(src, dcol, eg, kp):
            matmul(A, src.xp3, out=mv3)
            mul(Bv, dcol, out=bd)
            add(mv, bd, out=kp)
            add(kp, eg, out=kp)
    else:
        def rates(src, dcol, eg, kp):
            mul(Bv, dcol, out=bd)
            add(einsum("nij,nj->ni", A, src.xp), bd, out=kp)
            add(kp, eg, out=kp)
    return rates


def _any_at(limit):
    """``f(absolute_values)``: whether any member is at or beyond `limit` (one reduction
    when the limit is the same for every member; NaN counts as neither)."""
    if bool((limit == limit[0]).all()):
        one, biggest = float(limit[0]), np.maximum.reduce
        return lambda a: biggest(a) >= one
    return lambda a: bool((a >= limit).any())


def _lag_stage(model: sp.Model):
    """The stage derivative of a first-order actuator: ``f(src, dst, u, eg, full)`` writes
    the derivatives into `dst` and returns the surface (rad) and, when `full`, the flags."""
    sv, n_b = model.servo, model.n_b
    bw, R, neg_R, trav, lo = sv.bw, sv.R, -sv.R, sv.trav, -sv.trav
    has_rate, has_trav = sv.has_rate, sv.has_trav
    rates = _linear_rates(model)
    t1, rc, absx = np.empty(n_b), np.empty(n_b), np.empty(n_b)
    mul, sub, mn, mx, ab = np.multiply, np.subtract, np.minimum, np.maximum, np.absolute
    at_trav = _any_at(trav) if has_trav else None

    def stage(src, dst, u, eg, full):
        x0 = dlt = src.x0
        dcol, hit = src.col0, False
        if has_trav:  # |x0| >= travel iff the clipped surface is at the stop
            ab(x0, out=absx)
            hit = at_trav(absx)
            if hit:
                dlt = mn(mx(x0, lo), trav)
                dcol = dlt[:, None]
        sub(u, dlt, out=t1)
        mul(bw, t1, out=rc)
        k0 = dst.x0
        if has_rate:
            mx(rc, neg_R, out=k0)
            mn(k0, R, out=k0)
        else:
            k0[...] = rc
        if hit:
            k0[...] = np.where(((dlt >= trav) & (k0 > 0)) | ((dlt <= lo) & (k0 < 0)), 0.0, k0)
        flags = None
        if full:
            flags = (ab(rc) > R, absx >= trav if has_trav else np.zeros(n_b, bool))
        rates(src, dcol, eg, dst.xp)
        return dlt, k0, flags

    return stage


def _second_stage(model: sp.Model):
    """The stage derivative of a second-order actuator (the signature of :func:`_lag_stage`):
    the formulas of :func:`simulation_parts._actuator_rates`, a limit's branch taken only
    when a member reaches that limit."""
    sv, n_b = model.servo, model.n_b
    w2, zw2, R, neg_R, trav, lo = sv.w2, sv.zw2, sv.R, -sv.R, sv.trav, -sv.trav
    r_flag = sv.R * (1.0 - 1e-12)
    has_rate, has_trav = sv.has_rate, sv.has_trav
    rates = _linear_rates(model)
    t1, t2, absx, absv = np.empty(n_b), np.empty(n_b), np.empty(n_b), np.empty(n_b)
    mul, sub, mn, mx, ab, where = np.multiply, np.subtract, np.minimum, np.maximum, np.absolute, np.where
    at_trav = _any_at(trav) if has_trav else None
    at_rate = _any_at(R) if has_rate else None

    def stage(src, dst, u, eg, full):
        x0 = dlt = src.x0
        vel = src.k1
        dcol, hit = src.col0, False
        if has_trav:
            ab(x0, out=absx)
            hit = at_trav(absx)
            if hit:
                dlt = mn(mx(x0, lo), trav)
                dcol = dlt[:, None]
        rate, acc = dst.x0, dst.k1
        ab(vel, out=absv)
        if has_rate:
            mx(vel, neg_R, out=rate)
            mn(rate, R, out=rate)
        else:
            rate[...] = vel
        flags = None
        if full:
            flags = (absv >= r_flag, absx >= trav if has_trav else np.zeros(n_b, bool))
        if hit:
            rate[...] = where(((dlt >= trav) & (rate > 0)) | ((dlt <= lo) & (rate < 0)), 0.0, rate)
        sub(u, dlt, out=t1)
        mul(w2, t1, out=t1)
        mul(zw2, rate, out=t2)
        sub(t1, t2, out=acc)
        if has_rate and at_rate(absv):
            acc[...] = where((absv >= R) & (acc * vel > 0), 0.0, acc)
        if hit:
            acc[...] = where(((dlt >= trav) & (acc > 0)) | ((dlt <= lo) & (acc < 0)), 0.0, acc)
        rates(src, dcol, eg, dst.xp)
        return dlt, rate, flags

    return stage


def _other_stage(model: sp.Model):
    """The stage derivative of an ideal actuator (the same signature as
    :func:`_lag_stage`), with :func:`simulation_parts._actuator_rates`."""
    sv = model.servo
    rates = _linear_rates(model)

    def stage(src, dst, u, eg, full):
        dlt, rate, acc, rlim, plim = sp._actuator_rates(sv, src.X, u, full)
        if sv.na:
            dst.x0[...] = rate
        if acc is not None:
            dst.k1[...] = acc
        rates(src, dlt[:, None], eg, dst.xp)
        return dlt, rate, (rlim, plim) if full else None

    return stage


def _project(model: sp.Model, X: _Views):
    """:func:`simulation_parts._project` in place."""
    sv = model.servo
    if sv.kind == "lag" and sv.has_trav:
        np.maximum(X.x0, -sv.trav, out=X.x0)
        np.minimum(X.x0, sv.trav, out=X.x0)
    elif sv.kind == "second":
        sp._project(model, X.X)


def _pusher(model: sp.Model):
    """``f(k, X, dl, ceg)``: store the measurement and its derivative at ``t_(k+1)`` in the
    delay line, as :func:`simulation_parts._push` (`dl`: the surface, rad, or a function
    of the new measurement giving it; `ceg`: ``C E alpha_g`` at the step's end, 1/s)."""
    line, n_b = model.line, model.n_b
    CC = np.stack([model.lin.Cv, line.CA])
    CB = line.CB
    slots = []
    for i in range(line.length):
        both = line.buf[i * line.width:(i + 1) * line.width].reshape(2, n_b)
        slots.append((both, both[0], both[1]))
    cbd = np.empty(n_b)
    add, mul, einsum, length = np.add, np.multiply, np.einsum, line.length

    def push(k, X, dl, ceg):
        both, yk, dy = slots[(k + 1) % length]
        einsum("kni,ni->kn", CC, X.xp, out=both)
        if callable(dl):
            dl = dl(yk)
        mul(CB, dl, out=cbd)
        add(dy, cbd, out=dy)
        add(dy, ceg, out=dy)

    return push


def _linear_blocks(model: sp.Model, h, with_damper, block):
    """The :class:`simulation_linear.Blocks` of `model`, or None when no run can be
    advanced by them: :data:`LINEAR_BLOCKS` off, a batch above
    ``simulation_parts.MATMUL_BATCH`` runs, no run with its block inputs known. With an
    authority every run must have them (its damper's limited command, sequential state, is
    then computed once per block for every run: :class:`simulation_authority.Damper`)."""
    if not LINEAR_BLOCKS or model.n_b > sp.MATMUL_BATCH:
        return None
    members = linear.eligible(model, h, with_damper and model.auth is None)
    if model.auth is not None and (block < linear.STEPS or not members.all()):
        return None
    return linear.Blocks(model, h, members) if members.any() else None


def _step_block(run: _Run, rec, inp: _Inputs, source, b0, b1, block, n_int, sub) -> bool:
    """Steps ``b0 .. b1-1`` step by step for every run, in pieces of at most `block` steps
    (the delay line's look-ahead); `inp` serves when the block is one piece, else each
    piece's inputs are read from `source` ``(taps, signals, chunk start)``. False after the
    record's last step."""
    model, damper = run.model, run.damper
    pieces = [(b0, b1, inp)] if b1 - b0 <= block else [
        (s0, min(s0 + block, b1), _Inputs(model, *source, s0, min(s0 + block, b1))) for s0 in range(b0, b1, block)]
    for s0, s1, part in pieces:  # several pieces only without an authority (_linear_blocks)
        _record_inputs(rec, part, s0, s1, sub, model.auth)
        more = _run_block(run, rec, part, s0, s1, n_int, sub)
        if damper is not None:
            damper.peak_stepped(s1 - s0)
        if not more:
            return False
    return True


def _block_length(model: sp.Model) -> int:
    """Steps per block: within the delay line's look-ahead, the chunk and the memory bound."""
    n = model.lin.A.shape[-1]
    most = max(1, CHUNK_BYTES // (3 * 8 * model.n_b * (n + 4)))
    return min(model.line.block if model.line is not None else sp.CHUNK, sp.CHUNK, most)


class _Inputs:
    """The stage inputs of steps ``b0 .. b1-1``, arrays of shape ``(count, 3, N)`` for the
    stage times ``t_k``, ``t_k + h/2`` and ``t_k + h`` (left limit): pilot command ``r``
    and failed command ``c`` (rad, ``c`` None without), gust angle ``g`` (rad), gust term
    ``eg = E_v g`` (shape ``(count, 3, N, n)``, 1/s), delayed measurement ``y`` (None
    without delay) and, when they do not depend on the state, damper demand ``ud`` and
    actuator input ``u`` (rad; else None); ``ceg = C E_v g`` at ``t_k + h`` (None without
    delay). When known before the block: the damper's command ``z`` (rad, shape
    ``(count, 3, N)``), ``u_end`` (count, N) the actuator input after each step's end
    (it differs from ``u`` at ``t_k + h`` only where the damper's rate limiter starts or
    stops slewing there: ``end_differs``) and ``arl`` (count, N) whether that rate
    limiter slews at each step's start (None: nowhere, or not known). `damper`: the
    run's :class:`simulation_authority.Damper` (None without an authority); `steps`: the
    block's steps that are integrated (the record's last step is only recorded)."""

    def __init__(self, model: sp.Model, taps, sig, c0, b0, b1, damper=None, steps=0):
        rows = slice(b0 - c0, b1 - c0)
        self.r, self.g, self.c = (None if sig[0][i] is None else np.stack([s[i][rows] for s in sig], 1)
                                  for i in range(3))
        self.eg = model.lin.Ev * self.g[:, :, :, None]
        line = model.line
        self.y = None if line is None else _reads(line, b0, b1 - b0, taps)
        self.ceg = None if line is None else line.CE * self.g[:, 2]
        self.ud = self.u = self.u_end = self.z = self.arl = None
        self.end_differs = False
        if self.y is not None and line.all_delayed:
            self.ud = model.lin.kfb * self.y
        if self.c is not None:
            self.z = self.c
            self.u = self.r + self.c
        elif self.ud is not None and damper is not None:
            self.z, self.arl, z_end = damper.block_commands(self.ud, steps)
            self.u = self.r + self.z
            if self.arl is not None and model.servo.kind == "ideal":
                self.u_end, self.end_differs = self.r[:, 2] + z_end, True
        elif self.ud is not None:
            self.u = self.r + self.ud
        if self.u is not None and self.u_end is None:
            self.u_end = self.u[:, 2]


def _record_inputs(rec, inp: _Inputs, b0, b1, sub, auth):
    """The records of the inputs known before the block (every `sub`-th step; `auth` the
    damper's :class:`simulation_parts.Authority` or None)."""
    ks = np.arange(b0, b1)
    sel = ks % sub == 0
    if not sel.any():
        return
    idx = ks[sel] // sub
    rec["r"][idx] = inp.r[sel, 0]
    rec["ag"][idx] = inp.g[sel, 0]
    if inp.u is not None:
        rec["u"][idx] = inp.u[sel, 0]
    if inp.ud is not None:
        rec["ud"][idx] = inp.ud[sel, 0]
    if inp.z is not None and "z" in rec:
        rec["z"][idx] = inp.z[sel, 0]
    if auth is not None and inp.ud is not None:
        rec["al"][idx] = np.abs(inp.ud[sel, 0]) > auth.limit
    if inp.arl is not None:
        rec["arl"][idx] = inp.arl[sel]


def _feeder(model: sp.Model):
    """``f(src, inp, j, s, slot)``: the damper demand ``u_d`` and actuator input ``u`` (rad) of
    step j of a block at stage time s (0, 1, 2) from the state's measurement, as
    :func:`simulation_parts.measured` and :func:`simulation_parts.damper_command` (no
    authority); ``u`` is None when it is known before the step."""
    Cv, kfb, einsum, where = model.lin.Cv, model.lin.kfb, np.einsum, np.where
    line = model.line

    def feed(src, inp, j, s, slot):  # slot (the stage, 0-3) for an authority's feed
        y = einsum("ni,ni->n", Cv, src.xp)
        if line is not None:
            y = where(line.delayed, inp.y[j, s], y)
        ud = kfb * y
        if inp.u is not None:
            return None, ud
        return (inp.r[j, s] + ud if inp.c is None else inp.r[j, s] + inp.c[j, s]), ud

    return feed


def _surface_at_end(model: sp.Model, inp: _Inputs, j, damper=None):
    """The surface an ideal actuator gives at the step's end (rad): its input clipped to
    the travel (:func:`simulation_parts._push`), or a function of the new measurement."""
    sv = model.servo

    def clip(u):
        return np.minimum(np.maximum(u, -sv.trav), sv.trav) if sv.has_trav else u

    if inp.u is not None:
        return clip(inp.u_end[j])
    if damper is not None:
        return damper.end_surface(inp, j)
    lin, delayed = model.lin, model.line.delayed

    def from_measurement(yk):
        y = np.where(delayed, inp.y[j, 2], yk)
        return clip(inp.r[j, 2] + (lin.kfb * y if inp.c is None else inp.c[j, 2]))

    return from_measurement


class _Run:
    """The buffers of one simulation: state ``X``, stage state ``XS``, stage derivatives
    ``K`` (each a :class:`_Views`), a scratch array and the stage, feed and push functions;
    with an authority whose demand depends on the state, its feed, the rate limiter's
    update after each step (None without a rate limit) and its records."""

    def __init__(self, model: sp.Model, h, damper=None):
        n_b, na = model.n_b, model.servo.na
        nx = na + model.lin.A.shape[-1]
        self.model, self.h = model, h
        self.X = _Views(np.zeros((n_b, nx)), na)
        self.XS = _Views(np.empty((n_b, nx)), na)
        self.K = [_Views(np.empty((n_b, nx)), na) for _ in range(4)]
        self.T = np.empty((n_b, nx))
        self.stage = {"lag": _lag_stage, "second": _second_stage}.get(model.servo.kind, _other_stage)(model)
        self.feed = _feeder(model)
        self.damper = self.after = self.damper_record = None
        if damper is not None and not (model.line is not None and model.line.all_delayed):
            self.damper, self.feed, self.damper_record = damper, damper.feeder(), damper.record
            self.after = damper.after_step if damper.has_rate else None
        self.push = None if model.line is None else _pusher(model)
        lay = model.lin.layout
        cols = {"alpha": na + lay.alpha, "q": na + lay.q, "theta": nx - 1}
        if lay.u is not None:
            cols["speed"] = na + lay.u
        self.state_records = [(key, self.X.X[:, col]) for key, col in cols.items()]
        self.state_cols = list(cols.items())


def _run_block(run: _Run, rec, inp: _Inputs, b0, b1, n_int, sub):
    """RK4 steps ``b0 .. b1-1`` (the last step of the record, ``n_int``, only recorded);
    returns False after it."""
    model, h, stage, feed, push = run.model, run.h, run.stage, run.feed, run.push
    X, XS, T = run.X, run.XS, run.T
    K1, K2, K3, K4 = run.K
    half, sixth = 0.5 * h, h / 6.0
    add, mul = np.add, np.multiply
    known, state_records, ideal = inp.u is not None, run.state_records, model.servo.kind == "ideal"
    after, damper_record = run.after, run.damper_record
    U, EG = inp.u, inp.eg
    for k in range(b0, b1):
        j = k - b0
        recording = k % sub == 0
        u, ud = (U[j, 0], None) if known else feed(X, inp, j, 0, 0)
        dlt, rate, flags = stage(X, K1, u, EG[j, 0], recording)
        if recording:
            i = k // sub
            for key, view in state_records:
                rec[key][i] = view
            rec["surface"][i] = dlt
            if rate is not None:
                rec["rate"][i] = rate
            rec["rl"][i], rec["pl"][i] = flags
            if not known:
                rec["u"][i] = u
            if inp.ud is None:
                rec["ud"][i] = ud if ud is not None else feed(X, inp, j, 0, 0)[1]
            if damper_record is not None:
                damper_record(rec, i, j)
        if k == n_int:
            return False
        mul(K1.X, half, out=T)
        add(X.X, T, out=XS.X)
        stage(XS, K2, U[j, 1] if known else feed(XS, inp, j, 1, 1)[0], EG[j, 1], False)
        mul(K2.X, half, out=T)
        add(X.X, T, out=XS.X)
        stage(XS, K3, U[j, 1] if known else feed(XS, inp, j, 1, 2)[0], EG[j, 1], False)
        mul(K3.X, h, out=T)
        add(X.X, T, out=XS.X)
        stage(XS, K4, U[j, 2] if known else feed(XS, inp, j, 2, 3)[0], EG[j, 2], False)
        add(K2.X, K3.X, out=T)
        mul(T, 2.0, out=T)
        add(K1.X, T, out=T)
        add(T, K4.X, out=T)
        mul(T, sixth, out=T)
        add(X.X, T, out=X.X)
        _project(model, X)
        if after is not None:
            after(j, X, inp)
        if push is not None:
            push(k, X, _surface_at_end(model, inp, j, run.damper) if ideal else X.x0, inp.ceg[j])
    return True


def integrate(model: sp.Model, signals, n_int, sub, h, n_out, with_damper=False):
    """RK4 over ``n_int`` steps, recording every `sub`-th step (module notes).

    Parameters
    ----------
    model : Model
        N members, with or without an authority of the damper's own.
    signals : callable
        ``signals(t)`` for times t (s, shape (m,)): pilot command at the actuator input
        (rad), gust angle (rad) and a failed damper's command (rad) or None, each of shape
        ``(m, N)``.
    n_int : int
        Steps.
    sub : int
        Steps per record sample.
    h : float
        Step, s.
    n_out : int
        Record samples.
    with_damper : bool
        Record the damper command ``z`` (an authority or a failed damper).

    Returns
    -------
    dict of ndarray
        The records of :func:`damper.analysis.simulation_parts.integrate`, bit for bit
        (with :data:`LINEAR_BLOCKS` to rounding), time-major, shape ``(n_out, N)``; with
        an authority also ``ud_peak`` (N,): the largest |damper demand|, rad.
    """
    rec = sp.new_records(model, n_out, with_damper)
    block = _block_length(model)
    blocks = _linear_blocks(model, h, with_damper, block)
    damper = None if model.auth is None else authority.Damper(model, h, block)
    run = _Run(model, h, damper)
    taps = None if model.line is None else _Taps(model.line, max(block, linear.STEPS))
    eps = 1e-6 * h  # left limit at the end of a step (>> EDGE_TOL)
    outer = block if blocks is None else linear.STEPS
    for c0 in range(0, n_int + 1, sp.CHUNK):
        tk = np.arange(c0, min(c0 + sp.CHUNK, n_int + 1)) * h
        sig = (signals(tk), signals(tk + 0.5 * h), signals(tk + h - eps))
        for b0 in range(c0, c0 + len(tk), outer):
            b1 = min(b0 + outer, c0 + len(tk))
            inp = _Inputs(model, taps, sig, c0, b0, b1, damper, min(b1, n_int) - b0)
            tried = None
            if blocks is not None and b1 <= n_int:
                tried = linear.attempt(blocks, run.X.X, inp, b0, b1)
                if tried[1].all():
                    _record_inputs(rec, inp, b0, b1, sub, model.auth)
                    linear.write(blocks, tried[0], run.X.X, run.state_cols, rec, inp, b0, b1, sub, slice(None))
                    continue
            if not _step_block(run, rec, inp, (taps, sig, c0), b0, b1, block, n_int, sub):
                if damper is not None:
                    rec["ud_peak"] = damper.peak
                return rec
            if tried is not None and tried[1].any():  # then the product's runs
                linear.write(blocks, tried[0], run.X.X, run.state_cols, rec, inp, b0, b1, sub,
                             np.flatnonzero(tried[1]))
    if damper is not None:
        rec["ud_peak"] = damper.peak
    return rec
