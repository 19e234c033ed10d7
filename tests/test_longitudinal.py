"""The four-state longitudinal airframe: equations, transfer functions, coefficients, phugoid."""

from dataclasses import replace

import control
import numpy as np
import pytest

from damper.atmosphere import G0, RHO0
from damper.measures.handling import load_factor_per_alpha
from damper.measures.modes import bare_modes, bare_phugoid, bare_short_period
from damper.model import airframe as af
from damper.model import airframes
from damper.model.longitudinal import (
    LongitudinalDerivatives,
    from_coefficients,
    inverse_t_theta2,
    load_factor_row,
    pitch_rate_factors,
    pitch_rate_polynomials,
    pitch_rate_response,
    short_period_part,
    state_matrices,
    transfer_polynomials,
    trim_lift_coefficient,
    with_speed_terms,
)

from .conftest import TEXTBOOK_GA, random_derivatives, random_longitudinal, textbook_ga_inputs, textbook_longitudinal



def _equations(d, x, delta):
    """x' from the equations of issue 20 as written (alpha' first, then q'), one member."""
    u, alpha, q, theta = x
    g, gam, v = d.gravity, d.flight_path_angle, d.airspeed
    du = d.X_u * u + d.X_alpha * alpha - g * np.cos(gam) * theta + d.X_delta * delta
    da = (d.Z_u * u + d.Z_alpha * alpha + (v + d.Z_q) * q - g * np.sin(gam) * theta + d.Z_delta * delta) / v
    dq = d.M_u * u + d.M_alpha * alpha + d.M_alpha_dot * da + d.M_q * q + d.M_delta * delta
    return np.array([du, da, dq, q])


def test_state_matrices_are_the_equations(rng):
    # [derived] A x + B delta equals the equations of issue 20 evaluated directly, for
    # random states, in climb and descent.
    n = 6
    d = random_longitudinal(rng, n, climb=True)
    A, B = state_matrices(d)
    for i in range(n):
        di = LongitudinalDerivatives(**{k: np.asarray(v)[i] if np.ndim(v) else v for k, v in d.__dict__.items()})
        for _ in range(3):
            x, delta = rng.normal(size=4), rng.normal()
            np.testing.assert_allclose(A[i] @ x + B[i, :, 0] * delta, _equations(di, x, delta), rtol=1e-13, atol=1e-13)


def test_transfer_polynomials_equal_the_state_space(rng):
    # Oracle: python-control's state space evaluated at complex frequencies; and numpy's
    # characteristic polynomial of A.
    d = random_longitudinal(rng, 8, unstable_fraction=0.3, climb=True)
    A, B = state_matrices(d)
    tp = transfer_polynomials(d)
    s = np.array([0.05j, 0.3 + 1.1j, 4j, -2.0 + 9j])
    for i in range(8):
        np.testing.assert_allclose(tp.denominator[i], np.poly(A[i])[::-1], rtol=1e-12, atol=1e-12)
        sys = control.ss(A[i], B[i], np.eye(4), np.zeros((4, 1)))
        for k, name in enumerate(("u", "alpha", "q", "theta")):
            want = np.array([complex(sys(x)[k, 0]) for x in s])
            num = np.polynomial.polynomial.polyval(s, getattr(tp, name)[i])
            den = np.polynomial.polynomial.polyval(s, tp.denominator[i])
            np.testing.assert_allclose(num / den, want, rtol=1e-10)
    # q = s theta exactly [derived]
    np.testing.assert_array_equal(tp.q[..., 1:], tp.theta[..., :3])
    assert np.all(tp.q[..., 0] == 0)


