"""Continuous turbulence by covariance analysis (damper.analysis.turbulence).

Oracles: (1) a frequency-domain integral of the Dryden spectrum times the squared
response of the same model, with every transfer function written here from the
equations of docs/theory.md (the delay as the same (n, n) Pade approximant, written out
here); (2) a long seeded time simulation of the same state space, exactly discretised;
(3) python-control's closed-loop poles for stability. Airframe numbers are invented or the
textbook general-aviation example (Nelson, from memory).
"""

from dataclasses import replace

import numpy as np
import pytest
import scipy.integrate as si
import scipy.linalg as sl

from damper.analysis.turbulence import (
    CONTRACT_FIELDS,
    REASON_BARE,
    REASON_NO_AUTHORITY,
    REASON_NO_RATE_LIMIT,
    REASON_RATE_CROSSINGS_UNBOUNDED,
    REASON_UNSTABLE,
    REASON_UNSTABLE_BARE,
    gust_model,
    stationary_covariance,
    turbulence_for_spec,
    turbulence_response,
    turbulence_study,
)
from damper.atmosphere import G0
from damper.measures.covariance import quadratic_form
from damper.model import longitudinal as lon
from damper.model.airframe import Derivatives
from damper.model.dryden import TurbulenceSpec, shaping_filter, vertical_spectrum
from damper.model.elements import Delay, Lag, LeadLag, SecondOrderLag, Washout
from damper.model.longitudinal import with_speed_terms
from damper.model.loop import Hardware, Loop, to_control

from .conftest import TEXTBOOK_GA, textbook_longitudinal

HW = Hardware(actuator=Lag(1 / 20.0), sensor=Lag(0.01), washout=Washout(1.5), delay=Delay(np.asarray(0.03), 2))
HW2 = Hardware(actuator=SecondOrderLag(35.0, 0.7), filters=(LeadLag(0.08, 0.03),), delay=Delay(np.asarray(0.05), 3))


def _flipped(d):
    """The same aircraft with the opposite surface sign convention (M_delta > 0)."""
    extra = {"X_delta": -np.asarray(d.X_delta)} if isinstance(d, lon.LongitudinalDerivatives) else {}
    return replace(d, M_delta=-np.asarray(d.M_delta), Z_delta=-np.asarray(d.Z_delta), **extra)


# ----------------------------------------------------------------------------------
# the frequency-domain oracle, written from the equations
# ----------------------------------------------------------------------------------


def _pade(s, T, n):
    """(n, n) Pade approximant of exp(-sT), c_k = (2n-k)! n! / ((2n)! k! (n-k)!) (standard result)."""
    from math import factorial

    c = [factorial(2 * n - k) * factorial(n) / (factorial(2 * n) * factorial(k) * factorial(n - k)) for k in range(n + 1)]
    num = sum(ck * (-s * T) ** k for k, ck in enumerate(c))
    den = sum(ck * (s * T) ** k for k, ck in enumerate(c))
    return num / den


def _element(e, s):
    """Each element's transfer function, written from docs/theory.md section 3."""
    if e is None:
        return np.ones_like(s)
    if isinstance(e, Lag):
        return 1 / (e.time_constant * s + 1)
    if isinstance(e, SecondOrderLag):
        w, z = e.natural_frequency, e.damping_ratio
        return w * w / (s * s + 2 * z * w * s + w * w)
    if isinstance(e, Washout):
        return e.time_constant * s / (e.time_constant * s + 1)
    if isinstance(e, LeadLag):
        return (e.lead_time_constant * s + 1) / (e.lag_time_constant * s + 1)
    if isinstance(e, Delay):
        return _pade(s, float(e.time), e.pade_order)
    raise TypeError(e)


def _airframe(d):
    """A, B, the gust column (per m/s of w_g), the state order, and the load-factor row."""
    v = float(d.airspeed)
    if isinstance(d, lon.LongitudinalDerivatives):
        A, B = lon.state_matrices(d)  # tested against the equations in test_longitudinal.py
        names = lon.STATES
        nz = -np.array([float(d.Z_u), float(d.Z_alpha), float(d.Z_q), 0.0]) / G0
    else:
        # docs/theory.md section 1, alpha' substituted into q' [derived]
        a11, a12, b1 = d.Z_alpha / v, 1 + d.Z_q / v, d.Z_delta / v
        A = np.array([[a11, a12], [d.M_alpha + d.M_alpha_dot * a11, d.M_q + d.M_alpha_dot * a12]], dtype=float)
        B = np.array([[b1], [d.M_delta + d.M_alpha_dot * b1]], dtype=float)
        names = ("alpha", "q")
        nz = -np.array([float(d.Z_alpha), float(d.Z_q)]) / G0
    ia = names.index("alpha")
    # alpha_aero = alpha + w_g / V in every equation: the gust column is A[:, alpha] / V
    return np.asarray(A, float), np.asarray(B, float)[:, 0], A[:, ia] / v, names, nz


