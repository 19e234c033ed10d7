"""The damper's authority and its own rate limit in the time responses.

Oracles: the responses without an authority (bit for bit when the authority never binds),
scipy's solve_ivp on the saturated closed loop written here from the equations of
docs/theory.md (sections 1 and 8), and the definitions of docs/responses.md (the limited
command is the clipped demand; the rate limiter is the discrete one at the step). All
airframe numbers are invented, except the textbook general-aviation example.
"""

import math

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from damper.analysis.response import Input, measure, respond, simulate
from damper.model.airframe import Derivatives
from damper.model.airframes import state_matrices
from damper.model.elements import Delay, Lag, SecondOrderLag, Washout
from damper.model.loop import Hardware, Loop
from .conftest import textbook_longitudinal

DEG = math.pi / 180.0

#: Two invented conditions, M_delta of both signs (a tail-first layout has M_delta > 0).
BOTH_SIGNS = Derivatives(
    airspeed=np.array([180.0, 110.0]),
    Z_alpha=np.array([-380.0, -240.0]),
    Z_q=np.array([0.0, -1.5]),
    Z_delta=np.array([-25.0, 20.0]),
    M_alpha=np.array([-15.0, -8.0]),
    M_alpha_dot=np.array([-0.3, -0.2]),
    M_q=np.array([-0.9, -0.6]),
    M_delta=np.array([-22.0, 16.0]),
)
DOUBLET = Input("doublet", amplitude=2 * DEG, start=0.2, half_period=0.45)

HARDWARE = {
    "lag+washout+delay": Hardware(actuator=Lag(0.04), washout=Washout(1.0), delay=Delay(np.asarray(0.025), 2)),
    "ideal": Hardware(),
    "second-order": Hardware(actuator=SecondOrderLag(40.0, 0.7), sensor=Lag(0.01), washout=Washout(1.5)),
}


def airframes():
    return {"short period": BOTH_SIGNS, "longitudinal": textbook_longitudinal()}


OLD_SERIES = ("alpha", "q", "theta", "load_factor", "surface", "surface_rate", "command", "pilot", "gust_alpha",
              "rate_limited", "position_limited", "damper_demand")


@pytest.mark.parametrize("airframe", ["short period", "longitudinal"])
@pytest.mark.parametrize("hw", list(HARDWARE))
def test_large_authority_changes_nothing_bit_for_bit(airframe, hw):
    # [derived] an authority the demand never reaches, with a damper rate limit it never
    # reaches (the default: the actuator's 40 deg/s), leaves every sample as it was.
    loop = Loop(airframes()[airframe], HARDWARE[hw], 0.4)
    kw = dict(duration=2.0, step=1e-3, rate_limit=40 * DEG, travel=6 * DEG)
    free = respond(loop, DOUBLET, **kw)
    big = respond(loop, DOUBLET, authority=0.5, **kw)
    assert big.authority_rate_limit == 40 * DEG
    for a, b in ((free.augmented, big.augmented), (free.bare, big.bare)):
        for name in OLD_SERIES:
            np.testing.assert_array_equal(getattr(a, name), getattr(b, name), err_msg=name)
        np.testing.assert_array_equal(b.damper, a.damper_demand)
    for name in ("time_to_half", "settling_time", "overshoot", "peak_pitch_rate", "peak_load_factor",
                 "time_at_rate_limit", "time_at_position_limit"):
        np.testing.assert_array_equal(getattr(free.augmented_measures, name),
                                      getattr(big.augmented_measures, name), err_msg=name)
    m = big.augmented_measures
    # with an authority the peak demand is taken over every Runge-Kutta stage, so it is at
    # least the samples' and above them by the sampling error, below (w h)^2 / 8 = 1e-4 for
    # w up to 30 rad/s at 1 ms [derived]
    sampled = free.augmented_measures.peak_damper_demand
    assert np.all(m.peak_damper_demand >= sampled) and np.all(m.peak_damper_demand <= sampled * (1 + 1e-4))
    assert np.all(m.time_at_authority_limit == 0) and np.all(m.time_at_authority_rate_limit == 0)
    assert np.all(m.peak_damper_demand > 0.1 * DEG)  # the damper does work (the check can fail)


@pytest.mark.parametrize("airframe", ["short period", "longitudinal"])
def test_small_authority_holds_the_damper_command(airframe):
    # Definition (docs/responses.md): without its own rate limit the damper's command is
    # its demand clipped to +/- authority; the time at the limit counts the samples where
    # the demand exceeds it, times the step.
    authority = 0.2 * DEG
    loop = Loop(airframes()[airframe], HARDWARE["lag+washout+delay"], 0.4)
    res = respond(loop, DOUBLET, duration=2.0, rate_limit=40 * DEG, authority=authority, authority_rate_limit=None)
    h, m = res.augmented, res.augmented_measures
    assert np.max(np.abs(h.damper)) <= authority
    np.testing.assert_array_equal(h.damper, np.clip(h.damper_demand, -authority, authority))
    np.testing.assert_allclose(m.time_at_authority_limit,
                               np.sum(np.abs(h.damper_demand) > authority, -1) * h.step, rtol=1e-12)
    assert np.all(m.time_at_authority_limit > 0.05)
    np.testing.assert_array_equal(m.peak_damper, authority)
    # the command at the actuator is pilot plus the limited damper command
    np.testing.assert_allclose(h.command, h.pilot + h.damper, rtol=0, atol=1e-15)
    # the bare airframe has no damper: nothing to limit
    assert np.all(res.bare_measures.time_at_authority_limit == 0)


