"""Real factors of degree at most two from a polynomial's roots (damper.model.factorise)."""

import numpy as np

from damper.model.factorise import polynomial_roots, real_factors


def _product(factors, s):
    out = 1.0
    for c0, c1, c2 in factors:
        out = out * (c0[:, None] + c1[:, None] * s + c2[:, None] * s * s)
    return out


def _random_polynomials(rng, n):
    """Quartics built from chosen roots: pairs, reals, exact origin roots, degree drops."""
    rows = []
    for i in range(n):
        kind = i % 6
        if kind == 0:  # two complex pairs
            roots = [complex(*rng.normal(size=2)) for _ in range(2)]
            roots = roots + [r.conjugate() for r in roots]
        elif kind == 1:  # one pair, two reals of either sign
            r = complex(*rng.normal(size=2))
            roots = [r, r.conjugate(), rng.normal(), rng.normal()]
        elif kind == 2:  # four reals
            roots = list(rng.normal(size=4))
        elif kind == 3:  # a cubic: one pair and one real
            r = complex(*rng.normal(size=2))
            roots = [r, r.conjugate(), rng.normal()]
        elif kind == 4:  # a root at the origin and a cubic
            roots = [0.0, rng.normal(), complex(1.0, 2.0), complex(1.0, -2.0)]
        else:  # a quadratic
            roots = [rng.normal(), rng.normal()]
        coef = np.real(np.poly(roots))[::-1] * rng.uniform(0.5, 3.0)
        if kind == 4:
            coef[0] = 0.0  # exactly (np.poly rounds it to about 1e-17)
        rows.append(np.concatenate([coef, np.zeros(5 - coef.size)]))
    return np.array(rows)


def test_factors_multiply_to_the_polynomial(rng):
    # [derived] the product of the factors equals the polynomial at many frequencies
    # (1e-11 relative: the roots' rounding), with two factors for every row.
    coef = _random_polynomials(rng, 60)
    factors = real_factors(coef, 2)
    assert len(factors) == 2
    s = 1j * np.logspace(-3, 3, 100)
    want = np.array([np.polynomial.polynomial.polyval(s, c) for c in coef])
    np.testing.assert_allclose(_product(factors, s), want, rtol=1e-11)


def test_structure_and_exactness(rng):
    # [derived] conjugate pairs become one quadratic; an origin root stays an exact zero;
    # a polynomial of degree at most two is returned as it stands, bit for bit.
    coef = np.array([
        [0.0, 2.0, 3.0, 1.0, 0.0],  # s (s + 1)(s + 2): origin root exact
        [5.0, 2.0, 1.0, 0.0, 0.0],  # quadratic: as it stands
        [4.0, 0.0, 5.0, 0.0, 1.0],  # (s^2 + 1)(s^2 + 4): two pure pairs
        [np.nan, 1.0, 1.0, 0.0, 0.0],  # not finite: NaN factors
    ])  # fmt: skip
    f = real_factors(coef, 2)
    c0 = np.array([f[0][0], f[1][0]])
    assert np.any(c0[:, 0] == 0.0)  # the factor holding the origin root has c0 exactly 0
    assert (f[0][0][1], f[0][1][1], f[0][2][1]) == (5.0, 2.0, 1.0)
    assert (f[1][0][1], f[1][1][1], f[1][2][1]) == (1.0, 0.0, 0.0)
    np.testing.assert_allclose(sorted([f[0][0][2], f[1][0][2]]), [1.0, 4.0], rtol=1e-12)
    assert all(np.isnan(c[3]) for fac in f for c in fac)
    r = polynomial_roots(coef[:1])
    assert np.sum(r[0] == 0) == 1
    np.testing.assert_allclose(np.sort(r[0][np.isfinite(r[0])].real), [-2.0, -1.0, 0.0], atol=1e-14)
