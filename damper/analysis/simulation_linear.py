"""Blocks of RK4 steps as one matrix product while no limit acts (optional, last bits differ).

Between the actuator's limits the simulated loop is linear: with the actuator input ``u``
(rad) and the gust angle ``alpha_g`` (rad) known at the stage times of a block of steps
(:class:`damper.analysis.simulation_rk4._Inputs`: the delayed measurement is read from the
history, and with it the damper's command after its authority and own rate limit, or a
failed damper's command is prescribed), the classical RK4 step is an affine
map of the state, and so is a block of steps. This module builds, once per simulation,
the matrix that gives from the state at a block's start (and the block's inputs) the
state at each step's start, the quantities the limits act on at every stage (actuator
rate demand ``b (u - delta)``, rad/s; surface, rad; second-order actuator rate, rad/s)
and the measurement and its derivative stored in the delay line. A block is accepted
when none of those quantities reaches its limit; otherwise it is integrated step by step
(:func:`damper.analysis.simulation_rk4._run_block`), exactly as without this module.

The arithmetic differs from the step-by-step loop (sums in another order), so results
agree with it to rounding, not bit for bit; hence it is off unless
:data:`damper.analysis.simulation_rk4.LINEAR_BLOCKS` is set (docs/performance.md gives
the measured differences).
"""

from __future__ import annotations

import numpy as np

from . import simulation_parts as sp

#: Most steps per block (the matrix grows with its square).
MAX_STEPS = 24
#: Fewest steps per block (shorter blocks, as when the delay is within a step or two of
#: the step, gain nothing over the step-by-step loop).
MIN_STEPS = 4
#: Largest block matrix, bytes (fewer steps per block for large batches).
MAX_BYTES = 16_000_000


def steps_for(model: sp.Model, steps) -> int:
    """Steps per block: at most `steps` and :data:`MAX_STEPS`, the matrix within
    :data:`MAX_BYTES`; 0 when fewer than :data:`MIN_STEPS` fit."""
    nx = model.servo.na + model.lin.A.shape[-1]
    row = nx + sum(_layout(model))
    steps = min(steps, MAX_STEPS)
    while steps >= MIN_STEPS and 8 * model.n_b * (steps + 1) * row * (nx + N_IN * steps) > MAX_BYTES:
        steps -= 1
    return steps if steps >= MIN_STEPS else 0
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
    """The block matrix of :func:`block_matrix` and its sizes."""

    def __init__(self, model: sp.Model, h, steps):
        self.model, self.steps = model, steps
        self.nx = model.servo.na + model.lin.A.shape[-1]
        self.n_rate, self.n_surf, self.n_line = _layout(model)
        self.row = self.nx + self.n_rate + self.n_surf + self.n_line
        self.big = block_matrix(_step_map(model, h), self.nx, steps)


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
    """Whether no limit acts anywhere in the block (strict margins; NaN fails)."""
    model, nx = blocks.model, blocks.nx
    sv, n_b = model.servo, model.n_b
    if sv.kind == "ideal":
        return not sv.has_trav or bool((np.abs(inp.u) < sv.trav).all())
    if sv.has_trav:
        lo = nx + blocks.n_rate
        x0 = np.concatenate([Z[:, :, 0], Z[:, :count, lo:lo + blocks.n_surf].reshape(n_b, -1)], 1)
        if not (np.abs(x0) < sv.trav[:, None]).all():
            return False
    if sv.has_rate and sv.kind == "lag":
        return bool((np.abs(Z[:, :count, nx:nx + 4]) <= sv.R[:, None, None]).all())
    if sv.has_rate:  # second order: below the rate flag's threshold at every stage and step end
        vel = np.concatenate([Z[:, :, 1], Z[:, :count, nx:nx + 3].reshape(n_b, -1)], 1)
        return bool((np.abs(vel) < (sv.R * (1.0 - 1e-12))[:, None]).all())
    return True


def advance(blocks: Blocks, X, state_cols, rec, inp, b0, b1, sub) -> bool:
    """Steps ``b0 .. b1-1`` as one product when no limit acts.

    Parameters
    ----------
    blocks : Blocks
    X : ndarray, shape (N, n_x)
        State at step b0 (actuator rad, rad/s; airframe, filters and theta in their units,
        docs/theory.md); updated in place to the state at step b1.
    state_cols : list of (str, int)
        Record name and state column of the recorded states.
    rec : dict of ndarray
        Records, shape ``(n_out, N)``; every `sub`-th step's state, surface (rad) and rate
        (rad/s) are written (the inputs' records by the caller).
    inp : damper.analysis.simulation_rk4._Inputs
        The block's inputs (rad): the actuator input known before the block (a failed
        damper's command, or every run delayed; with an authority, the damper's limited
        command is part of it).
    b0, b1, sub : int
        First step, one past the last, steps per record sample.

    Returns
    -------
    bool
        False, with nothing changed, when a limit acts in the block (or an input is not
        finite); the caller then steps it.
    """
    model, nx, row, count = blocks.model, blocks.nx, blocks.row, b1 - b0
    n_b, sv = model.n_b, model.servo
    if count > blocks.steps or inp.u is None or inp.end_differs or not np.isfinite(inp.u).all():
        return False  # (end_differs: an ideal actuator's surface at a step's end is not u)
    v = np.empty((n_b, nx + N_IN * count, 1))
    v[:, :nx, 0] = X
    w = np.stack([inp.u[:, 0], inp.g[:, 0], inp.u[:, 1], inp.g[:, 1], inp.u[:, 2], inp.g[:, 2]], -1)
    v[:, nx:, 0] = w.transpose(1, 0, 2).reshape(n_b, -1)
    Z = (blocks.big[:, :(count + 1) * row, :nx + N_IN * count] @ v).reshape(n_b, count + 1, row)
    if not _valid(blocks, Z, inp, count):
        return False
    ks = np.arange(b0, b1)
    sel = ks % sub == 0
    idx = ks[sel] // sub
    for key, col in state_cols:
        rec[key][idx] = Z[:, :count][:, sel, col].T
    if sv.kind == "ideal":
        rec["surface"][idx] = inp.u[sel, 0]
    else:
        rec["surface"][idx] = Z[:, :count][:, sel, 0].T
        rec["rate"][idx] = Z[:, :count][:, sel, nx if sv.kind == "lag" else 1].T
    if inp.ud is None:
        y = np.einsum("ni,nmi->nm", model.lin.Cv, Z[:, :count][:, sel, sv.na:nx])
        rec["ud"][idx] = (model.lin.kfb[:, None] * y).T
    line = model.line
    if line is not None:
        slots = (ks + 1) % line.length
        buf = line.buf.reshape(line.length, 2, n_b)
        buf[slots, 0] = Z[:, :count, row - 2].T
        buf[slots, 1] = Z[:, :count, row - 1].T
    X[...] = Z[:, count, :nx]
    return True
