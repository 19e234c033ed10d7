"""The loop's ln|L| and arg L evaluated in parts (damper.model.rational): the magnitude alone,
the phase alone, and a loop with its pilot's forward path at once, each the same bits as the
full evaluation, and all equal to the factored form's complex product written out here."""

import numpy as np
import pytest

from damper.model.airframe import Derivatives
from damper.model.elements import Delay, Lag, LeadLag, Washout
from damper.model.loop import Hardware, Loop
from damper.model.rational import (evaluate, evaluate_both, evaluate_logmag, evaluate_phase, factored_forward,
                                   factored_loop)


def _loops(n=200, seed=3):
    """Invented airframes and gains with an actuator, gyro lag, washout, lead-lag and a delay."""
    rng = np.random.default_rng(seed)
    d = Derivatives(airspeed=rng.uniform(40, 250, n), Z_alpha=-rng.uniform(80, 1500, n), Z_q=np.zeros(n),
                    Z_delta=-rng.uniform(0, 40, n), M_alpha=-rng.uniform(1, 30, n),
                    M_alpha_dot=-rng.uniform(0, 1, n), M_q=-rng.uniform(0.4, 4, n),
                    M_delta=rng.choice([-1.0, 1.0], n) * rng.uniform(5, 50, n))
    hw = Hardware(actuator=Lag(0.05), sensor=Lag(0.01), washout=Washout(1.0), delay=Delay(np.asarray(0.03), 2),
                  filters=(LeadLag(0.2, 0.05),))
    return Loop(d, hw, rng.uniform(0.05, 0.6, n))


def _by_hand(fl, w):
    """``k prod n_i(jw) / prod d_j(jw) exp(-jwT)`` as a complex product (the factored form of
    docs/theory.md, section 3, written out)."""
    s = 1j * w
    out = fl.gain[:, None] * np.exp(-s * fl.delay[:, None])
    for coef, sign in ((fl.num, 1), (fl.den, -1)):
        for i in range(coef.shape[1]):
            f = coef[0, i][:, None] + coef[1, i][:, None] * s + coef[2, i][:, None] * s * s
            out = out * f**sign
    return out


@pytest.fixture(scope="module")
def parts():
    loop = _loops()
    fl, _ = factored_loop(loop)
    fwd, _ = factored_forward(loop)
    w = np.broadcast_to(np.logspace(-2, 2.5, 40), (fl.size, 40)).copy()
    return fl, fwd, w


def test_magnitude_and_phase_alone_are_the_full_evaluation_bit_for_bit(parts):
    fl, _, w = parts
    logmag, phase = evaluate(fl, w)
    assert np.array_equal(evaluate_logmag(fl, w), logmag)
    assert np.array_equal(evaluate_phase(fl, w), phase)
    # Source: the complex product of the factors, written above (phase modulo 2 pi)
    ref = _by_hand(fl, w)
    np.testing.assert_allclose(logmag, np.log(np.abs(ref)), rtol=0, atol=1e-10)
    np.testing.assert_allclose(np.angle(np.exp(1j * (phase - np.angle(ref)))), 0.0, atol=1e-10)


def test_loop_and_forward_path_at_once_are_two_evaluations_bit_for_bit(parts):
    from damper.model.rational import _leads

    fl, fwd, w = parts
    assert _leads(fwd, fl) and not _leads(fl, fwd)  # the shared path is the one taken here
    (l_mag, l_arg), (f_mag, f_arg) = evaluate_both(fl, fwd, w)
    for got, want in zip((l_mag, l_arg, f_mag, f_arg), (*evaluate(fl, w), *evaluate(fwd, w))):
        assert np.array_equal(got, want)
    np.testing.assert_allclose(f_mag, np.log(np.abs(_by_hand(fwd, w))), rtol=0, atol=1e-10)  # Source: as above
    # a part whose factors do not lead (the loop as a "part" of its forward path): two evaluations
    (a_mag, a_arg), (b_mag, b_arg) = evaluate_both(fwd, fl, w)
    assert np.array_equal(a_mag, f_mag) and np.array_equal(b_arg, l_arg)