def _responses(d, hw, gain, w):
    """Responses to w_g (per m/s) at s = jw: q, alpha, n_z, surface, surface rate, command."""
    s = 1j * w
    A, B, E, names, nz_row = _airframe(d)
    n = A.shape[0]
    M = s[:, None, None] * np.eye(n) - A
    # per surface and per w_g: one solve with both right-hand sides (one LU factorisation per frequency)
    x2 = np.linalg.solve(M, np.broadcast_to(np.stack([B, E], axis=1), (w.size, n, 2)))
    xd, xg = x2[..., 0], x2[..., 1]
    iq, ia = names.index("q"), names.index("alpha")
    feedback = np.ones_like(s)
    for e in (hw.sensor, hw.washout, *hw.filters, hw.delay):
        feedback = feedback * _element(e, s)
    act = _element(hw.actuator, s)
    kfb = -np.sign(float(d.M_delta)) * gain  # the damper command is -sign(M_delta) K y
    # delta = act kfb F q, q = qd delta + qg w  =>  q = qg / (1 - qd act kfb F)
    q = xg[:, iq] / (1 - xd[:, iq] * act * kfb * feedback)
    command = kfb * feedback * q
    delta = act * command
    x = xd * delta[:, None] + xg
    nz = x @ nz_row - float(d.Z_delta) * delta / G0 - float(d.Z_alpha) / (G0 * float(d.airspeed))
    return {"q": q, "alpha": x[:, ia], "nz": nz, "surface": delta, "rate": s * delta, "command": command}


def _oracle_rms(d, hw, gain, sigma, length):
    """sqrt(int_0^inf Phi_w |T|^2 dw) on a log grid (Simpson, 2^18 + 1 points, 1e-7..1e7 rad/s).

    The tails beyond the grid hold less than 1e-9 of any variance here [derived: every
    integrand is flat below 1e-3 rad/s and falls at least as 1/w^2 above 1e3 rad/s]."""
    u = np.linspace(np.log(1e-7), np.log(1e7), 2**18 + 1)
    w = np.exp(u)
    phi = vertical_spectrum(w, sigma, length, float(d.airspeed))
    return {k: np.sqrt(si.simpson(phi * np.abs(t) ** 2 * w, x=u)) for k, t in _responses(d, hw, gain, w).items()}


def _check_against_oracle(d, hw, gain, sigma, length):
    # 1e-4 relative (issue 22); the two computations agree to about 1e-9 in practice.
    res = turbulence_response(Loop(d, hw, np.asarray(gain)), sigma, length)
    ref = _oracle_rms(d, hw, gain, sigma, length)
    got = {
        "q": res.rms_pitch_rate_rad_s, "alpha": res.rms_angle_of_attack_rad, "nz": res.rms_load_factor_g,
        "surface": res.rms_surface_rad, "rate": res.rms_surface_rate_rad_s, "command": res.rms_damper_command_rad,
    }
    for key, value in got.items():
        assert float(value) == pytest.approx(ref[key], rel=1e-4, abs=1e-300), key
    return res


@pytest.mark.parametrize("hw", [Hardware(), HW, HW2], ids=["ideal", "lag-washout-pade2", "second-order-pade3"])
@pytest.mark.parametrize("flip", [False, True], ids=["M_delta<0", "M_delta>0"])
def test_rms_equals_the_frequency_domain_integral_two_state(hw, flip):
    d = _flipped(TEXTBOOK_GA) if flip else TEXTBOOK_GA
    _check_against_oracle(d, hw, 0.35, 2.0, 300.0)


@pytest.mark.parametrize("flip", [False, True], ids=["M_delta<0", "M_delta>0"])
def test_rms_equals_the_frequency_domain_integral_longitudinal(flip):
    # The four-state textbook example (Nelson's speed derivatives, from memory) at a gain
    # where its phugoid is still stable with this washout (checked below).
    d = textbook_longitudinal()
    d = _flipped(d) if flip else d
    res = _check_against_oracle(d, HW, 0.2, 1.5, 150.0)
    assert bool(res.stable)


