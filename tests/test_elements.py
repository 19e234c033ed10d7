"""Each hardware element: its exact response equals its state-space realisation.

Oracle: python-control evaluates the realisation (``StateSpace(s)``) independently.
"""

import control
import numpy as np
import pytest

from damper.model.elements import Delay, Lag, LeadLag, Notch, SecondOrderLag, Washout, pade_coefficients

W = np.logspace(-2, 3, 41)
ELEMENTS = [
    Lag(0.05),
    SecondOrderLag(40.0, 0.6),
    Washout(1.5),
    LeadLag(0.2, 0.05),
    LeadLag(0.0, 0.1),
    Notch(60.0, 0.02, 0.5),
]


@pytest.mark.parametrize("element", ELEMENTS, ids=lambda e: type(e).__name__)
def test_response_matches_state_space(element):
    A, B, C, D = element.state_space()
    sys = control.ss(A, B, C, D)
    want = np.array([complex(sys(1j * w)) for w in W])
    got = element.response(1j * W)
    np.testing.assert_allclose(got, want, rtol=1e-10, atol=1e-14)
    assert A.shape == (element.n_states, element.n_states)


@pytest.mark.parametrize("element", ELEMENTS, ids=lambda e: type(e).__name__)
def test_factors_match_the_response(element):
    # the factored view (gain, numerator and denominator polynomials of degree <= 2) used by
    # the margins and handling measures is the same transfer function [derived]
    s = 1j * W
    k, num, den = element.factors()
    got = k * np.ones_like(s)
    for c0, c1, c2 in num:
        got = got * (c0 + c1 * s + c2 * s * s)
    for c0, c1, c2 in den:
        got = got / (c0 + c1 * s + c2 * s * s)
    np.testing.assert_allclose(got, element.response(s), rtol=1e-12)
    assert all(len(f) == 3 for f in (*num, *den))


def test_batched_parameters():
    lag = Lag(np.array([0.01, 0.1, 1.0]))
    A, B, C, D = lag.state_space()
    assert A.shape == (3, 1, 1)
    from damper.model.batch import expand

    r = expand(lag).response(1j * W[None, :])
    # [derived] |1/(jwT+1)| at w = 1/T is 1/sqrt(2)
    r_corner = Lag(np.array([0.01, 0.1, 1.0])).response(1j / np.array([0.01, 0.1, 1.0]))
    np.testing.assert_allclose(np.abs(r_corner), 1 / np.sqrt(2), rtol=1e-12)
    assert r.shape == (3, W.size)


@pytest.mark.parametrize("order", [1, 2, 3, 5])
def test_pade_matches_python_control(order):
    # Oracle: control.pade gives the (n, n) Pade approximant of exp(-T s).
    T = 0.04
    num, den = control.pade(T, order)
    want = control.tf(num, den)
    A, B, C, D = Delay(np.asarray(T), order).state_space()
    sys = control.ss(A, B, C, D)
    for w in (0.1, 3.0, 30.0, 300.0):
        assert complex(sys(1j * w)) == pytest.approx(complex(want(1j * w)), rel=1e-9)
    # all-pass: unit magnitude at every frequency [derived]
    assert abs(complex(sys(1j * 77.0))) == pytest.approx(1.0, rel=1e-12)


def test_pade_coefficients():
    # Standard result: the (2,2) Pade of exp(-x) is (1 - x/2 + x^2/12)/(1 + x/2 + x^2/12)
    np.testing.assert_allclose(pade_coefficients(2), [1.0, 0.5, 1.0 / 12.0])


def test_delay_response_is_exact():
    d = Delay(np.asarray(0.1), 2)
    np.testing.assert_allclose(d.response(1j * W), np.exp(-0.1j * W), rtol=1e-14)
