"""The Dryden vertical-gust model: spectrum, spectral factor, the standard's intensities.

Sources: MIL-F-8785C (1980), paragraph 3.7 and its figure of turbulence intensity against
altitude and probability of exceedance, every value from memory (marked so at each
check); the spectrum's integral and the factorisation are [derived] in each test.
"""

import math

import numpy as np
import pytest
import scipy.integrate as si
import scipy.linalg as sl

from damper.measures.covariance import solve_lyapunov
from damper.model import dryden
from damper.model.dryden import FT, KT, TurbulenceSpec, shaping_filter, shaping_response, standard_intensity, vertical_spectrum


def test_spectrum_integrates_to_the_intensity_squared():
    # [derived] (1/pi) int_0^inf (1 + 3x^2)/(1 + x^2)^2 dx = (1/pi)(pi/4 + 3 pi/4) = 1, so
    # the one-sided spectrum integrates to sigma^2 whatever L and V. Numerical check on a
    # logarithmic grid (Simpson, 2^16 points over 1e-8..1e8 rad/s; the tails beyond hold
    # less than 1e-7 of the total [derived from the asymptotes]): 1e-6 relative.
    u = np.linspace(np.log(1e-8), np.log(1e8), 2**16 + 1)
    w = np.exp(u)
    for sigma, length, v in ((1.0, 533.4, 100.0), (2.5, 30.0, 40.0), (0.3, 1000.0, 250.0)):
        total = si.simpson(vertical_spectrum(w, sigma, length, v) * w, x=u)
        assert total == pytest.approx(sigma**2, rel=1e-6)


def test_spectral_factor_squared_over_pi_is_the_spectrum():
    # [derived] with unit-intensity white noise (two-sided density 1) the one-sided output
    # spectrum is 2 |H|^2 / (2 pi) = |H|^2 / pi; the state-space realisation C (sI - A)^-1 B
    # equals H(s) at complex frequencies. Rounding only: 1e-12.
    w = np.logspace(-3, 3, 200)
    sigma, length, v = 1.7, 250.0, 80.0
    h = shaping_response(1j * w, sigma, length, v)
    np.testing.assert_allclose(np.abs(h) ** 2 / np.pi, vertical_spectrum(w, sigma, length, v), rtol=1e-12)
    A, B, C = shaping_filter(sigma, length, v)
    s = 1j * w[:, None, None] * np.eye(2)
    realised = (C @ np.linalg.solve(s - A, np.broadcast_to(B, (w.size, 2, 1))))[:, 0, 0]
    np.testing.assert_allclose(realised, h, rtol=1e-12)


def test_shaping_filter_output_variance_is_the_intensity_squared():
    # The rms of the gust itself equals its intensity: the filter's stationary output
    # variance C P C^T with P from the Lyapunov equation (ours, and scipy's
    # solve_continuous_lyapunov as the oracle) is sigma^2 [derived above]. Closed form of the
    # cascade [derived]: var z1 = a/2, cov z1 z2 = a/4, var z2 = a/4 with a = V/L. 1e-12.
    sigma = np.array([0.5, 1.5433, 3.0])
    length = np.array([30.0, 152.4, 533.4])
    v = np.array([35.0, 70.0, 220.0])
    A, B, C = shaping_filter(sigma, length, v)
    Q = B @ np.swapaxes(B, -1, -2)
    P = solve_lyapunov(A, Q)
    for i in range(3):
        np.testing.assert_allclose(P[i], sl.solve_continuous_lyapunov(A[i], -Q[i]), rtol=1e-12)
        a = v[i] / length[i]
        np.testing.assert_allclose(P[i], [[a / 2, a / 4], [a / 4, a / 4]], rtol=1e-12)
    var = (C @ P @ np.swapaxes(C, -1, -2))[:, 0, 0]
    np.testing.assert_allclose(np.sqrt(var), sigma, rtol=1e-12)


def test_low_altitude_rules():
    # MIL-F-8785C low altitude (from memory): below 1000 ft, L_w = h and sigma_w = 0.1 W20.
    # W20 = 30 kt (moderate, from memory) = 15.433 m/s [derived: 1 kt = 1852/3600 m/s].
    sigma, length = standard_intensity([10.0, 100.0, 300.0], wind_speed_20ft=30 * KT)
    np.testing.assert_allclose(sigma, 0.1 * 30 * 1852 / 3600, rtol=1e-14)
    np.testing.assert_allclose(length, [10.0, 100.0, 300.0], rtol=1e-14)


def test_medium_and_high_altitude_rules():
    # MIL-F-8785C medium/high altitude (from memory): above 2000 ft, L_w = 1750 ft and
    # sigma_w from the figure for the probability of exceedance. Table values from memory:
    # 3750 ft at 1e-5: 23.0 ft/s; 25000 ft at 1e-3: 6.6 ft/s; 7500 ft at 1e-3: 10.1 ft/s.
    # 10 000 ft at 1e-3 lies a third of the way from 7500 ft (10.1) to 15 000 ft (8.0):
    # 9.4 ft/s [derived, linear in altitude].
    h = np.array([3750.0, 25000.0, 7500.0, 10000.0]) * FT
    p = [1e-5, 1e-3, 1e-3, 1e-3]
    for hi, pi, expected in zip(h, p, [23.0, 6.6, 10.1, 9.4]):
        sigma, length = standard_intensity(hi, exceedance_probability=pi)
        assert float(sigma) == pytest.approx(expected * FT, rel=1e-12)
        assert float(length) == pytest.approx(1750.0 * 0.3048, rel=1e-14)