def test_bare_airframe_equals_the_oracle_without_a_damper():
    # Bare: the airframe alone, K = 0 in the oracle [derived]; the damper's fields are NaN.
    for d in (TEXTBOOK_GA, textbook_longitudinal()):
        res = turbulence_response(Loop(d, HW, np.asarray(0.4)), 2.5, 533.4, rate_limit=0.5, authority=0.1, bare=True)
        ref = _oracle_rms(d, Hardware(), 0.0, 2.5, 533.4)
        assert float(res.rms_pitch_rate_rad_s) == pytest.approx(ref["q"], rel=1e-4)
        assert float(res.rms_load_factor_g) == pytest.approx(ref["nz"], rel=1e-4)
        assert float(res.rms_angle_of_attack_rad) == pytest.approx(ref["alpha"], rel=1e-4)
        for name in ("rms_surface_rad", "rms_surface_rate_rad_s", "rate_limit_exceedances_per_s",
                     "authority_exceedances_per_s"):  # fmt: skip
            assert np.isnan(getattr(res, name)) and res.reasons_at()[name] == REASON_BARE


def test_gust_rms_inside_the_loop_model_equals_its_intensity():
    # The gust row of the assembled model: its stationary variance is sigma^2 whatever the
    # loop (the filter is upstream of everything) [derived]; 1e-10.
    sigma = np.array([0.5, 2.0, 4.0])
    length = np.array([50.0, 300.0, 533.4])
    model = gust_model(Loop(TEXTBOOK_GA, HW, np.array([0.1, 0.3, 0.6])), sigma, length)
    P = stationary_covariance(model)
    np.testing.assert_allclose(np.sqrt(quadratic_form(P, model.rows["gust"])), sigma, rtol=1e-10)


def test_both_signs_of_m_delta_give_the_same_magnitudes():
    # Reversing the surface sign convention reverses the surface only: every rms and every
    # exceedance rate is the same [derived]; 1e-10.
    for d in (TEXTBOOK_GA, textbook_longitudinal()):
        a = turbulence_response(Loop(d, HW, np.asarray(0.3)), 2.0, 300.0, rate_limit=0.05, authority=0.01)
        b = turbulence_response(Loop(_flipped(d), HW, np.asarray(0.3)), 2.0, 300.0, rate_limit=0.05, authority=0.01)
        for name in CONTRACT_FIELDS:
            assert float(getattr(b, name)) == pytest.approx(float(getattr(a, name)), rel=1e-10), name
        assert a.rate_limit_exceedances_per_s > 0 and a.authority_exceedances_per_s > 0  # the check is live


# ----------------------------------------------------------------------------------
# a long seeded time simulation of the same state space
# ----------------------------------------------------------------------------------


def _simulate(model, index, h, steps, chains, seed):
    """Exact discretisation (Van Loan: x[k+1] = F x[k] + e[k], e ~ N(0, Qd)) of member
    `index` of a GustModel, `chains` independent chains from rest, seeded. Returns the
    states (steps, chains, n)."""
    A, B = model.A[index], model.B[index]
    n = A.shape[0]
    big = np.zeros((2 * n, 2 * n))
    big[:n, :n], big[:n, n:], big[n:, n:] = -A, np.outer(B, B), A.T
    E = sl.expm(big * h)
    F = E[n:, n:].T
    Qd = F @ E[:n, n:]
    lam, U = np.linalg.eigh(0.5 * (Qd + Qd.T))  # nearly singular: a square root, not Cholesky
    L = U * np.sqrt(np.maximum(lam, 0.0))
    rng = np.random.default_rng(seed)
    x = np.zeros((chains, n))
    out = np.empty((steps, chains, n))
    for k in range(steps):
        x = x @ F.T + rng.standard_normal((chains, n)) @ L.T
        out[k] = x
    return out


