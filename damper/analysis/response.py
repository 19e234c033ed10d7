"""Time responses of the augmented loop with actuator limits (batched).

The aircraft answers a pilot input (doublet, step, pulse) or a vertical gust
(sharp-edged or 1-cosine). Both the augmented loop (damper gain K) and the bare
airframe (K = 0, same actuator and limits) are simulated in one batched pass.

Method
------
* Fixed-step classical Runge-Kutta (RK4), default step 1 ms, on the whole state
  ``[actuator, airframe (alpha, q), sensor, washout, filters, theta]`` of shape
  ``(N, n)`` for N batch members at once; the Python loop runs over time steps
  only. Inputs are evaluated at the stage times; a discontinuity that falls on a
  grid point is taken from the correct side (right limit at a step's start,
  left limit at its end), so grid-aligned steps, pulses and doublets are
  integrated without an order loss.
* The airframe, sensor, washout and filters are linear (their batched state
  space from :func:`damper.model.loop.plant_state_space`, without the actuator
  and the delay). The actuator is simulated here, nonlinear:

  - first-order lag of bandwidth b: ``delta' = clip(b (u - delta), -R, R)``;
  - second-order lag (w, zeta): states delta and its rate v,
    ``v' = w^2 (u - delta) - 2 zeta w v`` with ``delta' = clip(v, -R, R)``; v
    does not wind up beyond the rate limit (``v'`` is held at zero while
    ``|v| >= R`` pushes further out) and is projected onto ``[-R, R]`` after
    each step;
  - position limit (travel, +/- rad) on the actuator's output: the surface
    stops at the limit (``delta'`` is zero while pushing outward; delta is
    projected onto ``[-travel, travel]`` after each step; a second-order
    actuator's rate state is set to zero at the stop: an inelastic stop);
  - ideal actuator: ``delta = clip(u, -travel, travel)``; a rate limit cannot
    act on an ideal actuator and is ignored (with a note); the surface rate of
    the record is then the numerical derivative of delta.

  The pilot command enters at the actuator input, summed with the damper
  command (series servo), so the travel limit applies to their sum as the
  actuator delivers it.
* The pure delay (computation plus half a sample) is exact: the measured
  signal is kept in a history buffer and read back at ``t - T`` by cubic
  Hermite interpolation between steps (using the stored signal and its
  derivative; error of order step^4). When the delay is shorter than the step,
  the step is divided so that it is not.

The gust is an angle-of-attack disturbance ``alpha_g = w_g / V`` (w_g positive
upward) that adds to the aerodynamic angle of attack: the airframe sees
``x' = A x + B delta + A[:, 0] alpha_g``, i.e. ``Z_alpha/V alpha_g`` in
``alpha'`` and ``M_alpha alpha_g`` (plus the ``M_alpha_dot Z_alpha/V alpha_g``
part of the substituted ``M_alpha_dot alpha'``) in ``q'``. The term
``M_alpha_dot alpha_g'`` is neglected (for a sharp-edged gust it is an impulse).

The normal load factor increment (g, positive nose-up/upward) is the normal
force per unit mass over g0 with the aerodynamic angle of attack::

    n_z = -(Z_alpha (alpha + alpha_g) + Z_q q + Z_delta delta) / g0

which equals ``V (q - alpha') / g0``; with ``Z_q = 0`` and no gust it is
``-(Z_alpha alpha + Z_delta delta) / g0``.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np

from ..atmosphere import G0
from ..model.batch import batch_shape, flatten, map_arrays
from ..model.elements import Lag, SecondOrderLag
from ..model.airframe import nose_up_surface
from ..model.loop import Hardware, Loop, feedback_sign, plant_state_space

#: Input kinds (case-file words).
PILOT_KINDS = ("doublet", "step", "pulse")
GUST_KINDS = ("gust_sharp", "gust_one_minus_cosine")
KINDS = PILOT_KINDS + GUST_KINDS

#: A second peak below this fraction of the first means "not oscillatory": the
#: time to half amplitude is then read from the signal itself, not its peaks.
OSCILLATORY_RATIO = 0.05
#: Peaks smaller than this fraction of the largest excursion are ignored.
PEAK_FLOOR = 1e-3
#: A step's final pitch rate below this fraction of the largest deviation is not
#: used as the reference (the response is then measured like a pulse's).
STEP_REFERENCE_RATIO = 0.1
#: An input's edge counts as passed within this much time, s (so that a doublet
#: written as start 0.2 s, half-period 0.4 s switches at t = 0.6 s despite rounding).
EDGE_TOL = 1e-12
#: Settling band, fraction of the largest excursion.
SETTLING_BAND = 0.05

#: Largest batch size x record length simulated at once (memory guard).
MAX_SAMPLES = 10_000_000

DELAY_MODEL = "exact (history buffer, cubic Hermite interpolation)"
METHOD = "fixed-step RK4"


# ---------------------------------------------------------------------------
# Inputs
# ---------------------------------------------------------------------------


@dataclass(frozen=True)
class Input:
    """A pilot input or a vertical gust. Numeric fields broadcast against the batch.

    Attributes
    ----------
    kind : str
        ``doublet``, ``step``, ``pulse``, ``gust_sharp`` or ``gust_one_minus_cosine``.
    amplitude : ndarray
        Pilot command, rad of surface, positive nose-up (a pull is positive, whatever the
        sign of ``M_delta``): it reaches the actuator input as ``sign(M_delta)`` times
        itself (:func:`damper.model.airframe.nose_up_surface`). A doublet is
        ``+amplitude`` for one half-period then ``-amplitude`` for the next.
    start : ndarray
        Time the input begins, s.
    half_period : ndarray
        Doublet: duration of each half, s.
    duration : ndarray
        Pulse: duration, s.
    gust_velocity : ndarray
        Gust: vertical velocity w_g, m/s, positive upward (raises alpha). For the
        1-cosine gust, the peak velocity.
    gust_length : ndarray
        1-cosine gust: length L, m, over which the gust rises and falls,
        ``w = w_g/2 (1 - cos(2 pi x / L))`` for ``0 <= x <= L``, ``x = V (t - start)``
        (L is twice the "gradient distance" of the usual certification wording).
    name : str
        Label for tables and files.
    """

    kind: str
    amplitude: np.ndarray = 0.0
    start: np.ndarray = 0.5
    half_period: np.ndarray = 0.5
    duration: np.ndarray = 0.5
    gust_velocity: np.ndarray = 0.0
    gust_length: np.ndarray = 0.0
    name: str = ""

    def __post_init__(self):
        if self.kind not in KINDS:
            raise ValueError(f"input kind must be one of {', '.join(KINDS)}, not {self.kind!r}")

    @property
    def label(self) -> str:
        return self.name or self.kind

    @property
    def is_gust(self) -> bool:
        return self.kind in GUST_KINDS

    @property
    def persistent(self) -> bool:
        """The input does not end (step, sharp-edged gust)."""
        return self.kind in ("step", "gust_sharp")


def _f(x):
    return np.asarray(x, dtype=float)


def pilot_command(inp: Input, t):
    """Pilot command, rad, positive nose-up, at times `t` (s).

    `t` broadcasts against the input's parameters (give it a trailing axis of
    length 1 per batch axis when the parameters are batched). A jump at time
    ``t0`` takes its new value at ``t >= t0`` (within :data:`EDGE_TOL`).
    """
    t = _f(t) + EDGE_TOL
    a, t0 = _f(inp.amplitude), _f(inp.start)
    if inp.kind == "doublet":
        hp = _f(inp.half_period)
        return np.where((t >= t0) & (t < t0 + hp), a, 0.0) - np.where((t >= t0 + hp) & (t < t0 + 2 * hp), a, 0.0)
    if inp.kind == "step":
        return np.where(t >= t0, a, 0.0)
    if inp.kind == "pulse":
        return np.where((t >= t0) & (t < t0 + _f(inp.duration)), a, 0.0)
    return np.zeros(np.broadcast_shapes(t.shape, a.shape))


def gust_velocity(inp: Input, t, airspeed):
    """Vertical gust velocity w_g, m/s (positive upward), at times `t` (s).

    Parameters
    ----------
    airspeed : array_like
        True airspeed V, m/s (the 1-cosine gust is crossed at V).
    """
    t = _f(t)
    u, t0 = _f(inp.gust_velocity), _f(inp.start)
    if inp.kind == "gust_sharp":
        return np.where(t + EDGE_TOL >= t0, u, 0.0)
    if inp.kind == "gust_one_minus_cosine":
        length = _f(inp.gust_length)
        with np.errstate(invalid="ignore", divide="ignore"):
            x = _f(airspeed) * (t - t0) / length
        return np.where((x >= 0) & (x <= 1), 0.5 * u * (1.0 - np.cos(2.0 * np.pi * x)), 0.0)
    return np.zeros(np.broadcast_shapes(t.shape, u.shape, np.shape(airspeed)))


def gust_angle(inp: Input, t, airspeed):
    """Gust angle of attack ``alpha_g = w_g / V``, rad."""
    return gust_velocity(inp, t, airspeed) / _f(airspeed)


def input_end(inp: Input, airspeed):
    """Time the input ends, s (the start for a step or sharp-edged gust)."""
    t0 = _f(inp.start)
    if inp.kind == "doublet":
        return t0 + 2.0 * _f(inp.half_period)
    if inp.kind == "pulse":
        return t0 + _f(inp.duration)
    if inp.kind == "gust_one_minus_cosine":
        return t0 + _f(inp.gust_length) / _f(airspeed)
    return t0 + 0.0 * _f(airspeed)


def _input_arrays(inp: Input, shape):
    """`inp` with numeric fields broadcast to `shape` and raveled."""
    return map_arrays(inp, lambda a: np.ascontiguousarray(np.broadcast_to(a, shape)).reshape(-1))


# ---------------------------------------------------------------------------
# Simulation
# ---------------------------------------------------------------------------


@dataclass(frozen=True)
class TimeHistory:
    """Simulated time histories; arrays of shape ``S + (n_t,)`` (batch shape S).

    Attributes
    ----------
    time : ndarray, shape (n_t,)
        s.
    alpha : ndarray
        Angle of attack (perturbation), rad.
    q : ndarray
        Pitch rate, rad/s.
    theta : ndarray
        Pitch attitude (integral of q), rad.
    load_factor : ndarray
        Normal load factor increment, g (see module notes).
    surface : ndarray
        Actuator (surface) position delta, rad.
    surface_rate : ndarray
        Actuator rate, rad/s.
    command : ndarray
        Actuator input u (pilot plus damper command), rad.
    pilot : ndarray
        Pilot command as it reaches the actuator input, rad of surface (trailing-edge
        down positive: ``sign(M_delta)`` times the nose-up command).
    gust_alpha : ndarray
        Gust angle of attack w_g/V, rad.
    rate_limited : ndarray of bool
        The rate limit acts at that sample.
    position_limited : ndarray of bool
        The surface sits at its travel limit at that sample.
    input_end : ndarray, shape S
        Time the input ends, s (its start for a step or sharp-edged gust).
    step : float
        Sample spacing of the record, s.
    substeps : int
        Integration steps per record sample (more than 1 when the delay is shorter
        than the step).
    notes : tuple of str
    persistent : bool
        The input does not end (step, sharp-edged gust).
    """

    time: np.ndarray
    alpha: np.ndarray
    q: np.ndarray
    theta: np.ndarray
    load_factor: np.ndarray
    surface: np.ndarray
    surface_rate: np.ndarray
    command: np.ndarray
    pilot: np.ndarray
    gust_alpha: np.ndarray
    rate_limited: np.ndarray
    position_limited: np.ndarray
    input_end: np.ndarray
    step: float
    substeps: int = 1
    notes: tuple = ()
    persistent: bool = False

    SERIES = (
        "alpha", "q", "theta", "load_factor", "surface", "surface_rate", "command", "pilot", "gust_alpha",
        "rate_limited", "position_limited",
    )

    def take(self, index) -> "TimeHistory":
        """The histories of batch index `index` (tuple or int)."""
        changes = {k: getattr(self, k)[index] for k in self.SERIES}
        changes["input_end"] = np.asarray(self.input_end)[index]
        return replace(self, **changes)


def _limit(value, shape):
    n = int(np.prod(shape, dtype=int))
    if value is None:
        return np.full(n, np.inf)
    v = np.broadcast_to(np.asarray(value, dtype=float), shape).reshape(-1).copy()
    return np.where(np.isfinite(v) & (v > 0), v, np.inf)


def _broadcast(loop: Loop, shape):
    return map_arrays(loop, lambda a: np.broadcast_to(a, shape))


def simulate(loop: Loop, inp: Input, *, duration, step=1e-3, rate_limit=None, travel=None) -> TimeHistory:
    """Simulate the pitch-rate loop with a nonlinear actuator (batched).

    Parameters
    ----------
    loop : Loop
        Airframe, hardware and gain K (s), any batch shape ``S``. The damper
        command is ``-sign(M_delta) K y(t - T)`` with y the filtered pitch-rate
        measurement and T the loop's delay (exact).
    inp : Input
        Pilot input or gust; numeric fields broadcast against ``S``.
    duration : float
        Simulated time, s (from 0; the aircraft starts in trim, all perturbations zero).
    step : float
        Time step of the record and of RK4, s (divided when the delay is shorter).
    rate_limit : float or array_like or None
        Actuator rate limit R, rad/s (None: none), broadcasting against ``S``.
    travel : float or array_like or None
        Actuator travel limit, +/- rad (None: none).

    Returns
    -------
    TimeHistory
    """
    shape = batch_shape(loop)
    flat, _ = flatten(loop)
    n_b = int(np.prod(shape, dtype=int))
    flat = map_arrays(flat, lambda a: np.broadcast_to(a, (n_b,)))
    inp_f = _input_arrays(inp, shape)
    hw = flat.hardware
    d = flat.airframe
    v_air = np.asarray(d.airspeed, dtype=float)
    notes = []

    # linear part: airframe + sensor + washout + filters (no actuator, no delay) + theta
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
    Ev = np.zeros((n_b, n))  # gust: the first column of the airframe's matrix
    Ev[:, layout.alpha] = A[:, layout.alpha, layout.alpha]
    Ev[:, layout.q] = A[:, layout.q, layout.alpha]
    kfb = -feedback_sign(d) * np.asarray(flat.gain, dtype=float)

    R = _limit(rate_limit, shape)
    trav = _limit(travel, shape)
    act = hw.actuator
    if act is None:
        kind, na = "ideal", 0
        if np.isfinite(R).any():
            notes.append("rate limit ignored: the actuator is ideal (give it a bandwidth to apply the limit)")
            R = np.full(n_b, np.inf)
    elif isinstance(act, Lag):
        kind, na = "lag", 1
        bw = 1.0 / np.asarray(act.time_constant, dtype=float)
    elif isinstance(act, SecondOrderLag):
        kind, na = "second", 2
        w = np.asarray(act.natural_frequency, dtype=float)
        w2 = w * w
        zw2 = 2.0 * np.asarray(act.damping_ratio, dtype=float) * w
    else:
        raise TypeError(f"time responses support a first- or second-order actuator, not {type(act).__name__}")

    # delay and step
    tdel = np.zeros(n_b) if hw.delay is None else np.asarray(hw.delay.time, dtype=float).copy()
    delayed = tdel > 0
    has_delay = bool(delayed.any())
    all_delayed = bool(delayed.all())
    n_out = int(round(duration / step)) + 1
    sub = 1
    if has_delay:
        sub = max(1, int(np.ceil(step / float(tdel[delayed].min()) - 1e-9)))
    h = step / sub
    n_int = (n_out - 1) * sub
    if n_b * n_out > MAX_SAMPLES:
        from ..errors import DamperError

        raise DamperError(
            f"a time response of {n_b} runs x {n_out} samples exceeds {MAX_SAMPLES:.0e} samples "
            "(about 1 GB of histories); use a larger step, a shorter duration or fewer conditions"
        )
    rows = np.arange(n_b)
    if has_delay:
        # ring buffer of the measured signal y and its derivative: row = slot, columns [y (N), y' (N)]
        length = int(np.ceil(float(tdel.max()) / h)) + 4
        width = 2 * n_b
        buf = np.zeros(length * width)
        lag_steps = np.where(delayed, tdel / h, 1.0)
        CA = np.einsum("ni,nij->nj", Cv, A)
        CB = np.sum(Cv * Bv, -1)
        CE = np.sum(Cv * Ev, -1)
        taps = {}
        for c in (0.0, 0.5, 1.0):
            # read at t_k + c h - T = t_(k+j) + s h with j <= -1 (stored samples only)
            p = c - lag_steps
            j = np.floor(p)
            s = p - j
            late = j >= 0  # only when T is within rounding of h: use the latest sample
            j = np.where(late, -1.0, j).astype(np.int64)
            s = np.where(late, 1.0, s)
            s2, s3 = s * s, s * s * s
            weights = np.stack([2 * s3 - 3 * s2 + 1, (s3 - 2 * s2 + s) * h, 3 * s2 - 2 * s3, (s3 - s2) * h])
            base = np.concatenate([j * width + rows, j * width + n_b + rows, (j + 1) * width + rows,
                                   (j + 1) * width + n_b + rows])
            taps[c] = (base % (length * width), weights)

    def lookup(k, c):
        """Measured signal at t_k + c h - T (samples up to t_k are stored)."""
        base, weights = taps[c]
        vals = np.take(buf, (base + k * width) % (length * width)).reshape(4, n_b)
        return np.einsum("ij,ij->j", weights, vals)

    if n_b <= 256:  # measured: batched matmul is faster for small batches, einsum for large ones
        def matvec(x):
            return (A @ x[:, :, None])[:, :, 0]
    else:
        def matvec(x):
            return np.einsum("nij,nj->ni", A, x)

    has_trav = bool(np.isfinite(trav).any())
    has_rate = bool(np.isfinite(R).any())
    lo_t, lo_r = -trav, -R

    def deriv(X, r, ag, yd, full=False):
        xp = X[:, na:]
        if yd is None:
            y = np.einsum("ni,ni->n", Cv, xp)
        elif all_delayed:
            y = yd
        else:
            y = np.where(delayed, yd, np.einsum("ni,ni->n", Cv, xp))
        u = r + kfb * y
        dX = np.empty_like(X)
        rlim = plim = None
        if kind == "ideal":
            dlt = np.minimum(np.maximum(u, lo_t), trav) if has_trav else u
            rate = None
            if full:
                rlim = np.zeros(n_b, bool)
                plim = np.abs(u) >= trav
        else:
            x0 = X[:, 0]
            dlt = np.minimum(np.maximum(x0, lo_t), trav) if has_trav else x0
            if kind == "lag":
                rc = bw * (u - dlt)
                rate = np.minimum(np.maximum(rc, lo_r), R) if has_rate else rc
                if full:
                    rlim = np.abs(rc) > R
            else:
                vel = X[:, 1]
                rate = np.minimum(np.maximum(vel, lo_r), R) if has_rate else vel
                if full:
                    rlim = np.abs(vel) >= R * (1.0 - 1e-12)
            if has_trav:
                rate = np.where(((dlt >= trav) & (rate > 0)) | ((dlt <= lo_t) & (rate < 0)), 0.0, rate)
                if full:
                    plim = np.abs(dlt) >= trav
            elif full:
                plim = np.zeros(n_b, bool)
            dX[:, 0] = rate
            if kind == "second":
                acc = w2 * (u - dlt) - zw2 * rate
                if has_rate:
                    acc = np.where((np.abs(vel) >= R) & (acc * vel > 0), 0.0, acc)
                if has_trav:
                    acc = np.where(((dlt >= trav) & (acc > 0)) | ((dlt <= lo_t) & (acc < 0)), 0.0, acc)
                dX[:, 1] = acc
        dX[:, na:] = matvec(xp) + Bv * dlt[:, None] + Ev * ag[:, None]
        return dX, (dlt, rate, u, rlim, plim)

    # records (time-major, transposed at the end)
    rec = {k: np.zeros((n_out, n_b)) for k in ("alpha", "q", "theta", "surface", "rate", "u", "r", "ag")}
    rl = np.zeros((n_out, n_b), bool)
    pl = np.zeros((n_out, n_b), bool)
    X = np.zeros((n_b, na + n))
    ia, iq = na + layout.alpha, na + layout.q
    eps = 1e-6 * h  # left limit at the end of a step (>> EDGE_TOL)
    chunk = 256
    t_end = input_end(inp_f, v_air)

    to_surface = np.broadcast_to(nose_up_surface(d), (n_b,))

    def signals(t):
        tt = t[:, None]
        return (
            np.broadcast_to(pilot_command(inp_f, tt) * to_surface, (len(t), n_b)),
            np.broadcast_to(gust_angle(inp_f, tt, v_air), (len(t), n_b)),
        )

    half = 0.5 * h
    sixth = h / 6.0
    for c0 in range(0, n_int + 1, chunk):
        ks = np.arange(c0, min(c0 + chunk, n_int + 1))
        tk = ks * h
        r1, g1 = signals(tk)  # right limit at an edge (EDGE_TOL); also the record
        r2, g2 = signals(tk + half)
        r4, g4 = signals(tk + h - eps)
        for m, k in enumerate(ks):
            k = int(k)
            yd1 = lookup(k, 0.0) if has_delay else None
            recording = k % sub == 0
            k1, aux = deriv(X, r1[m], g1[m], yd1, full=recording)
            if recording:
                i = k // sub
                dlt, rate, u, rlim, plim = aux
                rec["alpha"][i] = X[:, ia]
                rec["q"][i] = X[:, iq]
                rec["theta"][i] = X[:, -1]
                rec["surface"][i] = dlt
                if rate is not None:
                    rec["rate"][i] = rate
                rec["u"][i] = u
                rec["r"][i] = r1[m]
                rec["ag"][i] = g1[m]
                rl[i] = rlim
                pl[i] = plim
            if k == n_int:
                break
            yd2 = lookup(k, 0.5) if has_delay else None
            yd4 = lookup(k, 1.0) if has_delay else None
            k2, _ = deriv(X + half * k1, r2[m], g2[m], yd2)
            k3, _ = deriv(X + half * k2, r2[m], g2[m], yd2)
            k4, _ = deriv(X + h * k3, r4[m], g4[m], yd4)
            X = X + sixth * (k1 + 2.0 * (k2 + k3) + k4)
            if kind != "ideal" and has_trav:
                X[:, 0] = np.minimum(np.maximum(X[:, 0], lo_t), trav)
            if kind == "second":
                vel = np.minimum(np.maximum(X[:, 1], lo_r), R) if has_rate else X[:, 1]
                if has_trav:
                    vel = np.where(((X[:, 0] >= trav) & (vel > 0)) | ((X[:, 0] <= lo_t) & (vel < 0)), 0.0, vel)
                X[:, 1] = vel
            if has_delay:
                xp = X[:, na:]
                yk = np.einsum("ni,ni->n", Cv, xp)
                if kind == "ideal":
                    uu = r4[m] + kfb * (yd4 if all_delayed else np.where(delayed, yd4, yk))
                    dl = np.minimum(np.maximum(uu, lo_t), trav) if has_trav else uu
                else:
                    dl = X[:, 0]
                slot = ((k + 1) % length) * width
                buf[slot:slot + n_b] = yk
                buf[slot + n_b:slot + width] = np.einsum("ni,ni->n", CA, xp) + CB * dl + CE * g4[m]

    rec = {key: np.ascontiguousarray(val.T) for key, val in rec.items()}
    rl, pl = np.ascontiguousarray(rl.T), np.ascontiguousarray(pl.T)
    time = np.arange(n_out) * step
    if kind == "ideal":
        rec["rate"] = np.gradient(rec["surface"], step, axis=-1) if n_out > 1 else np.zeros_like(rec["surface"])
    nz = -(
        np.asarray(d.Z_alpha)[:, None] * (rec["alpha"] + rec["ag"])
        + np.asarray(d.Z_q)[:, None] * rec["q"]
        + np.asarray(d.Z_delta)[:, None] * rec["surface"]
    ) / G0

    def back(a):
        return a.reshape(shape + (n_out,))

    return TimeHistory(
        time=time,
        alpha=back(rec["alpha"]),
        q=back(rec["q"]),
        theta=back(rec["theta"]),
        load_factor=back(nz),
        surface=back(rec["surface"]),
        surface_rate=back(rec["rate"]),
        command=back(rec["u"]),
        pilot=back(rec["r"]),
        gust_alpha=back(rec["ag"]),
        rate_limited=back(rl),
        position_limited=back(pl),
        input_end=np.asarray(t_end).reshape(shape),
        step=float(step),
        substeps=sub,
        notes=tuple(notes),
        persistent=inp.persistent,
    )


# ---------------------------------------------------------------------------
# Measures
# ---------------------------------------------------------------------------


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
    """

    time_to_half: np.ndarray
    settling_time: np.ndarray
    overshoot: np.ndarray
    peak_pitch_rate: np.ndarray
    peak_alpha: np.ndarray
    peak_load_factor: np.ndarray
    peak_surface: np.ndarray
    peak_surface_rate: np.ndarray
    time_at_rate_limit: np.ndarray
    time_at_position_limit: np.ndarray
    input_end: np.ndarray


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
    n = q.shape[0]
    t_end = np.broadcast_to(np.asarray(h.input_end, dtype=float), shape).reshape(-1)
    # the final value: 0 after an input that ends (the loop returns to trim), the last
    # sample after a step or sharp-edged gust
    e = q - q[:, -1:] if h.persistent else q
    ae = np.abs(e)
    after = T[None, :] >= t_end[:, None] - 1e-9 * dt
    big = np.max(np.where(after, ae, 0.0), axis=-1)
    idx = np.broadcast_to(np.arange(n_t), (n, n_t))

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
    if h.persistent:
        # step or sharp-edged gust: the deviation at the start (-q_f) is the first "peak",
        # so the overshoot is the classic (q_peak - q_f) / |q_f|
        i_e = np.argmax(after, axis=-1)
        r_e = np.arange(n)
        use = (ae[r_e, i_e] >= STEP_REFERENCE_RATIO * big) & (big > 0)
        pk[r_e, i_e] = np.where(use, True, pk[r_e, i_e])
        val[r_e, i_e] = np.where(use, ae[r_e, i_e], val[r_e, i_e])
        tp[r_e, i_e] = np.where(use, T[i_e], tp[r_e, i_e])
    sgn = np.sign(e)

    f, has1 = _first(pk)
    p0, t0, s0 = _at(val, f), _at(tp, f), _at(sgn, f)
    later = pk & (idx > f[:, None])
    s, has2 = _first(later)
    p1 = _at(val, s)
    opp, has_opp = _first(later & (sgn != s0[:, None]))
    with np.errstate(invalid="ignore", divide="ignore"):
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
        t_half = np.where(has1, np.where(oscill, t_osc, t_dir), np.nan)

        # settling
        band = SETTLING_BAND * np.max(ae, axis=-1)
        outside = ae > band[:, None]
        lastout = n_t - 1 - np.argmax(outside[:, ::-1], axis=-1)
        any_out = outside.any(-1)
        nx = np.minimum(lastout + 1, n_t - 1)
        o_l, o_n = _at(ae, lastout), _at(ae, nx)
        t_cross = T[lastout] + dt * np.where(o_l > o_n, (o_l - band) / (o_l - o_n), 0.0)
        settle = np.where(~any_out, 0.0, np.where(lastout >= n_t - 1, np.nan, np.maximum(t_cross - t_end, 0.0)))

    def r(a):
        return np.asarray(a).reshape(shape)

    rate = np.asarray(h.surface_rate)
    return ResponseMeasures(
        time_to_half=r(t_half),
        settling_time=r(settle),
        overshoot=r(overshoot),
        peak_pitch_rate=r(_signed_peak(np.reshape(h.q, (-1, n_t)))),
        peak_alpha=r(_signed_peak(np.reshape(h.alpha, (-1, n_t)))),
        peak_load_factor=r(_signed_peak(np.reshape(h.load_factor, (-1, n_t)))),
        peak_surface=r(np.max(np.abs(np.reshape(h.surface, (-1, n_t))), -1)),
        peak_surface_rate=r(np.nanmax(np.abs(np.reshape(rate, (-1, n_t))), -1)),
        time_at_rate_limit=r(np.sum(np.reshape(h.rate_limited, (-1, n_t)), -1) * dt),
        time_at_position_limit=r(np.sum(np.reshape(h.position_limited, (-1, n_t)), -1) * dt),
        input_end=r(t_end),
    )