def test_pitch_rate_factors_multiply_to_the_polynomials(rng):
    # [derived] the factored form (the s of q = s theta, the theta numerator, the quartic
    # from its roots) equals the polynomials; checked at 200 frequencies, 1e-12 relative.
    d = random_longitudinal(rng, 30, unstable_fraction=0.3, climb=True)
    num, den = pitch_rate_factors(d)
    assert len(num) == 2 and len(den) == 2
    w = np.logspace(-4, 4, 200)
    s = 1j * w[:, None]

    def product(factors):
        out = 1.0
        for c0, c1, c2 in factors:
            out = out * (c0 + c1 * s + c2 * s * s)
        return out

    want = pitch_rate_response(d, s)
    np.testing.assert_allclose(product(num) / product(den), want, rtol=1e-12)
    # a batch mixing the three structures of cancellation (none; one root, Z_u = M_u = 0;
    # two roots, every speed term zero), checked against the uncancelled polynomials
    mixed = replace(
        d,
        Z_u=np.where(np.arange(30) % 3 > 0, 0.0, d.Z_u),
        M_u=np.where(np.arange(30) % 3 > 0, 0.0, d.M_u),
        X_u=np.where(np.arange(30) % 3 > 1, 0.0, d.X_u),
        X_alpha=np.where(np.arange(30) % 3 > 1, 0.0, d.X_alpha),
        X_delta=np.where(np.arange(30) % 3 > 1, 0.0, d.X_delta),
        flight_path_angle=0.0,
    )
    np.testing.assert_array_equal(pitch_rate_polynomials(mixed).cancelled, np.arange(30) % 3)
    num, den = pitch_rate_factors(mixed)
    tp = transfer_polynomials(mixed)
    full = np.polynomial.polynomial.polyval(s, tp.q.T, tensor=False) / np.polynomial.polynomial.polyval(
        s, tp.denominator.T, tensor=False
    )
    np.testing.assert_allclose(product(num) / product(den), full, rtol=1e-12)
    # every factor is real and of degree at most two (complex pairs combined)
    for f in (*num, *den):
        assert all(np.isrealobj(c) for c in f)


def test_textbook_general_aviation_example_four_state_roots():
    # Source: Nelson, Flight Stability and Automatic Control, 2nd ed., ch. 4, the
    # general-aviation example (from memory): full-model short period about -2.5 +/- 2.6 i,
    # phugoid about -0.017 +/- 0.213 i. Tolerances: short period 0.05 1/s (the book's
    # rounded M_q, as in test_airframe.py); phugoid 0.001 1/s (the book rounds to three
    # decimals and its speed derivatives to two or three significant figures).
    m = bare_modes(textbook_longitudinal())
    sp, ph = m.short_period.roots, m.phugoid.roots
    assert sp[0].real == pytest.approx(-2.5, abs=0.05) and abs(sp[0].imag) == pytest.approx(2.6, abs=0.05)
    assert ph[0].real == pytest.approx(-0.017, abs=0.001) and abs(ph[0].imag) == pytest.approx(0.213, abs=0.001)
    assert not m.ambiguous and not m.phugoid_ambiguous
    # [derived] the phugoid's measures from its roots
    p = bare_phugoid(textbook_longitudinal())
    assert p.period == pytest.approx(2 * np.pi / abs(ph[0].imag), rel=1e-12)
    assert p.time_to_half == pytest.approx(np.log(2) / -ph[0].real, rel=1e-12)
    assert np.isnan(p.time_to_double)
    assert p.damping_ratio == pytest.approx(-ph[0].real / abs(ph[0]), rel=1e-12)


def _textbook_coefficients(**extra):
    # Source: Nelson, 2nd ed., ch. 4 general-aviation example inputs (conftest.textbook_ga_inputs);
    # speed terms from memory: CD_alpha = 0.33, CL_u = CD_u = Cm_u = CT_u = 0 (low speed,
    # thrust effects neglected in the book).
    return from_coefficients(**textbook_ga_inputs(), **{**dict(CL_u=0.0, CD_u=0.0, Cm_u=0.0, CT_u=0.0, CD_alpha=0.33),
                                                         **extra})