def test_long_seeded_simulation_agrees_within_its_statistical_error():
    # Oracle: 64 independent chains of 100 s each (5 ms steps, the first 20 s dropped as
    # the start-up transient: the slowest mode, the 1.5 s washout, decays by e^-13), exactly
    # discretised, so the only error is statistical. Statistical error of each mean square:
    # the standard deviation of the 64 chains' own mean squares over sqrt(64) (independent
    # chains); the rms must agree within 4 such standard errors (seeded: deterministic).
    # A shortish scale length (60 m at 60 m/s: 1 s correlation) keeps the record short.
    d = replace(TEXTBOOK_GA, airspeed=np.asarray(60.0))
    model = gust_model(Loop(d, HW, np.asarray(0.3)), 2.0, 60.0)
    P = stationary_covariance(model)
    x = _simulate(model, 0, 0.005, 20000, 64, seed=22)[4000:]
    for name, row in model.rows.items():
        y = x @ row[0]
        ms = np.mean(y * y, axis=0)  # one mean square per chain
        se = np.std(ms, ddof=1) / np.sqrt(ms.size)
        predicted = quadratic_form(P, row)[0]
        assert abs(ms.mean() - predicted) < 4 * se, name
        assert se < 0.05 * predicted, name  # the check is sharp: about 2 % here


def test_rice_rate_agrees_with_a_simulated_crossing_count():
    # Rice's formula (both signs) for the surface rate crossing +/- the rate limit, against
    # the crossings counted on the simulated record (up-crossings of +a plus down-crossings
    # of -a between samples). Statistical error: Poisson, sqrt(count); sampling at 2 ms
    # misses a crossing pair within one step about (w h)^2 of the time, under 1 % for the
    # 20 rad/s actuator [derived]. Agreement within 4 sqrt(count) + 2 %.
    d = replace(TEXTBOOK_GA, airspeed=np.asarray(60.0))
    loop = Loop(d, HW, np.asarray(0.3))
    model = gust_model(loop, 2.0, 60.0)
    P = stationary_covariance(model)
    surface_rate = model.rows["surface"][0] @ model.A[0]
    sigma = np.sqrt(quadratic_form(P[0], surface_rate))
    level = 1.5 * sigma
    res = turbulence_response(loop, 2.0, 60.0, rate_limit=level, authority=0.01)
    x = _simulate(model, 0, 0.002, 50000, 32, seed=7)[10000:]
    y = x @ surface_rate
    up = np.sum((y[:-1] < level) & (y[1:] >= level))
    down = np.sum((y[:-1] > -level) & (y[1:] <= -level))
    count = up + down
    duration = 0.002 * (y.shape[0] - 1) * y.shape[1]
    expected = float(res.rate_limit_exceedances_per_s) * duration
    assert abs(count - expected) < 4 * np.sqrt(expected) + 0.02 * expected
    assert count > 400  # the check is sharp: about 5 % statistical error
    # and the authority level on the damper command, the same way
    cmd = x @ model.rows["damper_command"][0]
    a = 0.01
    n_cross = np.sum((cmd[:-1] < a) & (cmd[1:] >= a)) + np.sum((cmd[:-1] > -a) & (cmd[1:] <= -a))
    expected = float(res.authority_exceedances_per_s) * duration
    assert abs(n_cross - expected) < 4 * np.sqrt(expected) + 0.02 * expected
    assert n_cross > 100


# ----------------------------------------------------------------------------------
# what is NaN, and why
# ----------------------------------------------------------------------------------


def test_unstable_closed_loop_gives_nan_with_a_reason():
    # A large gain with the actuator lag and the delay destabilises the loop; oracle for
    # stability: python-control's poles of the exported closed loop (same Pade order).
    gains = np.array([0.3, 6.0])
    loop = Loop(TEXTBOOK_GA, HW, gains)
    study = turbulence_study(loop, 2.0, 300.0, rate_limit=0.5, authority=0.05)
    res = study.closed_loop
    for i, g in enumerate(gains):
        poles = to_control(loop, (i,), "closed").poles()
        assert bool(res.stable[i]) == bool(np.all(poles.real < 0))
    assert res.stable[0] and not res.stable[1]  # the check is live
    for name in CONTRACT_FIELDS[2:]:
        assert np.isnan(getattr(res, name)[1]) and res.reasons_at(1)[name] == REASON_UNSTABLE
        assert np.isfinite(getattr(res, name)[0]) and name not in res.reasons_at(0)
    assert res.gust_rms_m_s[1] == 2.0 and res.scale_length_m[1] == 300.0
    assert "Pade (2, 2)" in res.delay_model
    # the bare airframe is stable and the same for both gains
    assert np.all(study.bare.stable)
    np.testing.assert_array_equal(study.bare.rms_pitch_rate_rad_s[0], study.bare.rms_pitch_rate_rad_s[1])