# ---------------------------------------------------------------------------
# Bare and augmented together
# ---------------------------------------------------------------------------


@dataclass(frozen=True)
class Response:
    """Augmented and bare responses to one input (batch shape S).

    Attributes
    ----------
    input : Input
    augmented, bare : TimeHistory
        With the loop's gain; with K = 0 (same actuator and limits).
    augmented_measures, bare_measures : ResponseMeasures
    rate_limit, travel : float or None
        rad/s, rad.
    """

    input: Input
    augmented: TimeHistory
    bare: TimeHistory
    augmented_measures: ResponseMeasures
    bare_measures: ResponseMeasures
    rate_limit: object = None
    travel: object = None


def respond(loop: Loop, inp: Input, *, duration, step=1e-3, rate_limit=None, travel=None) -> Response:
    """Simulate `loop` and its bare airframe (K = 0) in one batched pass.

    The bare airframe keeps the actuator and its limits (the pilot command
    reaches the surface through it), so the two differ only by the damper.
    Parameters as in :func:`simulate`.
    """
    shape = batch_shape(loop)
    both = _broadcast(loop, shape)
    both = map_arrays(both, lambda a: np.stack([a, a]))
    g = np.broadcast_to(np.asarray(loop.gain, dtype=float), shape)
    both = replace(both, gain=np.stack([g, np.zeros_like(g)]))
    inp2 = map_arrays(inp, lambda a: np.stack([np.broadcast_to(a, shape)] * 2))

    def lim(x):
        return None if x is None else np.stack([np.broadcast_to(np.asarray(x, dtype=float), shape)] * 2)

    hist = simulate(both, inp2, duration=duration, step=step, rate_limit=lim(rate_limit), travel=lim(travel))
    aug, bare = hist.take(0), hist.take(1)
    return Response(inp, aug, bare, measure(aug), measure(bare), rate_limit, travel)