def test_textbook_speed_derivatives_from_coefficients():
    # Source: Nelson ch. 4 dimensional derivatives (from memory): X_u = -0.045 1/s,
    # Z_u = -0.369 1/s, X_w = 0.036 1/s, M_u = 0. X_u and Z_u within 2 % (the book rounds);
    # X_w within 6 %: the book rounds the trim lift coefficient to 0.41 (it is 0.406 here),
    # and X_w = (CL0 - CD_alpha) Q/u0 amplifies that to 5 % [derived].
    d = _textbook_coefficients()
    assert d.X_u == pytest.approx(-0.045, rel=0.02)
    assert d.Z_u == pytest.approx(-0.369, rel=0.02)
    assert d.X_alpha / d.airspeed == pytest.approx(0.036, rel=0.06)
    assert d.M_u == 0
    # and the published roots from the coefficients (tolerances as above, phugoid 0.002 1/s
    # for the coefficient rounding just described)
    m = bare_modes(d)
    assert m.short_period.roots[0].real == pytest.approx(-2.5, abs=0.05)
    assert m.phugoid.roots[0].real == pytest.approx(-0.017, abs=0.001)
    assert abs(m.phugoid.roots[0].imag) == pytest.approx(0.213, abs=0.002)


def test_coefficient_conversion_term_by_term():
    # [derived] from the formulas of Nelson ch. 3-4 (from memory) written out by hand:
    # Q = qbar S / m; X_u = (CT_u - CD_u - 2 CD) Q / V; X_alpha = (CL0 - CD_alpha) Q;
    # Z_u = -(CL_u + 2 CL0) Q / V; M_u = Cm_u qbar S c / (Iy V); X_delta = -CD_delta Q;
    # CL0 = m g cos(gamma) / (qbar S).
    qbar, v, m, iy, s, c, gam = 3000.0, 70.0, 1500.0, 2500.0, 16.0, 1.5, 0.05
    d = from_coefficients(
        dynamic_pressure=qbar, airspeed=v, mass=m, pitch_inertia=iy, wing_area=s, mean_chord=c,
        CL_alpha=5.0, CD=0.04, CL_delta=0.4, Cm_alpha=-1.0, Cm_alpha_dot=-4.0, Cm_q=-12.0, Cm_delta=-1.1,
        CL_u=0.1, CD_u=0.02, Cm_u=-0.03, CT_u=-0.04, CD_alpha=0.2, CD_delta=0.05, flight_path_angle=gam,
    )  # fmt: skip
    Q = qbar * s / m
    cl0 = m * G0 * np.cos(gam) / (qbar * s)
    assert trim_lift_coefficient(qbar, s, m, gam) == pytest.approx(cl0, rel=1e-14)
    assert d.X_u == pytest.approx((-0.04 - 0.02 - 2 * 0.04) * Q / v, rel=1e-14)
    assert d.X_alpha == pytest.approx((cl0 - 0.2) * Q, rel=1e-14)
    assert d.Z_u == pytest.approx(-(0.1 + 2 * cl0) * Q / v, rel=1e-14)
    assert d.M_u == pytest.approx(-0.03 * qbar * s * c / (iy * v), rel=1e-14)
    assert d.X_delta == pytest.approx(-0.05 * Q, rel=1e-14)
    assert d.flight_path_angle == gam
    # the short-period derivatives are those of the two-state conversion, bit for bit
    two = af.from_coefficients(
        dynamic_pressure=qbar, airspeed=v, mass=m, pitch_inertia=iy, wing_area=s, mean_chord=c,
        CL_alpha=5.0, CD=0.04, CL_delta=0.4, Cm_alpha=-1.0, Cm_alpha_dot=-4.0, Cm_q=-12.0, Cm_delta=-1.1,
    )  # fmt: skip
    assert short_period_part(d) == two
    # level flight, no Mach effect: Z_u = -2 g / V exactly (lift equals weight) [derived]
    level = _textbook_coefficients()
    assert level.Z_u == pytest.approx(-2 * G0 / level.airspeed, rel=1e-14)


