"""Handling-qualities measures of the augmented aircraft (batched).

* low-order equivalent system of the pitch-rate response to the pilot command
  (pilot command summed with the damper at the actuator input), see
  :mod:`damper.measures.equivalent`;
* control anticipation parameter ``CAP = wn^2 / (n/alpha)`` with
  ``n/alpha = (V / g) (1/T_theta2)`` from the bare airframe at constant speed (equal to
  ``-Z_alpha / g`` when ``Z_delta`` = 0; MIL-F-8785C usage, from memory); for a
  longitudinal airframe that is its two-state short-period part (constant speed is the
  definition of n/alpha), while the equivalent fit fixes the airframe's own 1/T_theta2
  (:func:`damper.model.airframes.inverse_t_theta2`);
* pitch-attitude bandwidth and phase delay of ``theta / command = (q / command) / s``,
  with the command counted positive nose-up (the one convention,
  :func:`damper.model.airframe.nose_up_surface`), so that the attitude response starts
  from -90 deg.
"""

from __future__ import annotations

import numpy as np

from ..atmosphere import G0
from ..model import airframe as af
from ..model import airframes
from ..model.batch import batch_shape, flatten, map_arrays
from ..model.loop import Loop
from .equivalent import fit_equivalent_system, fit_frequencies

BANDWIDTH_GRID = np.logspace(-2.0, 3.0, 101)  # rad/s: the common part of each loop's grid
#: Largest phase step between neighbouring points of an attitude grid, rad (45 deg).
BANDWIDTH_STEP = np.deg2rad(45.0)
BANDWIDTH_PASSES = 6


def load_factor_per_alpha(d):
    """n/alpha, g per rad: ``(V / g) (1/T_theta2)`` of the bare airframe at constant speed.

    n/alpha is the steady normal-load-factor change per unit angle of attack at constant
    speed (references: MIL-F-8785C usage, from memory), so a longitudinal airframe gives
    the value of its two-state short-period part (the same derivatives, speed held).
    """
    sp = airframes.short_period_part(d)
    return np.asarray(sp.airspeed) / G0 * af.inverse_t_theta2(sp)


def control_anticipation(natural_frequency, d):
    """CAP = wn^2 / (n/alpha), (rad/s^2) per g."""
    return np.asarray(natural_frequency) ** 2 / load_factor_per_alpha(d)


def equivalent_system(loop: Loop, free_zero=False, w=None, phugoid=None):
    """Low-order equivalent system fit of every loop in the batch.

    Parameters
    ----------
    loop : Loop
        Any batch shape, either airframe model.
    free_zero : bool
        Fit 1/T_theta2 too (default: fixed at the airframe's,
        :func:`damper.model.airframes.inverse_t_theta2`).
    w : array_like, optional
        Fit frequencies, rad/s (default 30 from 0.1 to 10).
    phugoid : SecondOrderMode, optional
        Closed-loop phugoid of a longitudinal loop (:func:`damper.measures.modes.loop_modes`).
        When given, its known factor ``s (s + 1/T_theta1) / ((s - l1)(s - l2))`` is taken out of
        the response before the short-period form is fitted (:func:`phugoid_log_factor`);
        without it a phugoid inside the band stays in the data and shows in the mismatch.
        Ignored for a two-state airframe.

    Returns
    -------
    EquivalentFit
        Arrays with the loop's batch shape.
    """
    w = fit_frequencies() if w is None else np.asarray(w, dtype=float)
    shape = batch_shape(loop)
    log_h = pilot_log_response(loop, w).reshape(shape + (w.size,))
    if phugoid is not None and airframes.is_longitudinal(loop.airframe):
        log_h = log_h - phugoid_log_factor(loop, phugoid, w).reshape(shape + (w.size,))
    zero = np.broadcast_to(airframes.inverse_t_theta2(loop.airframe), shape)
    # a response that vanishes or is not finite (no control power) has no equivalent system
    bad = ~np.all(np.isfinite(log_h), -1) | ~np.isfinite(zero)
    if np.any(bad):
        log_h = np.where(bad[..., None], -np.log(1j * w + 1.0), log_h)
        zero = np.where(bad, 1.0, zero)
    fit = fit_equivalent_system(w, log_h, zero, free_zero=free_zero, log_response=True)
    if np.any(bad):
        from dataclasses import replace

        fit = replace(fit, converged=np.asarray(fit.converged) & ~bad)
    return usable_fit(fit, w)


