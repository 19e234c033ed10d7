"""A failed damper's command and the transient it causes (batched).

* **Hardover**: ``z(t) = sign min(R_a t, A)`` for ``t >= 0`` (a step to ``sign A`` when
  the damper command has no rate limit of its own).
* **Oscillatory**: ``A sin(w t)`` through the damper command's rate limiter: the sine
  itself where ``A w <= R_a``, else the output of an exact rate limiter fed with the sine
  (starting at zero), a triangle-like wave of smaller amplitude. The limited wave is
  computed on a grid of half the simulation step by the discrete limiter and
  interpolated linearly (error of order (step/2)^2 times the sine's curvature).

The damper loop is broken (its feedback is cut), the pilot does nothing, and the actuator
keeps its own lag, rate limit and travel: :func:`failure_transient` simulates the loop
through :func:`damper.analysis.simulation.simulate` with the failed command and takes the
extremes of the motion within ``[0, recognition time]``.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..model.loop import Hardware, Loop
from .response_inputs import Input
from .simulation import TimeHistory, simulate

#: The quantities a transient limits, with the TimeHistory series that holds each.
SERIES = {"load_factor": "load_factor", "pitch_rate": "q", "pitch_attitude": "theta", "angle_of_attack": "alpha"}

_NO_INPUT = Input("step", amplitude=0.0, start=0.0, name="failure")


def hardover_command(authority, rate, sign):
    """The hardover command ``sign min(R_a t, A)`` (rad) as a function of time.

    Parameters
    ----------
    authority, rate, sign : ndarray, shape (N,)
        A (rad), R_a (rad/s, inf: a step) and +1 or -1, per member of the flat batch.

    Returns
    -------
    callable
        ``f(t)`` for times t (s, shape (m,)) -> array (m, N), rad.
    """
    a, r, s = (np.asarray(x, dtype=float) for x in (authority, rate, sign))
    finite = np.isfinite(r)
    r_safe = np.where(finite, r, 0.0)

    def command(t):
        t = np.asarray(t, dtype=float)[:, None]
        ramp = np.where(finite, r_safe * t, np.where(t >= 0.0, np.inf, 0.0))
        return s * np.minimum(ramp, a)

    return command


def rate_limited_sine(authority, rate, frequency, grid_step, n_grid):
    """``A sin(w t)`` through an exact rate limiter, sampled on ``t_j = j grid_step``.

    The discrete limiter ``z_(j+1) = z_j + clip(A sin(w t_(j+1)) - z_j, -R_a dt, R_a dt)``
    starting at ``z_0 = 0``; members with ``A w <= R_a`` are the sine itself.

    Returns
    -------
    ndarray, shape (n_grid, N)
        rad.
    """
    a, r, w = (np.asarray(x, dtype=float) for x in (authority, rate, frequency))
    t = np.arange(n_grid)[:, None] * grid_step
    sine = a * np.sin(w * t)
    limited = (a * w > r)
    if not limited.any():
        return sine
    z = sine.copy()
    dz = np.where(np.isfinite(r), r, 0.0) * grid_step
    cols = np.nonzero(limited)[0]
    s, d = sine[:, cols], dz[cols]
    prev = np.zeros(cols.size)
    for j in range(1, n_grid):  # the Python loop runs over time only
        prev = prev + np.clip(s[j] - prev, -d, d)
        z[j, cols] = prev
    z[0, cols] = 0.0
    return z


def oscillatory_command(authority, rate, frequency, duration, step):
    """The oscillatory failure's command (rad) as a function of time (see the module notes).

    Parameters
    ----------
    authority, rate, frequency : ndarray, shape (N,)
        A (rad), R_a (rad/s, inf: none), w (rad/s).
    duration, step : float
        s: the simulated time and step (the grid is half the step).
    """
    a, r, w = (np.asarray(x, dtype=float) for x in (authority, rate, frequency))
    limited = a * w > r
    half = 0.5 * step
    n_grid = int(np.ceil(duration / half)) + 3
    table = rate_limited_sine(a, r, w, half, n_grid) if limited.any() else None

    def command(t):
        t = np.asarray(t, dtype=float)
        out = a * np.sin(w * t[:, None])
        if table is None:
            return out
        x = np.clip(t / half, 0.0, n_grid - 1.000001)
        j = np.floor(x).astype(int)
        f = (x - j)[:, None]
        interp = table[j] * (1.0 - f) + table[j + 1] * f
        return np.where(limited, interp, out)

    return command


def broken_loop(loop: Loop) -> Loop:
    """The loop after the damper has failed: the airframe and the actuator, no feedback."""
    return Loop(loop.airframe, Hardware(actuator=loop.hardware.actuator), 0.0)


@dataclass(frozen=True)
class Transient:
    """Extremes of the motion within the recognition time (arrays of the batch shape).

    Attributes
    ----------
    top, bottom : dict of ndarray
        Largest and smallest value of each quantity of :data:`SERIES`: load factor
        increment (g), pitch rate (rad/s), pitch-attitude change (rad), angle-of-attack
        change (rad), all from trim.
    peak : dict of ndarray
        The signed value of largest magnitude of each.
    """

    top: dict
    bottom: dict
    peak: dict

    def mirrored(self) -> "Transient":
        """The transient of the opposite command: the model is odd (symmetric limits, start
        in trim), so its motion is exactly the negative."""
        return Transient({k: -v for k, v in self.bottom.items()}, {k: -v for k, v in self.top.items()},
                         {k: -v for k, v in self.peak.items()})


def transient_of(h: TimeHistory) -> Transient:
    """The :class:`Transient` of a simulated record (its whole length)."""
    top, bottom, peak = {}, {}, {}
    for name, series in SERIES.items():
        x = getattr(h, series)
        top[name] = np.max(x, -1)
        bottom[name] = np.min(x, -1)
        peak[name] = np.where(top[name] >= -bottom[name], top[name], bottom[name])
    return Transient(top, bottom, peak)


def failure_transient(loop: Loop, command, *, duration, step, rate_limit=None, travel=None):
    """Simulate the broken loop driven by a failed damper's `command` (batched).

    Parameters
    ----------
    loop : Loop
        Batch shape ``S`` (its feedback hardware and gain are not used).
    command : callable
        ``f(t) -> (len(t), N)`` rad over the flattened batch.
    duration, step : float
        s; `duration` the recognition time.
    rate_limit, travel : array_like or None
        The actuator's limits (rad/s, rad).

    Returns
    -------
    Transient, TimeHistory
    """
    h = simulate(broken_loop(loop), _NO_INPUT, duration=duration, step=step, rate_limit=rate_limit, travel=travel,
                 failed_command=command)
    return transient_of(h), h
