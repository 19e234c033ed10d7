"""Blocks of RK4 steps as one matrix product while no limit acts, member by member.

Between the actuator's limits the simulated loop is linear: with the actuator input ``u``
(rad) and the gust angle ``alpha_g`` (rad) known at the stage times of a block of steps
(:class:`damper.analysis.simulation_rk4._Inputs`: the delayed measurement is read from the
history, and with it the damper's command after its authority and own rate limit, or a
failed damper's command is prescribed), the classical RK4 step is an affine
map of the state, and so is a block of steps. This module builds, once per simulation,
the matrix that gives from the state at a block's start (and the block's inputs) the
state at each step's start, the quantities the limits act on at every stage (actuator
rate demand ``b (u - delta)``, rad/s; surface, rad; second-order actuator rate, rad/s)
and the measurement and its derivative stored in the delay line.

Each member (run of the batch) is judged on its own: a member whose block inputs are known
(its delay is at least :data:`STEPS` steps, or its damper's command is prescribed) and at
none of whose stages a limit is reached takes the product's result; the others are
integrated step by step (:func:`damper.analysis.simulation_rk4._run_block`), exactly as
without this module. The blocks are :data:`STEPS` long and aligned on the step grid
whatever the batch, so which runs share a batch does not change a run's results (for a
batch of a given size: as in the step-by-step loop, numpy's batched products can round a
batch of another size differently in the last bit). Batches above
``simulation_parts.MATMUL_BATCH`` runs are stepped throughout; with a damper authority the
blocks are used only when every run of the batch has its block inputs (its limited
command is computed once per block for the whole batch).

The product sums in another order than the step-by-step loop, so results agree with it
to rounding (docs/responses.md gives the measured differences), not bit for bit; the
switch :data:`damper.analysis.simulation_rk4.LINEAR_BLOCKS` turns it off.
"""

from __future__ import annotations

import numpy as np

from . import simulation_parts as sp

#: Steps per block: fixed, so that the blocks are the same for a member in any batch
#: (a divisor of ``simulation_parts.CHUNK``; a member needs a delay of at least this many
#: steps, or a prescribed command, to be advanced by blocks).
STEPS = 8


def eligible(model: sp.Model, h, prescribed) -> np.ndarray:
    """Members whose block inputs are known before the block: bool, shape (N,).

    Parameters
    ----------
    model : Model
    h : float
        Step, s.
    prescribed : bool
        A failed damper's command is prescribed (the feedback is cut).

    Notes
    -----
    A member reads its measurement at ``t_k + h - T``; every sample that read needs is
    stored before a block of ``b`` steps when ``b <= -floor(1 - T/h)`` (the delay line's
    look-ahead, :func:`simulation_parts.delay_line`, for this member alone).
    """
    if prescribed:
        return np.ones(model.n_b, bool)
    line = model.line
    if line is None:
        return np.zeros(model.n_b, bool)
    return line.delayed & (line.ahead >= STEPS)


#: Inputs per step: u and alpha_g at t_k, t_k + h/2 and t_k + h.
N_IN = 6


def _rates(model: sp.Model, X, u, ag):
    """Derivatives of the limit-free loop for states `X` (N, n_x, m) and inputs `u`, `ag`
    (N, m) (rad): the formulas of :func:`simulation_parts.derivative` without the limits."""
    sv, lin = model.servo, model.lin
    na = sv.na
    dl = u if sv.kind == "ideal" else X[:, 0]
    dX = np.empty_like(X)
    if sv.kind == "lag":
        dX[:, 0] = sv.bw[:, None] * (u - dl)
    elif sv.kind == "second":
        dX[:, 0] = X[:, 1]
        dX[:, 1] = sv.w2[:, None] * (u - dl) - sv.zw2[:, None] * X[:, 1]
    dX[:, na:] = lin.A @ X[:, na:] + lin.Bv[:, :, None] * dl[:, None, :] + lin.Ev[:, :, None] * ag[:, None, :]
    return dX