@pytest.mark.parametrize("cd_alpha", [0.0, 0.3])
def test_lanchester_phugoid_approximation(cd_alpha):
    # Lanchester's phugoid (from memory; common practice): w_p ~ sqrt(2) g / V,
    # zeta_p ~ CD / (sqrt(2) CL), with M_u = 0 and no Mach or thrust effects. A clean,
    # invented case: heavy (large relative density) and stiff in pitch, so that the
    # neglected short-period coupling is small. The approximation holds the angle of
    # attack constant, so it is loose: the coupling lowers the frequency by about
    # sqrt(M_alpha / (M_alpha - Z_alpha M_q / V)) = 0.96 here [derived from the quartic's
    # d0 / d2], and the angle-of-attack changes (X_alpha with CD_alpha) move the damping by
    # about 8 %. Tolerances: 6 % on frequency, 15 % on damping.
    v, m, s = 120.0, 20000.0, 50.0
    qbar = 0.5 * RHO0 * v * v
    d = from_coefficients(
        dynamic_pressure=qbar, airspeed=v, mass=m, pitch_inertia=1.5e5, wing_area=s, mean_chord=3.0,
        CL_alpha=5.0, CD=0.03, CL_delta=0.4, Cm_alpha=-2.0, Cm_alpha_dot=-5.0, Cm_q=-15.0, Cm_delta=-1.2,
        CL_u=0.0, CD_u=0.0, Cm_u=0.0, CT_u=0.0, CD_alpha=cd_alpha,
    )  # fmt: skip
    cl = m * G0 / (qbar * s)
    ph = bare_phugoid(d)
    assert ph.natural_frequency == pytest.approx(np.sqrt(2) * G0 / v, rel=0.06)
    assert ph.damping_ratio == pytest.approx(0.03 / (np.sqrt(2) * cl), rel=0.15)


def test_inverse_t_theta2_is_the_larger_attitude_zero(rng):
    # Oracle: the zeros of theta/delta from python-control; 1/T_theta2 is minus the one of
    # larger magnitude (docs/theory.md, the longitudinal model).
    d = random_longitudinal(rng, 10, climb=True)
    A, B = state_matrices(d)
    got = inverse_t_theta2(d)
    for i in range(10):
        z = control.ss(A[i], B[i], np.array([[0, 0, 0, 1.0]]), 0).zeros()
        if np.all(np.isreal(z)):
            assert got[i] == pytest.approx(-z[np.argmax(np.abs(z))].real, rel=1e-9)
    # the textbook example: 1.917 1/s beside 1.924 of the two-state formula [derived]
    t = textbook_longitudinal()
    assert inverse_t_theta2(t) == pytest.approx(1.917, abs=1e-3)
    assert af.inverse_t_theta2(TEXTBOOK_GA) == pytest.approx(1.924, abs=1e-3)
    # n/alpha is defined at constant speed: the two-state value, bit for bit
    assert load_factor_per_alpha(t) == load_factor_per_alpha(TEXTBOOK_GA)


def test_load_factor_row_is_the_one_definition(rng):
    # Issue 20's definition: n_z = -(Z_u u + Z_alpha alpha + Z_q q + Z_delta delta) / g0 [derived].
    d = random_longitudinal(rng, 4)
    C, D = load_factor_row(d)
    x, delta = rng.normal(size=(4, 4)), rng.normal(size=4)
    want = -(d.Z_u * x[:, 0] + d.Z_alpha * x[:, 1] + d.Z_q * x[:, 2] + d.Z_delta * delta) / G0
    np.testing.assert_allclose((C @ x[..., None])[:, 0, 0] + D[:, 0, 0] * delta, want, rtol=1e-14)
    # the short-period row is the same without Z_u u
    C2, D2 = airframes.load_factor_row(short_period_part(d))
    np.testing.assert_array_equal(C2[..., 0, :], C[..., 0, 1:3])
    np.testing.assert_array_equal(D2, D)