# ---------------------------------------------------------------------------
# From a case
# ---------------------------------------------------------------------------


@dataclass(frozen=True)
class ResponseSpec:
    """What to simulate (from the case's ``responses`` section, or the default).

    Attributes
    ----------
    duration : float
        s.
    step : float
        Integration and record step, s.
    output_step : float
        Step of the CSV files and plots, s.
    inputs : tuple of Input
        Numeric fields of shape ``(n_conditions,)`` or scalars.
    default : bool
        True when the case has no ``responses`` section.
    """

    duration: float
    step: float
    output_step: float
    inputs: tuple
    default: bool = False


DEFAULT_DURATION = 10.0
DEFAULT_STEP = 1e-3
DEFAULT_OUTPUT_STEP = 0.01
DEFAULT_START = 0.5
DEFAULT_DOUBLET_AMPLITUDE = np.deg2rad(2.0)  # nose-up: a pull first


def default_half_period(d):
    """Doublet half-period, s: half the bare short-period period (``pi / w_d``),
    ``pi / w_n`` when the bare pair is not oscillatory, 0.5 s when divergent;
    kept within 0.1-5 s."""
    from ..measures.modes import bare_short_period

    sp = bare_short_period(d)
    hp = np.where(np.isfinite(sp.period), 0.5 * sp.period, np.pi / sp.natural_frequency)
    hp = np.where(np.isfinite(hp), hp, 0.5)
    return np.clip(hp, 0.1, 5.0)


