"""The damper's authority and its rate limiter in the streamlined RK4 loop (same arithmetic).

:func:`damper.analysis.simulation_rk4.integrate` hands the damper's own limits (the
authority ``A``, rad, and the rate limit ``R_a``, rad/s) to a :class:`Damper`, which
computes what :func:`damper.analysis.simulation_parts.damper_command` and
:func:`damper.analysis.simulation_parts.slew_step` compute, bit for bit: every
floating-point operation is the same, on the same operands, in the same order. Two cases:

* **Every member's measurement delayed** (``DelayLine.all_delayed``): the damper's demand
  ``u_d = -sign(M_delta) K y(t - T)`` (rad) at every stage of a block of steps is read from
  the history before the block starts, and the limited command depends on the demands
  alone, so the authority's clip, the rate limiter's sequence and the actuator input
  ``u = r + z`` are computed for the whole block (:meth:`Damper.block_commands`) and the
  step loop sees a known input. The rate limiter is sequential, but while it follows its
  limited demand ``s = clip(u_d, -A, A)`` (``z = s``) a step changes it only when ``s``
  moves by more than ``R_a h`` within the step; those steps are found for the block at
  once and only from the first of them on, while it slews, is it advanced step by step
  (a few operations on N values per step).
* **Otherwise** (no delay, or delays on some members only): the demand depends on the
  state at each stage, so :meth:`Damper.feeder` gives the stage's command from it and
  :meth:`Damper.after_step` advances the rate limiter from the demand at the step's end,
  as the reference loop does.

The largest |demand| seen by the limits (``ud_peak``, rad) is taken per block over the
demands of the block's stages, the same values the reference loop compares one by one
(a maximum does not depend on the order of its operands).
"""

from __future__ import annotations

import numpy as np

from . import simulation_parts as sp

#: Demand slots per step: the four stages, the step's end (rate limiter) and the ideal
#: actuator's surface stored in the delay line.
SLOTS = 6