def _step_map(model: sp.Model, h):
    """One RK4 step as a matrix ``(N, n_x + n_obs, n_x + 6)`` acting on ``[x; u_1, g_1,
    u_2, g_2, u_4, g_4]``: rows the state at the step's end, then the observed quantities
    (module notes; :func:`_layout`)."""
    n_b, nx = model.n_b, model.servo.na + model.lin.A.shape[-1]
    cols = nx + N_IN
    X0 = np.zeros((n_b, nx, cols))
    X0[:, :, :nx] = np.eye(nx)
    e = np.eye(cols)[nx:]
    u1, g1, u2, g2, u4, g4 = (np.broadcast_to(row, (n_b, cols)) for row in e)
    k1 = _rates(model, X0, u1, g1)
    S2 = X0 + 0.5 * h * k1
    k2 = _rates(model, S2, u2, g2)
    S3 = X0 + 0.5 * h * k2
    k3 = _rates(model, S3, u2, g2)
    S4 = X0 + h * k3
    k4 = _rates(model, S4, u4, g4)
    Xn = X0 + h / 6.0 * (k1 + 2.0 * (k2 + k3) + k4)
    rows = [Xn]
    kind = model.servo.kind
    if kind == "lag":
        rows += [k[:, 0:1] for k in (k1, k2, k3, k4)] + [S[:, 0:1] for S in (S2, S3, S4)]
    elif kind == "second":
        rows += [S[:, 1:2] for S in (S2, S3, S4)] + [S[:, 0:1] for S in (S2, S3, S4)]
    line = model.line
    if line is not None:
        xp = Xn[:, model.servo.na:]
        dl = u4 if kind == "ideal" else Xn[:, 0]
        rows.append(np.einsum("ni,nic->nc", model.lin.Cv, xp)[:, None])
        rows.append((np.einsum("ni,nic->nc", line.CA, xp) + line.CB[:, None] * dl
                     + line.CE[:, None] * g4)[:, None])
    return np.concatenate(rows, axis=1)


def _layout(model: sp.Model):
    """Observed rows per step: (number of rate rows, of surface rows, of delay-line rows)."""
    kind = model.servo.kind
    rate = {"lag": 4, "second": 3}.get(kind, 0)
    surf = 3 if kind in ("lag", "second") else 0
    return rate, surf, 0 if model.line is None else 2


class Blocks:
    """The block matrix of :func:`block_matrix` for :data:`STEPS` steps, its sizes and the
    members it may advance (:func:`eligible`)."""

    def __init__(self, model: sp.Model, h, members):
        self.model, self.steps, self.members = model, STEPS, members
        self.nx = model.servo.na + model.lin.A.shape[-1]
        self.n_rate, self.n_surf, self.n_line = _layout(model)
        self.row = self.nx + self.n_rate + self.n_surf + self.n_line
        self.big = block_matrix(_step_map(model, h), self.nx, self.steps)


def block_matrix(step, nx, steps):
    """`steps` RK4 steps: rows ``[x_m; obs_m]`` for m = 0 .. steps (``x_m`` the state at
    step m's start, ``obs_m`` its observations; the last one unused), columns ``[x_0;
    inputs of step 0; ...]``, shape ``(N, (steps + 1) row, n_x + 6 steps)``."""
    n_b, row = step.shape[0], step.shape[1]
    cols = nx + N_IN * steps
    big = np.zeros((n_b, (steps + 1) * row, cols))
    S = np.zeros((n_b, nx, cols))
    S[:, :, :nx] = np.eye(nx)
    Ms, Mi = step[:, :, :nx], step[:, :, nx:]
    for m in range(steps + 1):
        R = Ms @ S
        if m < steps:
            R[:, :, nx + N_IN * m:nx + N_IN * (m + 1)] += Mi
        big[:, m * row:m * row + nx] = S
        big[:, m * row + nx:(m + 1) * row] = R[:, nx:]
        S = R[:, :nx]
    return big


def _valid(blocks: Blocks, Z, inp, count):
    """Members at none of whose stages a limit is reached (strict margins; NaN fails):
    bool, shape (N,)."""
    model, nx = blocks.model, blocks.nx
    sv, n_b = model.servo, model.n_b
    ok = np.ones(n_b, bool)
    if sv.kind == "ideal":
        return ok if not sv.has_trav else (np.abs(inp.u) < sv.trav).all(axis=(0, 1))
    if sv.has_trav:
        lo = nx + blocks.n_rate
        x0 = np.concatenate([Z[:, :, 0], Z[:, :count, lo:lo + blocks.n_surf].reshape(n_b, -1)], 1)
        ok &= (np.abs(x0) < sv.trav[:, None]).all(axis=1)
    if sv.has_rate and sv.kind == "lag":
        ok &= (np.abs(Z[:, :count, nx:nx + 4]) <= sv.R[:, None, None]).all(axis=(1, 2))
    elif sv.has_rate:  # second order: below the rate flag's threshold at every stage and step end
        vel = np.concatenate([Z[:, :, 1], Z[:, :count, nx:nx + 3].reshape(n_b, -1)], 1)
        ok &= (np.abs(vel) < (sv.R * (1.0 - 1e-12))[:, None]).all(axis=1)
    return ok


