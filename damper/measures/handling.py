"""Handling-qualities measures of the augmented aircraft (batched).

* low-order equivalent system of the pitch-rate response to the pilot command
  (pilot command summed with the damper at the actuator input), see
  :mod:`damper.measures.equivalent`;
* control anticipation parameter ``CAP = wn^2 / (n/alpha)`` with
  ``n/alpha = (V / g) (1/T_theta2)`` from the bare airframe (equal to
  ``-Z_alpha / g`` when ``Z_delta`` = 0; MIL-F-8785C usage, from memory);
* pitch-attitude bandwidth and phase delay of ``theta / command = (q / command) / s``,
  with the command counted positive nose-up (``-sign(M_delta)`` times the surface
  command) so that the attitude response starts from -90 deg.
"""

from __future__ import annotations

import numpy as np

from ..atmosphere import G0
from ..model import airframe as af
from ..model.batch import batch_shape, flatten, map_arrays
from ..model.loop import Loop, pilot_pitch_rate_response
from .equivalent import fit_equivalent_system, fit_frequencies

BANDWIDTH_GRID = np.logspace(-2.0, 3.0, 501)  # rad/s


def load_factor_per_alpha(d: af.Derivatives):
    """n/alpha, g per rad: ``(V / g) (1/T_theta2)`` of the bare airframe."""
    return np.asarray(d.airspeed) / G0 * af.inverse_t_theta2(d)


def control_anticipation(natural_frequency, d: af.Derivatives):
    """CAP = wn^2 / (n/alpha), (rad/s^2) per g."""
    return np.asarray(natural_frequency) ** 2 / load_factor_per_alpha(d)


def equivalent_system(loop: Loop, free_zero=False, w=None):
    """Low-order equivalent system fit of every loop in the batch.

    Returns
    -------
    EquivalentFit
        Arrays with the loop's batch shape.
    """
    w = fit_frequencies() if w is None else np.asarray(w, dtype=float)
    shape = batch_shape(loop)
    H = pilot_pitch_rate_response(loop, w)
    H = np.broadcast_to(H, shape + (w.size,))
    zero = np.broadcast_to(af.inverse_t_theta2(loop.airframe), shape)
    fit = fit_equivalent_system(w, H, zero, free_zero=free_zero)
    return usable_fit(fit, w)


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


def pitch_bandwidth(loop: Loop):
    """Pitch-attitude bandwidth and phase delay of every loop in the batch (arrays of the batch shape)."""
    from .bandwidth import attitude_bandwidth

    flat, shape = flatten(loop)

    # pilot command counted positive nose-up: -sign(M_delta) times the surface command,
    # so the attitude response starts at -90 deg like the criterion assumes
    sense = -np.sign(np.asarray(flat.airframe.M_delta, dtype=float))[:, None]

    def response(w):  # w: (N, k) rad/s, one row per flat batch member
        return sense * pilot_pitch_rate_response(flat, w) / (1j * w)

    result = attitude_bandwidth(response, BANDWIDTH_GRID)
    return map_arrays(result, lambda a: a.reshape(shape))
