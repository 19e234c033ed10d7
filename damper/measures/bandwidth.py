"""Pitch-attitude bandwidth and phase delay from the theta/command response.

Method
------
The bandwidth criterion of the MIL-STD-1797A guidance (recalled from
memory) is evaluated on the pitch-ATTITUDE response to the pilot command,
``H(jw) = theta/command``:

* ``omega_180`` (phase crossover, rad/s): the lowest frequency at which the
  phase, unwrapped continuously from the low-frequency end of the grid,
  reaches -180 deg;
* ``omega_BW,phase`` (rad/s): the lowest frequency at which that phase
  reaches -135 deg;
* ``omega_BW,gain`` (rad/s): defined here as the frequency at which the gain
  equals ``G(omega_180) + 6 dB`` (exactly 6 dB), taking the crossing nearest
  below ``omega_180`` (scanning the grid downwards from ``omega_180``, the
  first interval where the gain rises to that level);
* ``omega_BW = min(omega_BW,phase, omega_BW,gain)`` (rad/s), ignoring an
  undefined (nan) member, so that it is the phase bandwidth when
  ``omega_180`` does not exist;
* phase delay ``tau_p = -(Phi(2 omega_180) + 180 deg) / (57.3 * 2 omega_180)``
  (s).  The exact factor 180/pi is used in place of 57.3, i.e.
  ``tau_p = -(phi(2 omega_180) + pi) / (2 omega_180)`` with ``phi`` in rad.

The phase branch is fixed by the principal value (-180, 180] deg of the
phase at the lowest grid frequency and continued by ``np.unwrap`` along the
grid, so the grid must be dense enough for the phase to change by less than
180 deg between neighbouring points, and the command sign convention must make
the low-frequency attitude response lag by about 90 deg (not lead).

Crossings are located on the grid for all systems at once and then refined
by 40 steps of vectorised bisection in log-frequency, all brackets together,
through calls to the caller's ``response`` function; the phase at each new
point is put on the branch nearest to the bracket's unwrapped phases.  The
phase at ``2 omega_180`` is continued from ``omega_180`` along a short
log-spaced sub-grid.  Undefined quantities are nan.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

from ..quantities import quantity

__all__ = ["AttitudeBandwidth", "attitude_bandwidth"]

BISECTION_ITERATIONS = 40
#: Gain margin defining the gain bandwidth, dB (from memory of the guidance).
GAIN_MARGIN_DB = 6.0
#: Phase levels, rad.
PHASE_CROSSOVER = -np.pi  # -180 deg
PHASE_BANDWIDTH = -0.75 * np.pi  # -135 deg


@dataclass(frozen=True)
class AttitudeBandwidth:
    """Bandwidth measures of a batch of theta/command responses, shape (N,).

    Attributes
    ----------
    phase_crossover : numpy.ndarray
        ``omega_180``, rad/s; nan when the phase does not reach -180 deg on
        the grid (or already starts beyond it).
    bandwidth_phase : numpy.ndarray
        ``omega_BW,phase`` (phase = -135 deg), rad/s; nan if not on the grid.
    bandwidth_gain : numpy.ndarray
        ``omega_BW,gain`` (gain = G(omega_180) + 6 dB, nearest crossing below
        omega_180), rad/s; nan when omega_180 is nan or no crossing exists.
    bandwidth : numpy.ndarray
        ``omega_BW = min(bandwidth_phase, bandwidth_gain)`` ignoring nan,
        rad/s.
    phase_delay : numpy.ndarray
        ``tau_p``, s; nan when omega_180 is nan.
    """

    phase_crossover: np.ndarray = quantity("rad/s", key="attitude_phase_crossover_rad_s")
    bandwidth_phase: np.ndarray = quantity("rad/s")
    bandwidth_gain: np.ndarray = quantity("rad/s")
    bandwidth: np.ndarray = quantity("rad/s")
    phase_delay: np.ndarray = quantity("s")


def _nearest_branch(raw, reference):
    """Add the multiple of 2 pi to ``raw`` (rad) that brings it nearest ``reference``."""
    return raw + 2.0 * np.pi * np.round((reference - raw) / (2.0 * np.pi))


def _first_down_crossing(values, level):
    """Grid interval of the first crossing of ``level`` from above, per row.

    Returns ``(valid, lo)``: the crossing lies in ``[lo, lo + 1]`` with
    ``values[lo] > level >= values[lo + 1]``; ``valid`` is False when the
    row never reaches the level or starts at or below it.
    """
    reached = values <= level
    first = np.argmax(reached, axis=1)
    valid = reached.any(axis=1) & (first > 0)
    lo = np.where(valid, first - 1, 0)
    return valid, lo


def _final_point(log_lo, log_hi, f_lo, f_hi, level):
    """Linear interpolation of the last bracket (log-frequency), rad/s."""
    with np.errstate(invalid="ignore", divide="ignore"):
        t = (f_lo - level) / (f_lo - f_hi)
    t = np.where(np.isfinite(t), np.clip(t, 0.0, 1.0), 0.5)
    return np.exp(log_lo + t * (log_hi - log_lo))


#: Points evaluated per system and call during refinement (up to): a bisection tree of depth d
#: costs one call of ``2**d - 1`` frequencies instead of d calls of one, and walks to the very
#: midpoints the one-at-a-time bisection would have chosen.
TREE_POINTS = 256


def _tree_depth(n_sys: int) -> int:
    """Bisection steps taken per call of the response: deep for few systems, 1 for many."""
    per_system = max(1, TREE_POINTS // max(1, n_sys))
    return int(np.clip(np.floor(np.log2(per_system + 1)), 1, 8))


def _tree_midpoints(a, b, depth):
    """Every midpoint a ``depth``-step bisection of ``[a, b]`` can visit, heap order, (N, 2**depth - 1)."""
    lo, hi = a[:, None], b[:, None]
    levels = []
    for _ in range(depth):
        mid = 0.5 * (lo + hi)
        levels.append(mid)
        lo = np.stack([lo, mid], axis=-1).reshape(lo.shape[0], -1)
        hi = np.stack([mid, hi], axis=-1).reshape(hi.shape[0], -1)
    return np.concatenate(levels, axis=1)


def _bisect(call, valid, safe_w, bracket, level, value):
    """``BISECTION_ITERATIONS`` bisection steps in log-frequency, several per response call.

    ``bracket = (a, b, fa, fb)``: log-frequency ends (ln rad/s) and the measure at them, shape
    (N,). ``value(h, fa, fb, level)`` turns the response ``h`` at a midpoint into the measure
    there and whether the crossing lies above the midpoint. The midpoints, and so the result,
    are those of one step at a time: each is ``0.5 * (a + b)`` of the bracket it halves, and
    the response of a system does not depend on the other frequencies in the call.
    """
    a, b, fa, fb = bracket
    rows = np.arange(a.shape[0])
    depth = _tree_depth(a.shape[0])
    done = 0
    while done < BISECTION_ITERATIONS:
        d = min(depth, BISECTION_ITERATIONS - done)
        mids = _tree_midpoints(a, b, d)
        h = call(np.where(valid[:, None], np.exp(mids), safe_w[:, None]))
        pos = np.zeros(a.shape[0], dtype=int)
        for step in range(d):
            node = (1 << step) - 1 + pos
            m = mids[rows, node]
            fm, right = value(h[rows, node], fa, fb, level)
            a, fa = np.where(right, m, a), np.where(right, fm, fa)
            b, fb = np.where(right, b, m), np.where(right, fb, fm)
            pos = 2 * pos + right
        done += d
    return a, b, fa, fb


@dataclass(frozen=True)
class _Grid:
    """The response on the grid, shape (N, nw): frequencies (rad/s) and their logs, unwrapped phase
    (rad), gain (dB); and ``safe_w`` (N,), rad/s, a harmless frequency for rows with nothing to refine."""

    w: np.ndarray
    log_w: np.ndarray
    phase: np.ndarray
    gain_db: np.ndarray
    safe_w: np.ndarray


def _phase_value(h, fa, fb, level):
    """Phase at a midpoint (rad) on the branch of its bracket, and whether the crossing lies above."""
    pm = _nearest_branch(np.angle(h), 0.5 * (fa + fb))
    return pm, pm > level


def _gain_value(h, fa, fb, level):
    """Gain at a midpoint (dB), and whether the crossing lies above it."""
    gm = 20.0 * np.log10(np.abs(h))
    return gm, gm >= level


def _phase_crossing(call, grid: _Grid, level):
    """Lowest frequency (rad/s) where the unwrapped phase reaches ``level`` (rad); nan if none."""
    rows = np.arange(grid.phase.shape[0])
    valid, lo = _first_down_crossing(grid.phase, level)
    a, b = grid.log_w[rows, lo].copy(), grid.log_w[rows, lo + 1].copy()
    pa, pb = grid.phase[rows, lo].copy(), grid.phase[rows, lo + 1].copy()
    a, b, pa, pb = _bisect(call, valid, grid.safe_w, (a, b, pa, pb), level, _phase_value)
    return np.where(valid, _final_point(a, b, pa, pb, level), np.nan)


def _gain_bandwidth(call, grid: _Grid, w180):
    """Frequency (rad/s) of gain G(omega_180) + 6 dB, the crossing nearest below omega_180."""
    n_sys, nw = grid.gain_db.shape
    rows = np.arange(n_sys)
    has180 = np.isfinite(w180)
    w180_safe = np.where(has180, w180, grid.safe_w)
    g180 = 20.0 * np.log10(np.abs(call(w180_safe[:, None])[:, 0]))
    level_g = g180 + GAIN_MARGIN_DB
    candidate = (grid.w < w180_safe[:, None]) & (grid.gain_db >= level_g[:, None])
    any_cand = candidate.any(axis=1) & has180
    lo = np.where(any_cand, nw - 1 - np.argmax(candidate[:, ::-1], axis=1), 0)
    hi_idx = np.minimum(lo + 1, nw - 1)
    a = grid.log_w[rows, lo].copy()
    b = np.minimum(grid.log_w[rows, hi_idx], np.log(w180_safe))
    ga = grid.gain_db[rows, lo].copy()
    gb = np.where(grid.log_w[rows, hi_idx] < np.log(w180_safe), grid.gain_db[rows, hi_idx], g180)
    a, b, ga, gb = _bisect(call, any_cand, grid.safe_w, (a, b, ga, gb), level_g, _gain_value)
    return np.where(any_cand, _final_point(a, b, ga, gb, level_g), np.nan)


def _phase_delay(call, w180, w180_safe):
    """``tau_p`` (s) from the phase at 2 omega_180, continued from omega_180 along a short sub-grid."""
    sub = w180_safe[:, None] * np.exp2(np.linspace(0.0, 1.0, 65))[None, :]
    sub_phase = np.unwrap(np.angle(call(sub)), axis=1)
    sub_phase = sub_phase + 2.0 * np.pi * np.round((PHASE_CROSSOVER - sub_phase[:, :1]) / (2.0 * np.pi))
    phi2 = sub_phase[:, -1]
    return np.where(np.isfinite(w180), -(phi2 + np.pi) / (2.0 * w180_safe), np.nan)


def attitude_bandwidth(
    response: Callable[[np.ndarray], np.ndarray], w_grid
) -> AttitudeBandwidth:
    """Bandwidth, phase crossover and phase delay of theta/command responses.

    Parameters
    ----------
    response : callable
        ``response(w)`` with ``w`` a real array of frequencies, rad/s, of
        shape (N, k) (one row per system, N the flat batch size) returns the
        complex pitch-attitude response to the pilot command (e.g. rad per
        unit of command) of shape (N, k).  The first call passes the grid (a
        common grid as shape (1, nw)); the callable must broadcast it over its N
        systems (NumPy broadcasting does this for expressions such as
        ``K / (1j*w * (1j*w + a[:, None]))``).
    w_grid : array_like
        Shape (nw,) (one grid for every system) or (N, nw) (a grid per system):
        strictly increasing positive frequencies, rad/s, dense enough that the
        phase moves by less than 180 deg between neighbours.

    Returns
    -------
    AttitudeBandwidth
        Fields of shape (N,): ``phase_crossover`` (rad/s),
        ``bandwidth_phase`` (rad/s), ``bandwidth_gain`` (rad/s),
        ``bandwidth`` (rad/s) and ``phase_delay`` (s); nan where undefined.

    Notes
    -----
    Crossings are searched on ``w_grid`` only: a crossing below its first or above
    its last frequency is reported as nan.
    """
    w_grid = np.asarray(w_grid, dtype=float)
    if w_grid.ndim not in (1, 2) or w_grid.shape[-1] < 2:
        raise ValueError("w_grid must be (nw,) or (N, nw) with at least 2 frequencies (rad/s)")
    if not np.all(np.isfinite(w_grid)) or np.any(w_grid[..., 0] <= 0.0) or np.any(np.diff(w_grid, axis=-1) <= 0.0):
        raise ValueError("w_grid must be finite, positive and strictly increasing (rad/s)")

    h_grid = np.asarray(response(w_grid if w_grid.ndim == 2 else w_grid[None, :]))
    if h_grid.ndim == 1:
        h_grid = h_grid[None, :]
    nw = w_grid.shape[-1]
    if h_grid.ndim != 2 or h_grid.shape[1] != nw:
        raise ValueError(f"response returned shape {h_grid.shape}, expected (N, {nw})")
    w_rows = np.broadcast_to(w_grid, (h_grid.shape[0], nw))

    def call(w):
        out = np.asarray(response(w))
        return out if out.shape == w.shape else np.broadcast_to(out, w.shape)

    grid = _Grid(
        w=w_rows,
        log_w=np.log(w_rows),
        phase=np.unwrap(np.angle(h_grid), axis=1),
        gain_db=20.0 * np.log10(np.abs(h_grid)),
        safe_w=w_rows[:, 0],
    )
    w180 = _phase_crossing(call, grid, PHASE_CROSSOVER)
    w_bw_phase = _phase_crossing(call, grid, PHASE_BANDWIDTH)
    w180_safe = np.where(np.isfinite(w180), w180, grid.safe_w)
    w_bw_gain = _gain_bandwidth(call, grid, w180)
    tau_p = _phase_delay(call, w180, w180_safe)

    with np.errstate(invalid="ignore"):
        bandwidth = np.fmin(w_bw_phase, w_bw_gain)
    return AttitudeBandwidth(
        phase_crossover=w180,
        bandwidth_phase=w_bw_phase,
        bandwidth_gain=w_bw_gain,
        bandwidth=bandwidth,
        phase_delay=tau_p,
    )