def test_statically_unstable_airframe_stabilised_by_the_damper():
    # M_alpha = +8 1/s^2 (statically unstable, invented): det A = a11 a22 - a12 a21 =
    # 5.96 - 9.82 < 0, a real root in the right half-plane, so the bare airframe has no
    # stationary response (NaN, reason); a strong pitch-rate damper (K = 1.2 s) makes
    # det = a11 (a22 - K |b2|) - a12 a21 = 24.5 > 0 [derived, a11 < 0] and the closed-loop
    # rms then equals the frequency-domain integral (1e-4).
    d = replace(TEXTBOOK_GA, M_alpha=np.asarray(8.0))
    study = turbulence_study(Loop(d, Hardware(), np.asarray(1.2)), 2.0, 300.0)
    assert not study.bare.stable and np.isnan(study.bare.rms_pitch_rate_rad_s)
    assert study.bare.reasons_at()["rms_pitch_rate_rad_s"] == REASON_UNSTABLE_BARE
    assert study.bare.reasons_at()["rms_surface_rad"] == REASON_BARE
    assert study.closed_loop.stable
    _check_against_oracle(d, Hardware(), 1.2, 2.0, 300.0)


def test_missing_limits_and_unbounded_crossing_rates_have_reasons():
    # No rate limit / authority given: NaN with a reason. Ideal actuator and ideal sensor:
    # the surface is -sign(M_delta) K q, whose second derivative contains M_alpha w_g'/V
    # and so white noise (the Dryden gust's derivative has a white-noise part) [derived]:
    # the rate-limit crossing rate is unbounded (NaN, reason) while the surface rate itself
    # is finite (oracle above) and the authority rate is finite. With a sensor lag the
    # same ideal actuator gives a finite rate [derived: one more integration].
    res = turbulence_response(Loop(TEXTBOOK_GA, HW, np.asarray(0.3)), 2.0, 300.0)
    assert res.reasons_at()["rate_limit_exceedances_per_s"] == REASON_NO_RATE_LIMIT
    assert res.reasons_at()["authority_exceedances_per_s"] == REASON_NO_AUTHORITY
    assert set(res.reasons_at()) == {"rate_limit_exceedances_per_s", "authority_exceedances_per_s"}
    ideal = turbulence_response(Loop(TEXTBOOK_GA, Hardware(), np.asarray(0.3)), 2.0, 300.0, rate_limit=0.02, authority=0.005)
    assert np.isnan(ideal.rate_limit_exceedances_per_s)
    assert ideal.reasons_at()["rate_limit_exceedances_per_s"] == REASON_RATE_CROSSINGS_UNBOUNDED
    assert np.isfinite(ideal.rms_surface_rate_rad_s) and ideal.authority_exceedances_per_s > 0
    lagged = turbulence_response(Loop(TEXTBOOK_GA, Hardware(sensor=Lag(0.01)), np.asarray(0.3)), 2.0, 300.0,
                                 rate_limit=0.02)  # fmt: skip
    assert lagged.rate_limit_exceedances_per_s > 0 and "rate_limit_exceedances_per_s" not in lagged.reasons_at()


def test_zero_gain_damper_has_a_motionless_surface():
    # K = 0 with hardware: the closed loop is the bare airframe (same rms, 1e-12), the
    # surface does not move (0, not NaN) and is never beyond any limit (0 per s) [derived].
    study = turbulence_study(Loop(TEXTBOOK_GA, HW, np.asarray(0.0)), 2.0, 300.0, rate_limit=0.1, authority=0.01)
    c, b = study.closed_loop, study.bare
    assert float(c.rms_pitch_rate_rad_s) == pytest.approx(float(b.rms_pitch_rate_rad_s), rel=1e-12)
    assert float(c.rms_load_factor_g) == pytest.approx(float(b.rms_load_factor_g), rel=1e-12)
    for name in ("rms_surface_rad", "rms_surface_rate_rad_s", "rate_limit_exceedances_per_s",
                 "authority_exceedances_per_s"):  # fmt: skip
        assert getattr(c, name) == 0.0


# ----------------------------------------------------------------------------------
# airframe models, batches, the standard's turbulence
# ----------------------------------------------------------------------------------


