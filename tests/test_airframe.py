"""Bare airframe: derivatives from coefficients and the short-period mode."""

import numpy as np
import pytest

from damper.measures.modes import bare_short_period
from damper.model.airframe import Derivatives, from_coefficients, inverse_t_theta2, state_matrices

from .conftest import FT, TEXTBOOK_GA, textbook_ga_inputs


def textbook_from_coefficients():
    # Source: Nelson, 2nd ed., ch. 4 general-aviation example inputs (conftest.textbook_ga_inputs).
    return from_coefficients(**textbook_ga_inputs())


def test_textbook_derivatives_from_coefficients():
    # Source: Nelson ch. 4 published dimensional derivatives (from memory); the book
    # rounds them, and recomputing M_q gives -2.076 against its -2.05 [derived]: 2 %.
    d = textbook_from_coefficients()
    assert d.Z_alpha / FT == pytest.approx(-355.42, rel=0.02)
    assert d.M_alpha == pytest.approx(-8.80, rel=0.02)
    assert d.M_alpha_dot == pytest.approx(-0.90, rel=0.02)
    assert d.M_q == pytest.approx(-2.05, rel=0.02)
    assert d.Z_delta / FT == pytest.approx(-28.17, rel=0.02)
    assert d.M_delta == pytest.approx(-11.87, rel=0.02)


def test_textbook_short_period():
    # Source: Nelson ch. 4 short-period approximation (from memory): wn about 3.6 rad/s,
    # zeta about 0.69, roots about -2.5 +/- 2.6 i.
    sp = bare_short_period(TEXTBOOK_GA)
    assert sp.natural_frequency == pytest.approx(3.6, abs=0.05)
    assert sp.damping_ratio == pytest.approx(0.69, abs=0.01)
    assert sp.roots[0].real == pytest.approx(-2.5, abs=0.05)
    assert abs(sp.roots[0].imag) == pytest.approx(2.6, abs=0.05)
    # Nelson's approximation formulas (from memory):
    # wn^2 = Z_alpha M_q / u0 - M_alpha; 2 zeta wn = -(M_q + M_alpha_dot + Z_alpha/u0)
    d = TEXTBOOK_GA
    wn2 = d.Z_alpha * d.M_q / d.airspeed - d.M_alpha
    two_zeta_wn = -(d.M_q + d.M_alpha_dot + d.Z_alpha / d.airspeed)
    assert sp.natural_frequency**2 == pytest.approx(wn2, rel=1e-12)
    assert 2 * sp.damping_ratio * sp.natural_frequency == pytest.approx(two_zeta_wn, rel=1e-12)


def test_single_degree_of_freedom_limit():
    # common practice: with Z_alpha = 0 the short period reduces to the pitch
    # mass-spring-damper analogy wn^2 = -M_alpha, 2 zeta wn = -(M_q + M_alpha_dot).
    m_alpha = np.array([-4.0, -12.0, -30.0])
    m_q = np.array([-1.0, -2.5, -0.4])
    m_ad = np.array([-0.5, 0.0, -0.3])
    d = Derivatives(60.0, 0.0, 0.0, 0.0, m_alpha, m_ad, m_q, -10.0)
    sp = bare_short_period(d)
    np.testing.assert_allclose(sp.natural_frequency, np.sqrt(-m_alpha), rtol=1e-12)
    np.testing.assert_allclose(sp.damping_ratio, -(m_q + m_ad) / (2 * np.sqrt(-m_alpha)), rtol=1e-12)
    np.testing.assert_allclose(sp.period, 2 * np.pi / (np.sqrt(-m_alpha) * np.sqrt(1 - sp.damping_ratio**2)))
    np.testing.assert_allclose(sp.time_to_half, np.log(2) / (sp.damping_ratio * sp.natural_frequency))


def test_real_root_short_period():
    # Source: Stevens and Lewis, Aircraft Control and Simulation, lightweight fighter
    # short-period model at 502 ft/s (read in a secondary public copy):
    # A = [[-1.01887, 0.90506], [0.82225, -1.07741]]; roots about -0.185 and -1.911 [derived].
    a = np.array([[-1.01887, 0.90506], [0.82225, -1.07741]])
    v = 502 * FT
    # express A through derivatives with M_alpha_dot = 0 and Z_q chosen to give a12
    d = Derivatives(v, a[0, 0] * v, (a[0, 1] - 1.0) * v, -0.00215 * v, a[1, 0], 0.0, a[1, 1], -0.17555)
    A, _ = state_matrices(d)
    np.testing.assert_allclose(A, a, rtol=1e-12)
    sp = bare_short_period(d)
    roots = np.sort(sp.roots.real)
    assert roots[0] == pytest.approx(-1.911, abs=1e-3)
    assert roots[1] == pytest.approx(-0.185, abs=1e-3)
    assert np.all(sp.roots.imag == 0)
    # equivalent damping of two real roots: -(l1 + l2) / (2 sqrt(l1 l2)) > 1 (design.md s.5)
    l1, l2 = roots
    assert sp.damping_ratio == pytest.approx(-(l1 + l2) / (2 * np.sqrt(l1 * l2)), rel=1e-12)
    assert sp.damping_ratio > 1
    assert np.isnan(sp.period)
    assert sp.time_to_half == pytest.approx(np.log(2) / 0.185, rel=2e-3)


def test_divergent_airframe_has_no_frequency():
    # [derived] M_alpha > 0 large enough: det A < 0, one root on each side of the origin.
    d = Derivatives(50.0, -100.0, 0.0, 0.0, 5.0, 0.0, -1.0, -10.0)
    sp = bare_short_period(d)
    assert np.isnan(sp.natural_frequency) and np.isnan(sp.damping_ratio)
    assert sp.time_to_double > 0


def test_inverse_t_theta2():
    # [derived] with Z_delta = 0 the pitch-rate zero is at -Z_alpha/V (Nelson ch. 4, from memory)
    d = Derivatives(50.0, -200.0, 0.0, 0.0, -5.0, -0.5, -1.0, -10.0)
    assert inverse_t_theta2(d) == pytest.approx(4.0, rel=1e-12)
