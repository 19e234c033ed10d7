"""Time simulation of the pitch-rate loop with a nonlinear actuator and damper (batched).

Method
------
* Fixed-step classical Runge-Kutta (RK4), default step 1 ms, on the whole state
  ``[actuator, airframe, sensor, washout, filters, theta]`` of shape ``(N, n)`` for N
  batch members at once; the Python loop runs over time steps only. Inputs are
  evaluated at the stage times; a discontinuity that falls on a grid point is taken from
  the correct side (right limit at a step's start, left limit at its end), so
  grid-aligned steps, pulses and doublets are integrated without an order loss.
* The airframe (two-state short period or four-state longitudinal), sensor, washout and
  filters are linear (their batched state space from
  :func:`damper.model.loop.plant_state_space`, without the actuator and the delay). The
  actuator is simulated here, nonlinear (:mod:`damper.analysis.simulation_parts`):

  - first-order lag of bandwidth b: ``delta' = clip(b (u - delta), -R, R)``;
  - second-order lag (w, zeta): states delta and its rate v,
    ``v' = w^2 (u - delta) - 2 zeta w v`` with ``delta' = clip(v, -R, R)``; v does not
    wind up beyond the rate limit and is projected onto ``[-R, R]`` after each step;
  - travel (+/- rad) on the actuator's output, i.e. on pilot plus damper command: the
    surface stops at the limit (projected after each step; a second-order actuator's
    rate state is set to zero at the stop: an inelastic stop);
  - ideal actuator: ``delta = clip(u, -travel, travel)``; a rate limit cannot act on an
    ideal actuator and is ignored (with a note).

* **Damper authority** (optional): the damper's own command ``u_d = -sign(M_delta) K y``
  is limited to ``+/- authority`` (rad of surface) and then to its own rate limit
  ``R_a`` (rad/s) before it is summed with the pilot's command (series servo:
  :func:`damper.analysis.simulation_parts.damper_command`). The rate limiter follows the
  limited demand ``s = clip(u_d, -A, A)`` exactly (``z = s`` at every stage) until s moves
  by more than ``R_a h`` in a step; it then slews, ``z`` an exact ramp at ``R_a`` toward
  s, until the ramp reaches s (checked at the end of each step, so a switch is resolved
  to one step). While it follows and the authority is not reached, ``z = u_d`` exactly:
  a large authority changes nothing, bit for bit. Without an authority (None) the damper
  command is ``u_d`` itself, as before authorities existed.
* **A failed damper** (optional ``failed_command``): the damper's feedback is cut and its
  command is a prescribed signal of time (hardover, oscillatory failure:
  :mod:`damper.analysis.failure_commands`).
* The pure delay (computation plus half a sample) is exact: the measured signal and its
  derivative are kept in a history buffer and read back at ``t - T`` by cubic Hermite
  interpolation (error of order step^4). When the delay is shorter than the step, the
  step is divided so that it is not.
* The loop over time steps is :func:`damper.analysis.simulation_rk4.integrate` (the
  arithmetic of :func:`damper.analysis.simulation_parts.integrate`, bit for bit, with
  fewer numpy calls per step; the damper's authority and rate limiter in
  :mod:`damper.analysis.simulation_authority`).

The gust is an angle-of-attack disturbance ``alpha_g = w_g / V`` (w_g positive upward):
the airframe sees ``x' = A x + B delta + A[:, alpha] alpha_g`` (the ``M_alpha_dot
alpha_g'`` term is neglected). The normal load factor increment (g, positive up)::

    n_z = -(Z_u u + Z_alpha (alpha + alpha_g) + Z_q q + Z_delta delta) / g0

(``Z_u u`` for the longitudinal airframe only), which equals ``V (q - alpha') / g0`` for
the short-period airframe.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from ..atmosphere import G0
from ..model.airframe import nose_up_surface
from ..model.batch import batch_shape, flatten, map_arrays
from ..model.loop import Loop
from . import simulation_parts as sp
from . import simulation_rk4
from .response_inputs import Input, flat_input, gust_angle, input_end, pilot_command

#: Largest batch size x record length simulated at once (memory guard).
MAX_SAMPLES = 10_000_000

DELAY_MODEL = "exact (history buffer, cubic Hermite interpolation)"
METHOD = "fixed-step RK4"


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
    damper : ndarray or None
        The damper's command at the actuator input after its authority and rate limit,
        rad of surface (trailing-edge down positive); the prescribed command of a failed
        damper.
    damper_demand : ndarray or None
        The damper's command before its limits, ``-sign(M_delta) K y(t - T)``, rad (zero
        for a failed damper, whose feedback is cut).
    authority_limited : ndarray of bool or None
        The damper's demand is at or beyond its authority at that sample.
    authority_rate_limited : ndarray of bool or None
        The damper's own rate limit acts at that sample.
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
    damper: np.ndarray | None = None
    damper_demand: np.ndarray | None = None
    authority_limited: np.ndarray | None = None
    authority_rate_limited: np.ndarray | None = None
    damper_demand_peak: np.ndarray | None = None

    SERIES = (
        "alpha", "q", "theta", "load_factor", "surface", "surface_rate", "command", "pilot", "gust_alpha",
        "rate_limited", "position_limited", "damper", "damper_demand", "authority_limited",
        "authority_rate_limited",
    )

    def take(self, index) -> "TimeHistory":
        """The histories of batch index `index` (tuple or int)."""
        changes = {k: getattr(self, k)[index] for k in self.SERIES if getattr(self, k) is not None}
        changes["input_end"] = np.asarray(self.input_end)[index]
        if self.damper_demand_peak is not None:
            changes["damper_demand_peak"] = np.asarray(self.damper_demand_peak)[index]
        return replace(self, **changes)


def simulate(loop: Loop, inp: Input, *, duration, step=1e-3, rate_limit=None, travel=None,
             authority=None, authority_rate_limit=None, failed_command=None) -> TimeHistory:
    """Simulate the pitch-rate loop with a nonlinear actuator (batched).

    Parameters
    ----------
    loop : Loop
        Airframe, hardware and gain K (s), any batch shape ``S``. The damper command is
        ``-sign(M_delta) K y(t - T)`` with y the filtered pitch-rate measurement and T the
        loop's delay (exact).
    inp : Input
        Pilot input or gust; numeric fields broadcast against ``S``.
    duration : float
        Simulated time, s (from 0; the aircraft starts in trim, all perturbations zero).
    step : float
        Time step of the record and of RK4, s (divided when the delay is shorter).
    rate_limit : float or array_like or None
        Actuator rate limit R, rad/s (None: none), broadcasting against ``S``.
    travel : float or array_like or None
        Actuator travel limit, +/- rad (None: none), on pilot plus damper command.
    authority : float or array_like or None
        The damper's authority, +/- rad of surface: its own command is limited to it
        (None: no limit of its own; the results are then those without authorities,
        bit for bit).
    authority_rate_limit : float or array_like or None
        The damper command's own rate limit, rad/s (None: none); used only with an
        authority (give ``authority=np.inf`` for a rate limit alone).
    failed_command : callable or None
        A failed damper: ``failed_command(t)`` gives the damper's command (rad of surface,
        trailing-edge down positive) at the times ``t`` (s, shape (m,)) as an array of
        shape ``(m, N)`` over the flattened batch; the feedback is cut (the gain is not
        used) and the authority does not apply (the command is already shaped).

    Returns
    -------
    TimeHistory
    """
    shape = batch_shape(loop)
    flat, _ = flatten(loop)
    n_b = int(np.prod(shape, dtype=int))
    flat = map_arrays(flat, lambda a: np.broadcast_to(a, (n_b,)))
    inp_f = flat_input(inp, shape)
    notes = []
    lin = sp.linear_part(flat, n_b, cut=failed_command is not None)
    servo = sp.servo(flat.hardware.actuator, sp.limit(rate_limit, shape), sp.limit(travel, shape), notes)
    auth = None if failed_command is not None else sp.authority(authority, authority_rate_limit, shape)
    n_out = int(round(duration / step)) + 1
    hw = flat.hardware
    tdel = np.zeros(n_b) if hw.delay is None else np.asarray(hw.delay.time, dtype=float).copy()
    sub = 1
    if (tdel > 0).any():
        sub = max(1, int(np.ceil(step / float(tdel[tdel > 0].min()) - 1e-9)))
    h = step / sub
    if n_b * n_out > MAX_SAMPLES:
        from ..errors import DamperError

        raise DamperError(
            f"a time response of {n_b} runs x {n_out} samples exceeds {MAX_SAMPLES:.0e} samples "
            "(about 1 GB of histories); use a larger step, a shorter duration or fewer conditions"
        )
    line = sp.delay_line(tdel, h, lin)
    model = sp.Model(lin, servo, auth, line, n_b)
    to_surface = np.broadcast_to(nose_up_surface(flat.airframe), (n_b,))
    v_air = np.asarray(flat.airframe.airspeed, dtype=float)

    def signals(t):
        tt = t[:, None]
        r = np.broadcast_to(pilot_command(inp_f, tt) * to_surface, (len(t), n_b))
        g = np.broadcast_to(gust_angle(inp_f, tt, v_air), (len(t), n_b))
        c = None if failed_command is None else np.broadcast_to(failed_command(t), (len(t), n_b))
        return r, g, c

    integrate = simulation_rk4.integrate if simulation_rk4.supported(model) else sp.integrate
    rec = integrate(model, signals, (n_out - 1) * sub, sub, h, n_out,
                       with_damper=auth is not None or failed_command is not None)
    return _history(model, flat.airframe, rec, shape, n_out, step, sub, notes, input_end(inp_f, v_air), inp)


def _history(model, d, rec, shape, n_out, step, sub, notes, t_end, inp) -> TimeHistory:
    """The records as a :class:`TimeHistory` of batch shape `shape`."""
    ud_peak = rec.pop("ud_peak", None)
    rec = {key: np.ascontiguousarray(val.T) for key, val in rec.items()}
    time = np.arange(n_out) * step
    if model.servo.kind == "ideal":
        rec["rate"] = np.gradient(rec["surface"], step, axis=-1) if n_out > 1 else np.zeros_like(rec["surface"])
    nz = -(
        np.asarray(d.Z_alpha)[:, None] * (rec["alpha"] + rec["ag"])
        + np.asarray(d.Z_q)[:, None] * rec["q"]
        + np.asarray(d.Z_delta)[:, None] * rec["surface"]
    ) / G0
    if "speed" in rec:  # longitudinal airframe: the Z_u u term (docs/theory.md s.8)
        nz = nz - np.asarray(d.Z_u)[:, None] * rec["speed"] / G0

    def back(a):
        return a.reshape(shape + (n_out,))

    flags = np.zeros(shape + (n_out,), bool)
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
        rate_limited=back(rec["rl"]),
        position_limited=back(rec["pl"]),
        input_end=np.asarray(t_end).reshape(shape),
        step=float(step),
        substeps=sub,
        notes=tuple(notes),
        persistent=inp.persistent,
        damper=back(rec["z"] if "z" in rec else rec["ud"]),
        damper_demand=back(rec["ud"]),
        authority_limited=back(rec["al"]) if "al" in rec else flags,
        authority_rate_limited=back(rec["arl"]) if "arl" in rec else flags,
        damper_demand_peak=None if ud_peak is None else ud_peak.reshape(shape),
    )