class Damper:
    """The damper's limits and its rate limiter's state during one run (N members).

    Parameters
    ----------
    model : damper.analysis.simulation_parts.Model
        With an authority (``model.auth``: A, rad; R_a, rad/s).
    h : float
        Integration step, s.
    block : int
        Most steps per block of the step loop.

    Attributes
    ----------
    moving : bool
        Some member's rate limiter slews (``direction`` nonzero).
    direction : ndarray, shape (N,)
        0, +1 or -1 (as :class:`damper.analysis.simulation_parts.Slew`).
    value : ndarray, shape (N,)
        Command at the step's start, rad; meaningful only where ``direction`` is nonzero
        (elsewhere the reference loop never reads it).
    ramps : ndarray, shape (3, N)
        ``value + direction R_a tau`` at tau = 0, h/2 and h (rad), while moving.
    peak : ndarray, shape (N,)
        Largest |damper demand| so far, rad.
    """

    def __init__(self, model: sp.Model, h, block):
        auth, n_b = model.auth, model.n_b
        self.model, self.h = model, h
        self.a, self.neg_a = auth.limit, -auth.limit
        self.rh = auth.rate * h
        self.sr = auth.slew_rate
        self.has_rate = auth.has_rate
        self.taus = np.array([0.0, 0.5 * h, h])[:, None]
        self.ideal = model.servo.kind == "ideal"
        self.moving = False
        self.direction = np.zeros(n_b)
        self.dirnz = np.zeros(n_b, bool)
        self.value = np.zeros(n_b)
        self.ramps = None
        self.peak = np.zeros(n_b)
        stepped = model.line is None or not model.line.all_delayed  # demands from the state
        self.UD = np.zeros((block, SLOTS, n_b)) if stepped else None  # the stages' demands, rad
        self.S = np.empty((4, n_b))
        self.z1 = None

    def clip(self, ud, out=None):
        """``clip(u_d, -A, A)`` as :func:`simulation_parts.damper_command` (rad)."""
        z = np.maximum(ud, self.neg_a, out=out)
        return np.minimum(z, self.a, out=z)

    def update(self, s0, s1):
        """The rate limiter after a step: :func:`simulation_parts.slew_step` from the limited
        demands at its start and end `s0`, `s1` (rad)."""
        z0 = np.where(self.direction == 0, s0, self.value) if self.moving else s0
        gap = s1 - z0
        slewing = np.abs(gap) > self.rh
        if not slewing.any():  # direction 0 everywhere (value s1, never read while it is)
            if self.moving:
                self.direction, self.dirnz = np.zeros_like(self.direction), np.zeros_like(self.dirnz)
            self.moving = False
            return
        direction = np.where(slewing, np.sign(gap), 0.0)
        dR = direction * self.sr
        self.value = np.where(slewing, z0 + dR * self.h, s1)
        self.direction, self.dirnz, self.moving = direction, direction != 0, True
        self.ramps = self.value + dR * self.taus

    def block_commands(self, ud, steps):
        """The limited commands of a block whose demands are known (all members delayed).

        Parameters
        ----------
        ud : ndarray, shape (count, 3, N)
            Damper demand at ``t_k``, ``t_k + h/2`` and ``t_k + h`` of each step, rad.
        steps : int
            Steps of the block that are integrated (``count`` or, when the block holds the
            record's last step, which is only recorded, ``count - 1``).

        Returns
        -------
        z : ndarray, shape (count, 3, N)
            The damper's command at the stage times, rad.
        arl : ndarray of bool, shape (count, N), or None
            The rate limiter slews at the step's start (None: nowhere in the block).
        z_end : ndarray, shape (count, N)
            The command after each step's rate-limiter update at its end (the ideal
            actuator's surface stored in the delay line), rad.
        """
        count = ud.shape[0]
        s = self.clip(ud)
        self._peak_known(ud, steps)
        if not self.has_rate:
            return s, None, s[:, 2]
        z, arl, z_end, bad, j = s, None, s[:, 2], None, 0
        while j < count:
            if not self.moving:  # follows: a step changes that only where s moves > R_a h
                if bad is None:
                    bad = np.flatnonzero((np.abs(s[:steps, 2] - s[:steps, 0]) > self.rh).any(axis=1))
                later = bad[bad >= j]
                if not later.size:
                    break
                j = int(later[0])
            if self.moving:
                if arl is None:
                    z, arl, z_end = s.copy(), np.zeros(s.shape[::2], bool), s[:, 2].copy()
                z[j] = np.where(self.dirnz, self.ramps, s[j])
                arl[j] = self.dirnz
            if j == steps:
                break
            self.update(s[j, 0], s[j, 2])
            if self.moving and self.ideal:
                if arl is None:
                    z, arl, z_end = s.copy(), np.zeros(s.shape[::2], bool), s[:, 2].copy()
                z_end[j] = np.where(self.dirnz, self.ramps[0], s[j, 2])
            j += 1
        return z, arl, z_end

    def _peak_known(self, ud, steps):
        """The peak over a block's known demands (the last step of the record: t_k only)."""
        if steps:
            np.maximum(self.peak, np.abs(ud[:steps]).max(axis=(0, 1)), out=self.peak)
        if ud.shape[0] > steps:
            np.maximum(self.peak, np.abs(ud[steps, 0]), out=self.peak)

    def peak_stepped(self, count):
        """The peak over the demands the step loop stored for a block of `count` steps
        (slots not written this block hold zeros or values already counted)."""
        np.maximum(self.peak, np.abs(self.UD[:count]).max(axis=(0, 1)), out=self.peak)

    def feeder(self):
        """``f(src, inp, j, s, slot)``: actuator input ``u`` and demand ``u_d`` (rad) of step
        j of a block at stage time s (0, 1, 2) from the state's measurement (stage `slot`,
        0-3), as :func:`simulation_parts.measured` and :func:`simulation_parts.damper_command`."""
        Cv, kfb, line, UD, S = self.model.lin.Cv, self.model.lin.kfb, self.model.line, self.UD, self.S
        einsum, where, mul = np.einsum, np.where, np.multiply

        def feed(src, inp, j, s, slot):
            y = einsum("ni,ni->n", Cv, src.xp)
            if line is not None:
                y = where(line.delayed, inp.y[j, s], y)
            ud = mul(kfb, y, out=UD[j, slot])
            z = self.clip(ud, out=S[slot])
            if self.moving:
                z = where(self.dirnz, self.ramps[s], z)
            if slot == 0:
                self.z1 = z
            return inp.r[j, s] + z, ud

        return feed

    def after_step(self, j, X, inp):
        """The rate limiter's update at the end of step j of a block (state `X` after the
        step's projections), from the demand there (:func:`simulation_parts.integrate`)."""
        lin, line = self.model.lin, self.model.line
        y = np.einsum("ni,ni->n", lin.Cv, X.xp)
        if line is not None:
            y = np.where(line.delayed, inp.y[j, 2], y)
        ud_end = np.multiply(lin.kfb, y, out=self.UD[j, 4])
        self.update(self.S[0], self.clip(ud_end))

    def end_surface(self, inp, j):
        """The ideal actuator's surface at the step's end as a function of the new
        measurement (rad), after the rate limiter's update (:func:`simulation_parts._push`)."""
        model = self.model
        sv, lin, delayed = model.servo, model.lin, model.line.delayed

        def from_measurement(yk):
            y = np.where(delayed, inp.y[j, 2], yk)
            z = self.clip(np.multiply(lin.kfb, y, out=self.UD[j, 5]))
            if self.moving:
                z = np.where(self.dirnz, self.ramps[0], z)
            u = inp.r[j, 2] + z
            return np.minimum(np.maximum(u, -sv.trav), sv.trav) if sv.has_trav else u

        return from_measurement

    def record(self, rec, i, j):
        """The damper's records at record sample i (step j of the block, state-dependent)."""
        if "z" in rec:
            rec["z"][i] = self.z1
        rec["al"][i] = np.abs(self.UD[j, 0]) > self.a
        if self.has_rate:
            rec["arl"][i] = self.dirnz
