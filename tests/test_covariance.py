"""Batched Lyapunov solver and Rice's formula.

Oracles: scipy.linalg.solve_continuous_lyapunov (per system), the Kronecker form built
with numpy.kron, and closed-form spectral moments of a second-order system [derived].
"""

import numpy as np
import pytest
import scipy.linalg as sl

from damper.measures.covariance import crossing_rate, level_for_crossing_rate, lyapunov_operator, solve_lyapunov


def _stable(rng, batch, n, spread=1.0):
    A = rng.normal(size=(batch, n, n)) * spread
    shift = np.max(np.linalg.eigvals(A).real, axis=-1) + rng.uniform(0.05, 1.0, batch)
    return A - shift[:, None, None] * np.eye(n)


@pytest.mark.parametrize("n", [1, 2, 3, 7, 12, 18])
def test_batched_solver_matches_scipy(rng, n):
    # Oracle: scipy.linalg.solve_continuous_lyapunov (Bartels-Stewart) on each member:
    # A P + P A^T = -Q. Both are backward stable; 1e-9 relative to the largest entry
    # (the random systems have condition numbers up to about 1e4).
    A = _stable(rng, 9, n)
    G = rng.normal(size=(9, n, 2))
    Q = G @ np.swapaxes(G, -1, -2)
    P = solve_lyapunov(A, Q)
    for b in range(9):
        ref = sl.solve_continuous_lyapunov(A[b], -Q[b])
        np.testing.assert_allclose(P[b], ref, rtol=0, atol=1e-9 * np.abs(ref).max())
        np.testing.assert_array_equal(P[b], P[b].T)
    residual = A @ P + P @ np.swapaxes(A, -1, -2) + Q
    assert np.abs(residual).max() < 1e-10 * np.abs(Q).max() * max(1.0, np.abs(A).max() * np.abs(P).max())


def test_stiff_and_defective_systems(rng):
    # A Jordan block (the Dryden filter's double pole) and modes from 0.05 to 500 rad/s in
    # one system, as a damper loop has (washout, short period, actuator, Pade delay).
    # Oracle: scipy, 1e-8 relative to the largest entry.
    A = np.zeros((14, 14))
    A[0, 0], A[1, 0], A[1, 1] = -0.2, 0.2, -0.2
    poles = [-0.05, -500.0, -120.0, -20.0]
    for k, p in enumerate(poles):
        A[2 + k, 2 + k] = p
    for k, (wn, z) in enumerate([(3.0, 0.05), (60.0, 0.7), (200.0, 0.3), (0.2, 0.02)]):
        i = 6 + 2 * k
        A[i, i + 1] = 1.0
        A[i + 1, i], A[i + 1, i + 1] = -wn * wn, -2 * z * wn
    T = rng.normal(size=(14, 14)) * 0.1 + np.eye(14)
    A = T @ A @ np.linalg.inv(T)
    G = rng.normal(size=(14, 1))
    Q = G @ G.T
    P = solve_lyapunov(A[None], Q[None])[0]
    ref = sl.solve_continuous_lyapunov(A, -Q)
    np.testing.assert_allclose(P, ref, rtol=0, atol=1e-8 * np.abs(ref).max())


def test_operator_is_the_kronecker_form_on_symmetric_matrices(rng):
    # Oracle: vec(A P + P A^T) = (I kron A + A kron I) vec(P) (column-major vec), written
    # with numpy.kron; for a random symmetric P the reduced operator gives the same
    # upper-triangular entries. Exact in exact arithmetic: 1e-12.
    n = 5
    A = rng.normal(size=(n, n))
    P = rng.normal(size=(n, n))
    P = P + P.T
    K = np.kron(np.eye(n), A) + np.kron(A, np.eye(n))
    full = (K @ P.reshape(-1, order="F")).reshape(n, n, order="F")
    i, j = np.triu_indices(n)
    np.testing.assert_allclose(lyapunov_operator(A) @ P[i, j], full[i, j], rtol=1e-12, atol=1e-12)


def test_batch_shapes_broadcast(rng):
    A = _stable(rng, 6, 4).reshape(2, 3, 4, 4)
    Q = np.eye(4)
    P = solve_lyapunov(A, Q)
    assert P.shape == (2, 3, 4, 4)
    np.testing.assert_allclose(P[1, 2], solve_lyapunov(A[1, 2], Q), rtol=1e-13)


def test_rice_formula_on_a_second_order_system_with_closed_form_moments():
    # x'' + 2 zeta w x' + w^2 x = xi (unit-intensity white noise) has, in closed form
    # [derived from the Lyapunov equation by hand], var x = 1/(4 zeta w^3) and
    # var x' = 1/(4 zeta w), so sigma_x'/sigma_x = w and Rice's up-crossing rate of a is
    # (w / (2 pi)) exp(-a^2 / (2 sigma_x^2)) (Rice's formula, common practice), twice that
    # for both signs. Through our solver: 1e-12.
    w = np.array([0.7, 3.0, 25.0])
    z = np.array([0.05, 0.4, 1.3])
    A = np.zeros((3, 2, 2))
    A[:, 0, 1] = 1.0
    A[:, 1, 0], A[:, 1, 1] = -w * w, -2 * z * w
    Q = np.zeros((3, 2, 2))
    Q[:, 1, 1] = 1.0
    P = solve_lyapunov(A, Q)
    np.testing.assert_allclose(P[:, 0, 0], 1 / (4 * z * w**3), rtol=1e-12)
    np.testing.assert_allclose(P[:, 1, 1], 1 / (4 * z * w), rtol=1e-12)
    np.testing.assert_allclose(P[:, 0, 1], 0.0, atol=1e-14 * P[:, 0, 0].max())
    sx, sv = np.sqrt(P[:, 0, 0]), np.sqrt(P[:, 1, 1])
    a = 1.5 * sx
    expected_up = w / (2 * np.pi) * np.exp(-1.125)
    np.testing.assert_allclose(crossing_rate(sx, sv, a, both_signs=False), expected_up, rtol=1e-12)
    np.testing.assert_allclose(crossing_rate(sx, sv, a), 2 * expected_up, rtol=1e-12)
    # the inverse gives back the level [derived]
    np.testing.assert_allclose(level_for_crossing_rate(sx, sv, 2 * expected_up), a, rtol=1e-10)


def test_rice_formula_edge_values():
    # A process that is identically zero never crosses a positive level; NaN in, NaN out;
    # an infinite derivative rms gives an infinite rate [definition]. At the level 0 the
    # rate is sigma'/(pi sigma) for both signs (Rice, common practice).
    assert crossing_rate(0.0, 0.0, 0.1) == 0.0
    assert np.isnan(crossing_rate(np.nan, 1.0, 0.1))
    assert np.isinf(crossing_rate(1.0, np.inf, 0.1))
    assert crossing_rate(2.0, 3.0, 0.0) == pytest.approx(3.0 / (2.0 * np.pi))
    assert level_for_crossing_rate(2.0, 3.0, 10.0) == 0.0  # never that often: level 0