def test_reduction_of_the_airframe_is_exact(rng):
    # [derived] with X_u = X_alpha = Z_u = M_u = X_delta = 0 and gamma = 0 the quartic is
    # s^2 times the two-state characteristic polynomial and the theta numerator s times
    # the two-state q numerator, with exact zeros: the cancelled factors are the two-state
    # ones bit for bit (gravity kept or not).
    d2 = random_derivatives(rng, 12, unstable_fraction=0.3)
    for g in (G0, 0.0):
        z = with_speed_terms(d2, X_u=0.0, X_alpha=0.0, Z_u=0.0, M_u=0.0, gravity=g)
        p = pitch_rate_polynomials(z)
        assert np.all(p.cancelled == 2)
        num, den = pitch_rate_factors(z)
        (n2,), (d2f,) = airframes.pitch_rate_factors(d2)
        for k in range(3):
            np.testing.assert_array_equal(num[1][k], np.broadcast_to(n2[k], (12,)))
            np.testing.assert_array_equal(den[0][k], np.broadcast_to(d2f[k], (12,)))
        assert np.all(num[0][0] == 1) and np.all(num[0][1] == 0) and np.all(num[0][2] == 0)
        assert np.all(den[1][0] == 1) and np.all(den[1][1] == 0) and np.all(den[1][2] == 0)
        np.testing.assert_array_equal(inverse_t_theta2(z), af.inverse_t_theta2(d2))
    # bare short period: the 4x4 eigen-analysis (gravity zero: no Jordan block) equals the
    # closed form of the 2x2 model to rounding; no phugoid exists then (two roots at 0)
    z = with_speed_terms(d2, X_u=0.0, X_alpha=0.0, Z_u=0.0, M_u=0.0, gravity=0.0)
    four, two = bare_short_period(z), bare_short_period(d2)
    np.testing.assert_allclose(four.natural_frequency, two.natural_frequency, rtol=1e-9)
    np.testing.assert_allclose(four.damping_ratio, two.damping_ratio, rtol=1e-9)
    np.testing.assert_allclose(np.sort_complex(four.roots), np.sort_complex(two.roots), rtol=1e-9, atol=1e-12)
    assert np.all(np.isnan(bare_phugoid(z).natural_frequency))


def test_a_short_period_airframe_has_no_phugoid():
    # by definition (issue 20): the phugoid of a two-state airframe is NaN (null in JSON)
    p = bare_phugoid(TEXTBOOK_GA)
    assert np.isnan(p.natural_frequency) and np.isnan(p.damping_ratio) and np.isnan(p.period)
    assert np.isnan(p.time_to_double) and np.all(np.isnan(p.roots))
    m = bare_modes(TEXTBOOK_GA)
    assert np.isnan(m.phugoid.damping_ratio) and not m.phugoid_ambiguous
    # the short period of the closed form (2x2) equals the eigen-analysis of the same matrix
    assert m.short_period.damping_ratio == pytest.approx(bare_short_period(TEXTBOOK_GA).damping_ratio, rel=1e-12)
    assert m.short_period.natural_frequency == pytest.approx(bare_short_period(TEXTBOOK_GA).natural_frequency, rel=1e-12)


def test_the_two_derivative_sets_share_fields_but_not_type():
    # [derived] the short-period and longitudinal models are chosen by the derivative set's
    # type (damper.model.airframes): a four-state set must never pass as a short-period one,
    # while its first eight fields are the short-period ones, in order and with their units.
    import dataclasses

    from damper.model.airframe import Derivatives
    from damper.model.longitudinal import LongitudinalDerivatives

    lon = textbook_longitudinal()
    assert isinstance(lon, LongitudinalDerivatives) and not isinstance(lon, Derivatives)
    short, four = dataclasses.fields(Derivatives), dataclasses.fields(LongitudinalDerivatives)
    assert [(f.name, f.metadata) for f in four[:8]] == [(f.name, f.metadata) for f in short]
