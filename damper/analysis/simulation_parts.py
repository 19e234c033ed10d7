"""The parts of the time simulation: linear plant, actuator, damper limits, delay line, RK4.

:func:`damper.analysis.simulation.simulate` assembles a :class:`Model` from these parts and
calls :func:`damper.analysis.simulation_rk4.integrate`; :func:`integrate` here is the
reference loop (the streamlined one gives its records bit for bit, tests/
test_simulation_paths.py). Every array is over the flattened batch (N members); the Python
loop runs over time steps only. Definitions and the method are in the docstring of
:mod:`damper.analysis.simulation` and in docs/responses.md.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..model.elements import Lag, SecondOrderLag
from ..model.loop import Hardware, Loop, StateLayout, feedback_sign, plant_state_space

#: Batches up to this size use a batched matmul, larger ones einsum (measured faster).
MATMUL_BATCH = 256
#: Stage inputs are evaluated for this many steps at once.
CHUNK = 256


def limit(value, shape):
    """A limit broadcast to the flattened batch: positive finite values, else inf."""
    n = int(np.prod(shape, dtype=int))
    if value is None:
        return np.full(n, np.inf)
    v = np.broadcast_to(np.asarray(value, dtype=float), shape).reshape(-1).copy()
    return np.where(np.isfinite(v) & (v > 0), v, np.inf)


@dataclass(frozen=True)
class Linear:
    """The linear part: airframe, sensor, washout, filters and the attitude integrator.

    Attributes
    ----------
    A : ndarray, shape (N, n, n)
        1/s. The last state is the pitch attitude theta (rad), the integral of q.
    Bv, Cv, Ev : ndarray, shape (N, n)
        Surface (rad) to state derivatives; states to the (undelayed) measurement; gust
        angle of attack (rad) to state derivatives (the airframe matrix's alpha column).
    kfb : ndarray, shape (N,)
        ``-sign(M_delta) K``, s (zero when the feedback is cut).
    layout : StateLayout
        Of the plant without the integrator.
    """

    A: np.ndarray
    Bv: np.ndarray
    Cv: np.ndarray
    Ev: np.ndarray
    kfb: np.ndarray
    layout: StateLayout


def linear_part(flat: Loop, n_b: int, cut=False) -> Linear:
    """The :class:`Linear` part of a flattened loop (batch of N = `n_b`)."""
    d, hw = flat.airframe, flat.hardware
    chain = Loop(d, Hardware(sensor=hw.sensor, washout=hw.washout, filters=hw.filters), flat.gain)
    (Ap, Bp, Cp, _), layout = plant_state_space(chain)
    n_p = Ap.shape[-1]
    n = n_p + 1
    A = np.zeros((n_b, n, n))
    A[:, :n_p, :n_p] = np.broadcast_to(Ap, (n_b, n_p, n_p))
    A[:, n_p, layout.q] = 1.0
    Bv = np.zeros((n_b, n))
    Bv[:, :n_p] = np.broadcast_to(Bp[..., 0], (n_b, n_p))
    Cv = np.zeros((n_b, n))
    Cv[:, :n_p] = np.broadcast_to(Cp[..., 0, :], (n_b, n_p))
    Ev = np.zeros((n_b, n))  # gust: the alpha column of the airframe's matrix
    Ev[:, layout.alpha] = A[:, layout.alpha, layout.alpha]
    Ev[:, layout.q] = A[:, layout.q, layout.alpha]
    if layout.u is not None:
        Ev[:, layout.u] = A[:, layout.u, layout.alpha]
    kfb = np.zeros(n_b) if cut else -feedback_sign(d) * np.asarray(flat.gain, dtype=float)
    return Linear(A, Bv, Cv, Ev, kfb, layout)


@dataclass(frozen=True)
class Servo:
    """The actuator: ``kind`` is ``ideal``, ``lag`` or ``second``; ``na`` its states.

    ``bw`` (1/s) for a lag; ``w2`` (rad^2/s^2) and ``zw2`` (rad/s) for a second-order
    lag; ``R`` rate limit (rad/s) and ``trav`` travel (rad), inf where there is none.
    """

    kind: str
    na: int
    R: np.ndarray
    trav: np.ndarray
    bw: np.ndarray | None = None
    w2: np.ndarray | None = None
    zw2: np.ndarray | None = None
    has_rate: bool = False
    has_trav: bool = False


def servo(act, R, trav, notes) -> Servo:
    """The :class:`Servo` of actuator element `act` (None: ideal); appends to `notes`."""
    flags = dict(has_trav=bool(np.isfinite(trav).any()))
    if act is None:
        if np.isfinite(R).any():
            notes.append("rate limit ignored: the actuator is ideal (give it a bandwidth to apply the limit)")
            R = np.full(R.shape, np.inf)
        return Servo("ideal", 0, R, trav, **flags)
    flags["has_rate"] = bool(np.isfinite(R).any())
    if isinstance(act, Lag):
        return Servo("lag", 1, R, trav, bw=1.0 / np.asarray(act.time_constant, dtype=float), **flags)
    if isinstance(act, SecondOrderLag):
        w = np.asarray(act.natural_frequency, dtype=float)
        return Servo("second", 2, R, trav, w2=w * w, zw2=2.0 * np.asarray(act.damping_ratio, dtype=float) * w,
                     **flags)
    raise TypeError(f"time responses support a first- or second-order actuator, not {type(act).__name__}")


@dataclass(frozen=True)
class Authority:
    """The damper's own limits: ``limit`` (+/- rad) and ``rate`` (rad/s), inf for none;
    ``slew_rate`` is ``rate`` with 0 for none (used only where the limit acts)."""

    limit: np.ndarray
    rate: np.ndarray
    slew_rate: np.ndarray
    has_rate: bool


def authority(value, rate, shape) -> Authority | None:
    """The :class:`Authority` (None without an authority: no damper limits at all)."""
    if value is None:
        return None
    r = limit(rate, shape)
    return Authority(limit(value, shape), r, np.where(np.isfinite(r), r, 0.0), bool(np.isfinite(r).any()))


@dataclass(frozen=True)
class DelayLine:
    """Ring buffer of the measured signal y and its derivative, read at ``t - T``.

    Row = slot of ``width = 2 N`` values ``[y (N), y' (N)]``; ``taps[c]`` are the flat
    indices and cubic Hermite weights reading at ``t_k + c h - T`` (c = 0, 0.5, 1).
    ``block``: the number of consecutive steps whose reads use only samples stored
    before the first of them starts (1 when a delay is within rounding of the step);
    ``ahead``: the same count for each member alone, shape (N,) (``block`` is its least
    value over the delayed members).
    """

    buf: np.ndarray
    taps: dict
    width: int
    length: int
    delayed: np.ndarray
    all_delayed: bool
    CA: np.ndarray
    CB: np.ndarray
    CE: np.ndarray
    block: int = 1
    ahead: np.ndarray | None = None


def delay_line(tdel, h, lin: Linear) -> DelayLine | None:
    """The :class:`DelayLine` for delays `tdel` (s) at step `h` (s); None without delay."""
    delayed = tdel > 0
    if not delayed.any():
        return None
    n_b = tdel.size
    rows = np.arange(n_b)
    length = int(np.ceil(float(tdel.max()) / h)) + 4
    width = 2 * n_b
    lag_steps = np.where(delayed, tdel / h, 1.0)
    taps, newest, last = {}, -length, np.full(n_b, -length, dtype=np.int64)
    for c in (0.0, 0.5, 1.0):
        # read at t_k + c h - T = t_(k+j) + s h with j <= -1 (stored samples only)
        p = c - lag_steps
        j = np.floor(p)
        s = p - j
        late = j >= 0  # only when T is within rounding of h: use the latest sample
        j = np.where(late, -1.0, j).astype(np.int64)
        s = np.where(late, 1.0, s)
        newest = max(newest, int(j[delayed].max()) + 1)  # undelayed members read nothing
        last = np.maximum(last, j)
        s2, s3 = s * s, s * s * s
        weights = np.stack([2 * s3 - 3 * s2 + 1, (s3 - 2 * s2 + s) * h, 3 * s2 - 2 * s3, (s3 - s2) * h])
        base = np.concatenate([j * width + rows, j * width + n_b + rows, (j + 1) * width + rows,
                               (j + 1) * width + n_b + rows])
        taps[c] = (base % (length * width), weights)
    CA = np.einsum("ni,nij->nj", lin.Cv, lin.A)
    return DelayLine(np.zeros(length * width), taps, width, length, delayed, bool(delayed.all()),
                     CA, np.sum(lin.Cv * lin.Bv, -1), np.sum(lin.Cv * lin.Ev, -1), 1 - newest,
                     np.where(delayed, -last, 0))


def read(line: DelayLine, k, c):
    """Measured signal at ``t_k + c h - T`` (samples up to t_k are stored)."""
    base, weights = line.taps[c]
    n_b = line.width // 2
    vals = np.take(line.buf, (base + k * line.width) % (line.length * line.width)).reshape(4, n_b)
    return np.einsum("ij,ij->j", weights, vals)


@dataclass(frozen=True)
class Model:
    """Everything :func:`integrate` needs; ``n_b`` members."""

    lin: Linear
    servo: Servo
    auth: Authority | None
    line: DelayLine | None
    n_b: int


def _matvec(model: Model, x):
    if model.n_b <= MATMUL_BATCH:  # measured: batched matmul is faster for small batches
        return (model.lin.A @ x[:, :, None])[:, :, 0]
    return np.einsum("nij,nj->ni", model.lin.A, x)


def measured(model: Model, xp, yd):
    """The measurement the damper sees: undelayed ``Cv x``, or `yd` read from the delay line."""
    line = model.line
    if yd is None:
        return np.einsum("ni,ni->n", model.lin.Cv, xp)
    if line.all_delayed:
        return yd
    return np.where(line.delayed, yd, np.einsum("ni,ni->n", model.lin.Cv, xp))


@dataclass(frozen=True)
class Slew:
    """The damper command's rate limiter between steps (one value per member).

    ``value``: the limited command z at the step's start, rad; ``direction``: 0 while it
    follows its limited demand ``s = clip(u_d, -A, A)``, +1 or -1 while it moves toward
    s at the rate limit ``R_a`` (a ramp, exact within the step).
    """

    value: np.ndarray
    direction: np.ndarray


def damper_command(model: Model, y, slew, tau, r, c):
    """Actuator input ``u``, the damper's command ``z`` and demand ``u_d`` (rad).

    Without an authority ``z = u_d = -sign(M_delta) K y`` and ``u = r + u_d`` (bit for bit
    the simulation before authorities existed); with one, ``z = s = clip(u_d, -A, A)``
    while the rate limiter follows, and the ramp ``value + direction R_a tau`` while it
    slews (`tau`: s since the step's start); a failed damper's command `c` replaces both.
    """
    ud = model.lin.kfb * y
    if c is not None:
        return r + c, c, ud
    if model.auth is None:
        return r + ud, ud, ud
    a = model.auth.limit
    z = np.minimum(np.maximum(ud, -a), a)
    if slew is not None:
        z = np.where(slew.direction != 0, slew.value + slew.direction * model.auth.slew_rate * tau, z)
    return r + z, z, ud


def slew_step(model: Model, slew: Slew, ud_start, ud_end, h) -> Slew:
    """The rate limiter after a step of `h` (s), from the demands at its start and end (rad).

    The command at the step's end is the limited demand ``s1 = clip(u_d, -A, A)`` when it
    lies within ``R_a h`` of the command at the step's start (it follows), else that
    command moved by ``R_a h`` toward s1 (it slews): the discrete rate limiter at the
    step, with the ramp exact at the stages in between.
    """
    a = model.auth.limit
    s0 = np.minimum(np.maximum(ud_start, -a), a)
    s1 = np.minimum(np.maximum(ud_end, -a), a)
    z0 = np.where(slew.direction == 0, s0, slew.value)
    gap = s1 - z0
    slewing = np.abs(gap) > model.auth.rate * h
    direction = np.where(slewing, np.sign(gap), 0.0)
    return Slew(np.where(slewing, z0 + direction * model.auth.slew_rate * h, s1), direction)


def _actuator_rates(sv: Servo, X, u, full):
    """Surface position, actuator state derivatives and the limit flags."""
    trav, lo_t = sv.trav, -sv.trav
    has_trav, has_rate = sv.has_trav, sv.has_rate
    rlim = plim = None
    if sv.kind == "ideal":
        dlt = np.minimum(np.maximum(u, lo_t), trav) if has_trav else u
        if full:
            rlim = np.zeros(u.shape, bool)
            plim = np.abs(u) >= trav
        return dlt, None, None, rlim, plim
    x0 = X[:, 0]
    dlt = np.minimum(np.maximum(x0, lo_t), trav) if has_trav else x0
    if sv.kind == "lag":
        rc = sv.bw * (u - dlt)
        rate = np.minimum(np.maximum(rc, -sv.R), sv.R) if has_rate else rc
        if full:
            rlim = np.abs(rc) > sv.R
    else:
        vel = X[:, 1]
        rate = np.minimum(np.maximum(vel, -sv.R), sv.R) if has_rate else vel
        if full:
            rlim = np.abs(vel) >= sv.R * (1.0 - 1e-12)
    if has_trav:
        rate = np.where(((dlt >= trav) & (rate > 0)) | ((dlt <= lo_t) & (rate < 0)), 0.0, rate)
        if full:
            plim = np.abs(dlt) >= trav
    elif full:
        plim = np.zeros(u.shape, bool)
    acc = None
    if sv.kind == "second":
        acc = sv.w2 * (u - dlt) - sv.zw2 * rate
        if has_rate:
            acc = np.where((np.abs(vel) >= sv.R) & (acc * vel > 0), 0.0, acc)
        if has_trav:
            acc = np.where(((dlt >= trav) & (acc > 0)) | ((dlt <= lo_t) & (acc < 0)), 0.0, acc)
    return dlt, rate, acc, rlim, plim


def derivative(model: Model, X, slew, tau, r, ag, c, yd, full=False):
    """State derivatives ``dX`` at one stage (`tau` s into the step) and the signals to record."""
    na = model.servo.na
    xp = X[:, na:]
    y = measured(model, xp, yd)
    u, z, ud = damper_command(model, y, slew, tau, r, c)
    dlt, rate, acc, rlim, plim = _actuator_rates(model.servo, X, u, full)
    dX = np.empty_like(X)
    if na:
        dX[:, 0] = rate
    if acc is not None:
        dX[:, 1] = acc
    lin = model.lin
    dX[:, na:] = _matvec(model, xp) + lin.Bv * dlt[:, None] + lin.Ev * ag[:, None]
    al = arl = None
    if full and model.auth is not None and c is None:
        al = np.abs(ud) > model.auth.limit
        arl = None if slew is None else slew.direction != 0
    return dX, (dlt, rate, u, rlim, plim, z, ud, al, arl)


def _project(model: Model, X):
    """Limits after a step: travel and rate-state projections."""
    sv = model.servo
    trav = sv.trav
    if sv.kind != "ideal" and sv.has_trav:
        X[:, 0] = np.minimum(np.maximum(X[:, 0], -trav), trav)
    if sv.kind == "second":
        vel = np.minimum(np.maximum(X[:, 1], -sv.R), sv.R) if sv.has_rate else X[:, 1]
        if sv.has_trav:
            vel = np.where(((X[:, 0] >= trav) & (vel > 0)) | ((X[:, 0] <= -trav) & (vel < 0)), 0.0, vel)
        X[:, 1] = vel


def _push(model: Model, k, X, slew, r4, c4, g4, yd4):
    """Store the measurement and its derivative at ``t_(k+1)`` in the delay line; returns the
    damper demand evaluated for an ideal actuator's surface (else None)."""
    lin, line, sv = model.lin, model.line, model.servo
    xp = X[:, sv.na:]
    yk = np.einsum("ni,ni->n", lin.Cv, xp)
    ud = None
    if sv.kind == "ideal":
        uu, _, ud = damper_command(model, yd4 if line.all_delayed else np.where(line.delayed, yd4, yk), slew, 0.0,
                                   r4, c4)
        dl = np.minimum(np.maximum(uu, -sv.trav), sv.trav) if sv.has_trav else uu
    else:
        dl = X[:, 0]
    slot = ((k + 1) % line.length) * line.width
    n_b = model.n_b
    line.buf[slot:slot + n_b] = yk
    line.buf[slot + n_b:slot + line.width] = np.einsum("ni,ni->n", line.CA, xp) + line.CB * dl + line.CE * g4
    return ud


RECORDS = ("alpha", "q", "theta", "surface", "rate", "u", "r", "ag", "ud")
FLAGS = ("rl", "pl")


def _record(rec, i, model, X, aux, r, g):
    dlt, rate, u, rlim, plim, z, ud, al, arl = aux
    lay, na = model.lin.layout, model.servo.na
    rec["alpha"][i] = X[:, na + lay.alpha]
    rec["q"][i] = X[:, na + lay.q]
    rec["theta"][i] = X[:, -1]
    if lay.u is not None:
        rec["speed"][i] = X[:, na + lay.u]
    rec["surface"][i] = dlt
    if rate is not None:
        rec["rate"][i] = rate
    rec["u"][i] = u
    rec["r"][i] = r
    rec["ag"][i] = g
    rec["ud"][i] = ud
    rec["rl"][i] = rlim
    rec["pl"][i] = plim
    if "z" in rec:  # only with an authority or a failed damper (otherwise z = u_d)
        rec["z"][i] = z
    if al is not None:
        rec["al"][i] = al
    if arl is not None:
        rec["arl"][i] = arl


def new_records(model: Model, n_out: int, with_damper: bool) -> dict:
    """The zeroed records of a simulation of `model`, time-major, shape ``(n_out, N)``: every
    :data:`RECORDS` series and :data:`FLAGS` flag; ``speed`` with a speed state; ``z`` (the
    damper's command, rad) `with_damper`; ``al`` and ``arl`` (at the authority, at its rate
    limit) with an authority."""
    n_b = model.n_b
    rec = {k: np.zeros((n_out, n_b)) for k in RECORDS}
    rec.update({k: np.zeros((n_out, n_b), bool) for k in FLAGS})
    if model.lin.layout.u is not None:
        rec["speed"] = np.zeros((n_out, n_b))
    if with_damper:
        rec["z"] = np.zeros((n_out, n_b))
    if model.auth is not None:
        rec["al"] = np.zeros((n_out, n_b), bool)
        rec["arl"] = np.zeros((n_out, n_b), bool)
    return rec


def integrate(model: Model, signals, n_int, sub, h, n_out, with_damper=False):
    """RK4 over ``n_int`` steps of `h` (s), recording every `sub`-th step.

    `signals(t)` gives the stage inputs at times `t` (s): pilot command at the actuator,
    gust angle and a failed damper's command (or None), each of shape ``(len(t), N)``.
    Returns the records, time-major arrays of shape ``(n_out, N)``; the damper command
    ``z`` only `with_damper` (an authority or a failed damper; otherwise it is ``u_d``);
    with an authority ``ud_peak`` (N,): the largest |damper demand| at any evaluation.
    """
    n_b, na = model.n_b, model.servo.na
    rec = new_records(model, n_out, with_damper)
    X = np.zeros((n_b, na + model.lin.A.shape[-1]))
    line = model.line
    slew = Slew(np.zeros(n_b), np.zeros(n_b)) if model.auth is not None and model.auth.has_rate else None
    # the largest |demand| the damper's limits see (every stage), with an authority only
    peak = np.zeros(n_b) if model.auth is not None else None
    eps = 1e-6 * h  # left limit at the end of a step (>> EDGE_TOL)
    half, sixth = 0.5 * h, h / 6.0
    for c0 in range(0, n_int + 1, CHUNK):
        tk = np.arange(c0, min(c0 + CHUNK, n_int + 1)) * h
        s1, s2, s4 = signals(tk), signals(tk + half), signals(tk + h - eps)
        for m in range(len(tk)):
            k = c0 + m
            r1, g1, c1 = (None if a is None else a[m] for a in s1)
            r2, g2, c2 = (None if a is None else a[m] for a in s2)
            r4, g4, c4 = (None if a is None else a[m] for a in s4)
            y1 = read(line, k, 0.0) if line is not None else None
            recording = k % sub == 0
            k1, aux = derivative(model, X, slew, 0.0, r1, g1, c1, y1, full=recording)
            if recording:
                _record(rec, k // sub, model, X, aux, r1, g1)
            if peak is not None:
                peak = np.maximum(peak, np.abs(aux[6]))
            if k == n_int:
                break
            y2 = read(line, k, 0.5) if line is not None else None
            y4 = read(line, k, 1.0) if line is not None else None
            k2, aux2 = derivative(model, X + half * k1, slew, half, r2, g2, c2, y2)
            k3, aux3 = derivative(model, X + half * k2, slew, half, r2, g2, c2, y2)
            k4, aux4 = derivative(model, X + h * k3, slew, h, r4, g4, c4, y4)
            X = X + sixth * (k1 + 2.0 * (k2 + k3) + k4)
            _project(model, X)
            ud_end = None
            if slew is not None:
                ud_end = model.lin.kfb * measured(model, X[:, na:], y4)
                slew = slew_step(model, slew, aux[6], ud_end, h)
            ud_push = _push(model, k, X, slew, r4, c4, g4, y4) if line is not None else None
            if peak is not None:
                for ud in (aux2[6], aux3[6], aux4[6], ud_end, ud_push):
                    if ud is not None:
                        peak = np.maximum(peak, np.abs(ud))
    if peak is not None:
        rec["ud_peak"] = peak
    return rec