def _saturated_closed_loop(d, K, authority, amplitude, width, t_eval):
    """Oracle: the airframe (docs/theory.md s.1 and s.8) with an ideal actuator, ideal sensor
    and no delay, delta = sign(M_delta) c + clip(-sign(M_delta) K q, -A, A), a pilot pulse c
    of `amplitude` on [0, width), integrated by solve_ivp (DOP853, rtol 1e-11) in two
    pieces (the pulse, then free)."""
    A, B = (np.asarray(m) for m in state_matrices(d))
    names = ("u", "alpha", "q", "theta") if A.shape[-1] == 4 else ("alpha", "q")
    iq = names.index("q")
    sgn = np.sign(float(d.M_delta))

    def rhs(c):
        return lambda t, x: A @ x + B[:, 0] * (sgn * c + np.clip(-sgn * K * x[iq], -authority, authority))

    kw = dict(method="DOP853", rtol=1e-11, atol=1e-13, max_step=0.01)
    on = t_eval < width
    first = solve_ivp(rhs(amplitude), (0.0, width), np.zeros(A.shape[-1]), t_eval=t_eval[on], dense_output=True, **kw)
    second = solve_ivp(rhs(0.0), (width, t_eval[-1]), first.sol(width), t_eval=t_eval[~on], **kw)
    y = np.concatenate([first.y, second.y], -1)
    return y[names.index("alpha")], y[iq]


@pytest.mark.parametrize("which", ["nose-down surface (M_delta < 0)", "nose-up surface (M_delta > 0)", "longitudinal"])
def test_saturated_damper_against_an_independent_integration(which):
    if which == "longitudinal":
        d = textbook_longitudinal()
    else:
        i = 0 if which.startswith("nose-down") else 1
        d = Derivatives(**{f: np.asarray(getattr(BOTH_SIGNS, f))[i] for f in Derivatives.__dataclass_fields__})
    K, authority, amplitude, width = 0.5, 0.3 * DEG, 3 * DEG, 0.5
    loop = Loop(d, Hardware(), K)
    pulse = Input("pulse", amplitude=amplitude, start=0.0, duration=width)
    h = simulate(loop, pulse, duration=4.0, step=1e-3, authority=authority)
    t_sat = float(measure(h).time_at_authority_limit)
    assert 0.2 < t_sat < 3.0  # saturated for a while, not throughout (the check can fail)
    alpha, q = _saturated_closed_loop(d, K, authority, amplitude, width, h.time)
    # tolerance 3e-6 of the peak: RK4 at 1 ms on a right-hand side with kinks where the
    # saturation begins and ends (local error O(h^2) there; measured 2e-7 to 1.1e-6, and
    # 4 to 8 times less at 0.5 ms)
    assert np.max(np.abs(h.q - q)) < 3e-6 * np.max(np.abs(q))
    assert np.max(np.abs(h.alpha - alpha)) < 3e-6 * np.max(np.abs(alpha))


def _discrete_rate_limiter(s, step, rate):
    """Reference (docs/responses.md): the command moves to the limited demand when it is
    within rate x step, else by rate x step toward it; s has the batch axes first."""
    z = np.zeros_like(s)
    for k in range(1, s.shape[-1]):
        z[..., k] = z[..., k - 1] + np.clip(s[..., k] - z[..., k - 1], -rate * step, rate * step)
    return z


@pytest.mark.parametrize("airframe", ["short period", "longitudinal"])
def test_authority_rate_limit(airframe):
    authority, rate = 0.6 * DEG, 3 * DEG
    loop = Loop(airframes()[airframe], HARDWARE["lag+washout+delay"], 0.4)
    res = respond(loop, DOUBLET, duration=2.0, rate_limit=40 * DEG, authority=authority, authority_rate_limit=rate)
    h, m = res.augmented, res.augmented_measures
    slope = np.abs(np.diff(h.damper, axis=-1)) / h.step
    assert np.max(slope) <= rate * (1 + 1e-9)  # the limit's definition (rounding of z +/- R_a h)
    assert np.max(np.abs(h.damper)) <= authority * (1 + 1e-12)
    assert np.all(m.time_at_authority_rate_limit > 0.05)
    # the definition, applied to the recorded demand: equal to rounding (the demand at a
    # step's end is read through the delay line's other tap, 1e-16 relative)
    s = np.clip(h.damper_demand, -authority, authority)
    np.testing.assert_allclose(h.damper, _discrete_rate_limiter(s, h.step, rate), rtol=0, atol=1e-12)
    # a rate limit alone (an unbounded authority) still limits the rate
    alone = simulate(loop, DOUBLET, duration=2.0, rate_limit=40 * DEG, authority=np.inf, authority_rate_limit=rate)
    assert np.max(np.abs(np.diff(alone.damper, axis=-1))) / alone.step <= rate * (1 + 1e-9)
    assert np.all(measure(alone).time_at_authority_limit == 0)