def phugoid_log_factor(loop: Loop, phugoid, w):
    """``ln`` of the phugoid's known factor ``s (s + 1/T_theta1) / ((s - l1)(s - l2))`` at ``jw``.

    The pitch-rate response of a longitudinal loop with ideal hardware is exactly
    ``Kq s (s + 1/T_theta1)(s + 1/T_theta2) / (phugoid quadratic x short-period quadratic)``
    (the closed-loop characteristic quartic is the product of the two modal pairs), so
    dividing by this factor leaves the short-period form of the equivalent system: the form
    with phugoid terms of MIL-STD-1797A's pitch equivalent systems with the phugoid and
    1/T_theta1 held at known values (from memory). ``l1, l2`` are the phugoid's roots (1/s),
    ``1/T_theta1`` the bare airframe's (:func:`damper.model.longitudinal.inverse_t_theta1`).

    Returns
    -------
    ndarray of complex, shape (N, K)
        ``ln|F| + j arg F`` (flat batch), real arithmetic per element (batch independent).
    """
    from ..model.longitudinal import inverse_t_theta1

    flat, _ = flatten(loop)
    n = int(np.prod(batch_shape(loop))) if batch_shape(loop) else 1
    roots = np.asarray(phugoid.roots, dtype=complex).reshape(n, 2)
    a = np.broadcast_to(inverse_t_theta1(flat.airframe), (n,))[:, None]
    c0 = np.real(roots[:, 0] * roots[:, 1])[:, None]
    c1 = -np.real(roots[:, 0] + roots[:, 1])[:, None]
    w = np.broadcast_to(np.asarray(w, dtype=float), (n, np.shape(w)[-1]))
    with np.errstate(divide="ignore", invalid="ignore"):
        quad_re, quad_im = c0 - w * w, c1 * w
        out = np.empty(w.shape, complex)
        out.real = np.log(w) + 0.5 * np.log(a * a + w * w) - 0.5 * np.log(quad_re * quad_re + quad_im * quad_im)
        out.imag = 0.5 * np.pi + np.arctan2(w, a) - np.arctan2(quad_im, quad_re)
    return out


def pilot_log_response(loop: Loop, w):
    """``ln(q/c)(jw)``: natural log of pitch rate per nose-up pilot command (flat batch).

    Computed in real arithmetic from the factored forward path and loop
    (:mod:`damper.model.rational`): ``ln|q/c| = ln|F| - ln|1 + L|`` and
    ``arg(q/c) = arg F - arg(1 + L)``, with ``1 + L`` formed from ``|L|`` and ``arg L``.
    Every operation is elementwise and real, so a loop's answer is the same bit for bit
    whatever batch it is evaluated in.

    Parameters
    ----------
    loop : Loop
        Any batch shape (flattened, ``N`` loops).
    w : ndarray, shape (K,) or (N, K)
        rad/s (a common grid, or one per loop).

    Returns
    -------
    ndarray of complex, shape (N, K)
        ``ln|q/c| + j arg(q/c)``, the phase on a continuous branch.
    """
    from ..model.rational import evaluate_both, factored_forward, factored_loop

    fwd, _ = factored_forward(loop)
    fl, _ = factored_loop(loop)
    w = np.asarray(w, dtype=float)
    grid = np.ascontiguousarray(np.broadcast_to(w, (fl.size, w.shape[-1])))
    (l_mag, l_arg), (f_mag, f_arg) = evaluate_both(fl, fwd, grid)
    with np.errstate(over="ignore", invalid="ignore"):
        rho = np.exp(np.minimum(l_mag, 700.0))
        re = 1.0 + rho * np.cos(l_arg)
        im = rho * np.sin(l_arg)
        out = np.empty(grid.shape, complex)
        out.real = f_mag - 0.5 * np.log(re * re + im * im)
        out.imag = f_arg - np.arctan2(im, re)
    return out


#: A fit whose frequency lies this far outside the fitted band, or whose damping ratio is
#: above this, is degenerate (the response is effectively first order there).
OUTSIDE_BAND = 10.0
MAX_EQUIVALENT_DAMPING = 10.0