def response_spec(case) -> ResponseSpec:
    """The case's response settings; the default is one pull-first doublet of 2 deg.

    The default doublet starts at 0.5 s with a half-period of half the bare
    short-period period at each condition (:func:`default_half_period`); 10 s at 1 ms.

    Raises
    ------
    CaseError
        An input that does not end before the simulated time does.
    """
    from ..errors import CaseError

    d = case.derivatives()
    raw = (case.raw or {}).get("responses")
    if raw is None:
        inp = Input("doublet", amplitude=DEFAULT_DOUBLET_AMPLITUDE, start=DEFAULT_START,
                    half_period=default_half_period(d), name="doublet")
        return ResponseSpec(DEFAULT_DURATION, DEFAULT_STEP, DEFAULT_OUTPUT_STEP, (inp,), default=True)
    duration, step = raw["duration"], raw["step"]
    out_step = raw["output_step"] if raw.get("output_step") is not None else max(step, DEFAULT_OUTPUT_STEP)
    if step > duration / 10:
        raise CaseError("must be at most a tenth of responses.duration", "responses.step", step, file=case.file)
    if duration / step > 2e6:
        raise CaseError("gives more than 2 million steps; use a larger step or a shorter duration",
                        "responses.step", step, file=case.file)
    if out_step < step:
        raise CaseError("must not be smaller than responses.step", "responses.output_step", out_step, file=case.file)
    items = raw.get("inputs")
    if not items:
        items = [{"kind": "doublet"}]
    inputs = []
    for i, it in enumerate(items):
        kind = it["kind"]
        hp = it.get("half_period")
        start = it.get("start")
        start = DEFAULT_START if start is None else start
        amp = it.get("amplitude")
        inp = Input(
            kind,
            amplitude=(DEFAULT_DOUBLET_AMPLITUDE if amp is None else amp),
            start=start,
            half_period=default_half_period(d) if hp is None else hp,
            duration=it.get("duration") or 0.0,
            gust_velocity=it.get("gust_velocity") or 0.0,
            gust_length=it.get("gust_length") or 0.0,
            name=it.get("name") or f"{kind}",
        )
        end = np.max(input_end(inp, d.airspeed))
        if not end < duration:
            raise CaseError(
                f"the input ends at {end:.4g} s, not before responses.duration = {duration:.4g} s",
                f"responses.inputs[{i}]", file=case.file,
            )
        inputs.append(inp)
    names = [x.name for x in inputs]
    inputs = [replace(x, name=f"{x.name}-{i + 1}") if names.count(x.name) > 1 else x for i, x in enumerate(inputs)]
    return ResponseSpec(float(duration), float(step), float(out_step), tuple(inputs))