def actuator_input(model: sp.Model, inp):
    """The actuator input ``u`` of a block's stages (rad, shape ``(count, 3, N)``): the
    known one, else ``r + k y`` from the delayed measurement (right for the delayed
    members only, the ones :func:`eligible` admits)."""
    if inp.u is not None:
        return inp.u
    return inp.r + model.lin.kfb * inp.y


def attempt(blocks: Blocks, X, inp, b0, b1):
    """Steps ``b0 .. b1-1`` as one product for every member.

    Parameters
    ----------
    blocks : Blocks
    X : ndarray, shape (N, n_x)
        State at step b0 (actuator rad, rad/s; airframe, filters and theta in their units,
        docs/theory.md); not changed.
    inp : damper.analysis.simulation_rk4._Inputs
        The block's inputs (rad): the actuator input is known before the block for a
        failed damper's command, or for a delayed run (with an authority, the damper's
        limited command is part of it).
    b0, b1 : int
        First step, one past the last.

    Returns
    -------
    Z : ndarray, shape (N, count + 1, row)
        Each step's state and observations (module notes).
    ok : ndarray of bool, shape (N,)
        The members that take `Z`: eligible, finite inputs, no limit reached.
    """
    model, nx, row, count = blocks.model, blocks.nx, blocks.row, b1 - b0
    n_b = model.n_b
    u = actuator_input(model, inp)
    ok = blocks.members & np.isfinite(u).all(axis=(0, 1))
    u = np.where(ok, u, 0.0)  # stale samples of the members that read ahead of the line
    v = np.empty((n_b, nx + N_IN * count, 1))
    v[:, :nx, 0] = X
    w = np.stack([u[:, 0], inp.g[:, 0], u[:, 1], inp.g[:, 1], u[:, 2], inp.g[:, 2]], -1)
    v[:, nx:, 0] = w.transpose(1, 0, 2).reshape(n_b, -1)
    Z = (blocks.big[:, :(count + 1) * row, :nx + N_IN * count] @ v).reshape(n_b, count + 1, row)
    if model.servo.kind == "ideal" and getattr(inp, "end_differs", False):
        # an ideal actuator's surface at a step's end is not u where the damper's rate
        # limiter starts or stops slewing there: those runs are stepped
        ok &= ~(inp.u_end != inp.u[:, 2]).any(axis=0)
    inp_u = inp if inp.u is not None else _WithInput(inp, u)
    return Z, ok & _valid(blocks, Z, inp_u, count)


class _WithInput:
    """A block's inputs with the actuator input of :func:`actuator_input`."""

    def __init__(self, inp, u):
        self.u, self.y = u, inp.y


def write(blocks: Blocks, Z, X, state_cols, rec, inp, b0, b1, sub, members):
    """The product's results of `members` (an index or ``slice(None)``): state at step
    `b1` into `X`, the records of every `sub`-th step (state, surface, rad, rate, rad/s,
    damper demand, rad, limit flags cleared) and the delay line's samples.

    The records of the block's inputs are the caller's (the same values either way).
    """
    model, nx, row, count = blocks.model, blocks.nx, blocks.row, b1 - b0
    n_b, sv = model.n_b, model.servo
    ks = np.arange(b0, b1)
    sel = ks % sub == 0
    idx = ks[sel] // sub
    m = members
    Zs = Z[m][:, :count][:, sel]
    cols = (idx[:, None], np.arange(n_b)[m][None, :])
    for key, col in state_cols:
        rec[key][cols] = Zs[:, :, col].T
    if sv.kind == "ideal":
        rec["surface"][cols] = actuator_input(model, inp)[sel, 0][:, m]
    else:
        rec["surface"][cols] = Zs[:, :, 0].T
        rec["rate"][cols] = Zs[:, :, nx if sv.kind == "lag" else 1].T
    rec["rl"][cols] = False
    rec["pl"][cols] = False
    if inp.ud is None:
        y = np.einsum("ni,nmi->nm", model.lin.Cv[m], Zs[:, :, sv.na:nx])
        line = model.line
        if line is not None:  # a delayed member's demand is read from the history
            y = np.where(line.delayed[m][:, None], inp.y[sel, 0][:, m].T, y)
        rec["ud"][cols] = (model.lin.kfb[m][:, None] * y).T
    line = model.line
    if line is not None:
        slots = (ks + 1) % line.length
        buf = line.buf.reshape(line.length, 2, n_b)
        buf[slots[:, None], 0, np.arange(n_b)[m][None, :]] = Z[m][:, :count, row - 2].T
        buf[slots[:, None], 1, np.arange(n_b)[m][None, :]] = Z[m][:, :count, row - 1].T
    X[m] = Z[m][:, count, :nx]