def test_longitudinal_model_without_speed_terms_equals_the_two_state_model():
    # With the speed derivatives, the flight-path angle and gravity zero, u and theta are
    # integrators feeding nothing: left out, the four-state answer equals the two-state
    # one (docs/theory.md section 8, exact reduction) to rounding, 1e-10.
    z = with_speed_terms(TEXTBOOK_GA, X_u=0.0, X_alpha=0.0, Z_u=0.0, M_u=0.0, gravity=0.0)
    kwargs = dict(rate_limit=0.05, authority=0.01)
    a = turbulence_study(Loop(TEXTBOOK_GA, HW, np.asarray(0.3)), 2.0, 300.0, **kwargs)
    b = turbulence_study(Loop(z, HW, np.asarray(0.3)), 2.0, 300.0, **kwargs)
    for part in ("bare", "closed_loop"):
        for name in CONTRACT_FIELDS:
            x, y = float(getattr(getattr(a, part), name)), float(getattr(getattr(b, part), name))
            assert (np.isnan(x) and np.isnan(y)) or y == pytest.approx(x, rel=1e-10), (part, name)


def test_gust_enters_every_equation_through_the_angle_of_attack_column():
    # Longitudinal model: the gust is in u' too (X_alpha alpha_g) [derived from
    # alpha_aero = alpha + w_g/V]; the assembled model's gust input equals the airframe's
    # alpha column times the filter's output row, 1e-14.
    d = textbook_longitudinal()
    model = gust_model(Loop(d, Hardware(), np.asarray(0.0)), 2.0, 300.0)
    A, _ = lon.state_matrices(d)
    _, _, C = shaping_filter(2.0, 300.0, float(d.airspeed))
    np.testing.assert_allclose(model.A[0, :4, 4:], np.outer(A[:, 1] / float(d.airspeed), C[0]), rtol=1e-14)
    assert model.A[0, 0, 4] != 0.0  # X_alpha is not zero in the example (Nelson, from memory)


def test_batch_equals_one_at_a_time():
    # Conditions x gains in one call against each member alone (common practice for
    # batched code): 1e-12 relative. Mixed signs of M_delta, a per-condition gust.
    d = Derivatives(
        airspeed=np.array([60.0, 120.0, 200.0])[:, None],
        Z_alpha=np.array([-200.0, -450.0, -900.0])[:, None],
        Z_q=np.array([0.0, -1.0, -2.0])[:, None],
        Z_delta=np.array([-20.0, 30.0, -40.0])[:, None],
        M_alpha=np.array([-6.0, -12.0, -25.0])[:, None],
        M_alpha_dot=np.array([-0.3, -0.5, -0.4])[:, None],
        M_q=np.array([-1.0, -1.5, -2.0])[:, None],
        M_delta=np.array([-10.0, 20.0, -35.0])[:, None],
    )
    gains = np.array([0.1, 0.4])
    sigma = np.array([1.0, 2.0, 3.0])[:, None]
    length = np.array([100.0, 300.0, 533.4])[:, None]
    kw = dict(rate_limit=0.1, authority=0.02)
    whole = turbulence_response(Loop(d, HW, gains), sigma, length, **kw)
    assert whole.rms_pitch_rate_rad_s.shape == (3, 2)
    for i in range(3):
        one = replace(d, **{f: getattr(d, f)[i, 0] for f in Derivatives.__dataclass_fields__})
        for j in range(2):
            r = turbulence_response(Loop(one, HW, gains[j]), sigma[i, 0], length[i, 0], **kw)
            for name in CONTRACT_FIELDS:
                assert getattr(whole, name)[i, j] == pytest.approx(float(getattr(r, name)), rel=1e-12), name


def test_the_standards_turbulence_per_condition():
    # A spec by severity gives each condition its own intensity and scale length (from
    # memory of MIL-F-8785C, tested in test_dryden.py); the study equals the explicit call.
    spec = TurbulenceSpec.from_severity("moderate")
    d = replace(TEXTBOOK_GA, airspeed=np.array([50.0, 70.0]))
    height = np.array([150.0, 3000.0])
    study = turbulence_for_spec(Loop(d, HW, np.asarray(0.3)), spec, height, rate_limit=0.1)
    sigma, length = spec.at(height)
    again = turbulence_study(Loop(d, HW, np.asarray(0.3)), sigma, length, rate_limit=0.1)
    np.testing.assert_array_equal(study.closed_loop.rms_load_factor_g, again.closed_loop.rms_load_factor_g)
    np.testing.assert_array_equal(study.closed_loop.scale_length_m, [150.0, 1750 * 0.3048])
    record = study.closed_loop.record(1)
    assert list(record) == list(CONTRACT_FIELDS) and all(isinstance(v, float) for v in record.values())