@dataclass(frozen=True)
class CaseResponses:
    """Responses of every condition of a case to every input.

    Attributes
    ----------
    spec : ResponseSpec
    gains : ndarray
        K, s, shape ``(n_conditions,)`` (or with a gains axis).
    responses : tuple of Response
        One per input, batch shape of `gains`.
    rate_limit, travel : float or None
        rad/s, rad (from the case's actuator).
    notes : tuple of str
    """

    spec: ResponseSpec
    gains: np.ndarray
    responses: tuple
    rate_limit: float | None = None
    travel: float | None = None
    notes: tuple = field(default=())


def respond_case(case, gains, spec: ResponseSpec | None = None) -> CaseResponses:
    """Simulate every input of `spec` (default :func:`response_spec`) at every condition.

    Parameters
    ----------
    case : Case
    gains : array_like
        K, s: scalar, ``(n_conditions,)`` or ``(n_conditions, n_gains)``.
    """
    from .assess import build_loop

    spec = spec or response_spec(case)
    loop = build_loop(case, gains)
    shape = batch_shape(loop)
    extra = len(shape) - 1
    out, notes = [], []
    for inp in spec.inputs:
        inp_b = map_arrays(inp, lambda a: a.reshape(a.shape + (1,) * extra) if a.ndim else a)
        res = respond(loop, inp_b, duration=spec.duration, step=spec.step,
                      rate_limit=case.loop.rate_limit, travel=case.loop.travel)
        res = replace(res, input=inp)
        out.append(res)
        notes.extend(n for n in res.augmented.notes if n not in notes)
    return CaseResponses(spec, np.broadcast_to(np.asarray(loop.gain, dtype=float), shape), tuple(out),
                         case.loop.rate_limit, case.loop.travel, tuple(notes))