def usable_fit(fit, w):
    """Mark degenerate or unconverged fits: their damping, frequency and delay become NaN.

    A low-order equivalent system that does not converge, or that runs to a frequency a
    decade outside the fitted band or a damping ratio above 10, does not describe the
    aircraft; requirements on it then count as not met (undefined), and ``converged`` is False.
    """
    from dataclasses import replace

    wn = fit.natural_frequency
    ok = (
        np.asarray(fit.converged, bool)
        & (wn >= w[0] / OUTSIDE_BAND)
        & (wn <= w[-1] * OUTSIDE_BAND)
        & (fit.damping_ratio <= MAX_EQUIVALENT_DAMPING)
    )
    nan = np.where(ok, 1.0, np.nan)
    return replace(
        fit,
        damping_ratio=fit.damping_ratio * nan,
        natural_frequency=wn * nan,
        time_delay=fit.time_delay * nan,
        converged=ok,
    )


def attitude_grid(loop: Loop, passes=BANDWIDTH_PASSES):
    """Per-loop frequencies for the attitude response, rad/s, shape (N, k) (flat batch).

    The common grid :data:`BANDWIDTH_GRID` plus the points placed from the loop's own
    factors (:func:`damper.measures.freqset.factor_points`) within its range; then, for a
    few passes, a point between every two neighbours where the closed-loop attitude phase
    moves by more than :data:`BANDWIDTH_STEP` (a lightly damped closed-loop mode), so
    that the phase is unwrapped correctly.
    """
    from ..model.rational import factored_loop
    from .freqset import factor_points

    flat, _ = flatten(loop)
    fl, _ = factored_loop(flat)
    n = fl.size
    lo, hi = BANDWIDTH_GRID[0], BANDWIDTH_GRID[-1]
    parts = [np.broadcast_to(BANDWIDTH_GRID, (n, BANDWIDTH_GRID.size))]
    for coef in (fl.num, fl.den):
        if coef.shape[1]:
            pts = factor_points(coef).reshape(n, -1)
            parts.append(np.where((pts > lo) & (pts < hi), pts, np.nan))
    w = _rows_unique(np.concatenate(parts, -1))
    for _ in range(passes):
        h = attitude_response(flat, w)
        step = np.abs(np.angle(h[:, 1:] / h[:, :-1]))
        big = step > BANDWIDTH_STEP
        if not big.any():
            break
        mid = np.where(big, np.sqrt(w[:, 1:] * w[:, :-1]), np.nan)
        w = _rows_unique(np.concatenate([w, mid], -1))
    return w


def _rows_unique(w):
    """Sort each row, drop NaN and repeats, and pad short rows with points near their top."""
    w = np.sort(w, -1)
    dup = np.zeros(w.shape, bool)
    dup[:, 1:] = w[:, 1:] <= w[:, :-1]
    w = np.sort(np.where(dup, np.nan, w), -1)
    count = np.isfinite(w).sum(-1)
    k = int(count.max())
    w = w[:, :k]
    # pad: continue each short row geometrically above its last point (never used as a
    # crossing unless the response really crosses there)
    last = w[np.arange(w.shape[0]), count - 1]
    j = np.arange(k)[None, :] - count[:, None] + 1
    return np.where(np.isfinite(w), w, last[:, None] * 1.001 ** np.maximum(j, 1))


def attitude_response(loop: Loop, w):
    """theta per nose-up pilot command, ``(q/c)(jw) / (jw)`` (rad per rad), shape (N, k).

    ``loop`` is a flat batch of N loops; ``w`` has shape (N, k) or (1, k). Built from
    :func:`pilot_log_response` in real arithmetic (a loop's answer does not depend on its
    batch).
    """
    w = np.asarray(w, dtype=float)
    log_q = pilot_log_response(loop, w)
    with np.errstate(over="ignore", under="ignore"):
        mag = np.exp(log_q.real) / w
    phase = log_q.imag - 0.5 * np.pi
    out = np.empty(log_q.shape, complex)
    out.real = mag * np.cos(phase)
    out.imag = mag * np.sin(phase)
    return out


def pitch_bandwidth(loop: Loop):
    """Pitch-attitude bandwidth and phase delay of every loop in the batch (arrays of the batch shape)."""
    from .bandwidth import attitude_bandwidth

    flat, shape = flatten(loop)
    w = attitude_grid(flat)
    result = attitude_bandwidth(lambda x: attitude_response(flat, x), w)
    return map_arrays(result, lambda a: a.reshape(shape))