def test_between_1000_and_2000_ft_the_values_blend_linearly():
    # Between 1000 and 2000 ft: linear in height from the low-altitude values at 1000 ft
    # (sigma = 0.1 W20, L = 1000 ft) to the medium/high-altitude values at 2000 ft
    # (L = 1750 ft; sigma at 2000 ft an eighth of the way from 1750 ft (9.6 ft/s) to
    # 3750 ft (10.6 ft/s) at 1e-3: 9.725 ft/s) [derived; the rule is common practice, the
    # table values from memory of MIL-F-8785C]. At 1500 ft: the mean of the two ends.
    w20 = 30 * KT
    sigma, length = standard_intensity(1500 * FT, wind_speed_20ft=w20, exceedance_probability=1e-3)
    assert float(sigma) == pytest.approx(0.5 * (0.1 * w20 + 9.725 * FT), rel=1e-12)
    assert float(length) == pytest.approx(0.5 * (1000 + 1750) * FT, rel=1e-12)
    # continuous at both ends [derived]
    for h_ft in (1000.0, 2000.0):
        below = standard_intensity((h_ft - 1e-6) * FT, wind_speed_20ft=w20, exceedance_probability=1e-3)
        above = standard_intensity((h_ft + 1e-6) * FT, wind_speed_20ft=w20, exceedance_probability=1e-3)
        np.testing.assert_allclose(below, above, rtol=1e-6)


def test_severities_and_the_spec():
    # From memory of MIL-F-8785C: light W20 = 15 kt and 1e-2, moderate 30 kt and 1e-3,
    # severe 45 kt and 1e-5.
    for name, kt, p in (("light", 15, 1e-2), ("moderate", 30, 1e-3), ("severe", 45, 1e-5)):
        spec = TurbulenceSpec.from_severity(name)
        assert spec.wind_speed_20ft == pytest.approx(kt * 1852 / 3600, rel=1e-14)
        assert spec.exceedance_probability == p
    spec = TurbulenceSpec.from_severity("moderate")
    sigma, length = spec.at(np.array([50.0, 2000.0]))
    assert sigma[0] == pytest.approx(0.1 * 30 * KT) and length[0] == 50.0
    assert sigma[1] == pytest.approx(np.interp(2000 / FT, [3750, 7500], [10.6, 10.1]) * FT)  # from memory [derived]
    explicit = TurbulenceSpec(gust_rms=2.0, scale_length=300.0)
    assert explicit.at() == (2.0, 300.0)
    np.testing.assert_array_equal(explicit.at(np.zeros(3))[0], [2.0, 2.0, 2.0])
    assert "explicit" in explicit.describe() and "from memory" in spec.describe()


@pytest.mark.parametrize(
    "kwargs, message",
    [
        (dict(gust_rms=1.0), "both"),
        (dict(), "either"),
        (dict(gust_rms=1.0, scale_length=100.0, wind_speed_20ft=5.0), "either"),
        (dict(gust_rms=-1.0, scale_length=100.0), ">= 0"),
        (dict(exceedance_probability=0.5), "not one of"),
        (dict(wind_speed_20ft=-3.0), ">= 0"),
    ],
)
def test_bad_specs_are_refused(kwargs, message):
    with pytest.raises(ValueError, match=message):
        TurbulenceSpec(**kwargs)


def test_missing_standard_parameters_are_named():
    with pytest.raises(ValueError, match="wind_speed_20ft"):
        TurbulenceSpec(exceedance_probability=1e-3).at(100.0)
    with pytest.raises(ValueError, match="exceedance_probability"):
        TurbulenceSpec(wind_speed_20ft=10.0).at(1000.0)
    with pytest.raises(ValueError, match="outside"):
        TurbulenceSpec(exceedance_probability=1e-3).at(30000.0)
    with pytest.raises(ValueError, match="positive"):
        standard_intensity(0.0, wind_speed_20ft=5.0)
    with pytest.raises(ValueError, match="height"):
        TurbulenceSpec(wind_speed_20ft=5.0).at()


def test_every_table_row_is_read_at_its_own_altitude():
    # The table as stored is the one read back (from memory of MIL-F-8785C's figure); a
    # zero intensity stays zero (the curve has ended) [derived].
    table = np.asarray(dryden.HIGH_ALTITUDE_INTENSITY_FT_S)
    assert table.shape == (len(dryden.TABLE_ALTITUDES_FT), len(dryden.EXCEEDANCE_PROBABILITIES))
    for col, p in enumerate(dryden.EXCEEDANCE_PROBABILITIES):
        got = dryden.high_altitude_intensity(np.asarray(dryden.TABLE_ALTITUDES_FT) * FT, p)
        np.testing.assert_allclose(got, table[:, col] * FT, rtol=1e-12)
    assert math.isclose(dryden.high_altitude_intensity(80000 * FT, 1e-2), 0.0)
