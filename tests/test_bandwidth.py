"""Tests of the pitch-attitude bandwidth and phase delay."""

import numpy as np
import pytest
from scipy.optimize import brentq

from damper.measures.bandwidth import AttitudeBandwidth, attitude_bandwidth

GRID = np.logspace(-2, 3, 400)  # rad/s
SIX_DB = 10.0 ** (6.0 / 20.0)  # gain ratio of exactly 6 dB

ZETA4, WN4 = 0.1, 4.0  # lightly damped case, -, rad/s


def h_case(index, s):
    """theta/command of the analytic cases (s = j w, rad/s)."""
    if index == 0:
        return np.exp(-0.1 * s) / s  # integrator with 0.1 s delay
    if index == 1:
        return 1.0 / (s * (s + 1.0))  # integrator and first-order lag, no delay
    if index == 2:
        return 1.0 / (s * (s / 2.0 + 1.0) ** 2)  # integrator and double lag at 2 rad/s
    return 1.0 / (s * ((s / WN4) ** 2 + 2.0 * ZETA4 * s / WN4 + 1.0))


def batch_response(calls):
    def response(w):
        w = np.asarray(w, dtype=float)
        calls.append(w.shape)
        w = np.broadcast_to(w, (4, w.shape[1]))
        return np.stack([h_case(i, 1j * w[i]) for i in range(4)])

    return response


@pytest.fixture(scope="module")
def result():
    calls = []
    out = attitude_bandwidth(batch_response(calls), GRID)
    return out, calls


def test_delayed_integrator(result):
    r, _ = result
    assert isinstance(r, AttitudeBandwidth)
    # [derived] analytic: phase = -90 deg - 0.1 w, so -180 deg at w = pi/(2*0.1)
    # = 15.708 rad/s and -135 deg at pi/(4*0.1) = 7.854 rad/s.
    assert r.phase_crossover[0] == pytest.approx(np.pi / 0.2, rel=1e-9)
    assert r.bandwidth_phase[0] == pytest.approx(np.pi / 0.4, rel=1e-9)
    # [derived] analytic: |H| = 1/w, so G(w180) + 6 dB is at w180 / 10^(6/20).
    assert r.bandwidth_gain[0] == pytest.approx(np.pi / 0.2 / SIX_DB, rel=1e-9)
    assert r.bandwidth[0] == pytest.approx(np.pi / 0.4, rel=1e-9)
    # [derived] analytic: phase(2 w180) = -270 deg, tau_p = 90 deg / (2 w180) = 0.050 s.
    assert r.phase_delay[0] == pytest.approx(0.050, rel=1e-9)


def test_no_phase_crossover_gives_nan(result):
    r, _ = result
    # [derived] analytic (by hand): phase = -90 - atan(w) deg never reaches -180,
    # so omega_180, the gain bandwidth and tau_p are undefined (nan); the phase
    # reaches -135 deg where atan(w) = 45 deg, w = 1 rad/s, which is then omega_BW.
    assert np.isnan(r.phase_crossover[1])
    assert np.isnan(r.bandwidth_gain[1])
    assert np.isnan(r.phase_delay[1])
    assert r.bandwidth_phase[1] == pytest.approx(1.0, rel=1e-9)
    assert r.bandwidth[1] == pytest.approx(1.0, rel=1e-9)


def test_integrator_with_double_lag(result):
    r, _ = result
    # [derived] analytic (by hand): phase = -90 - 2 atan(w/2) deg: -180 at w = 2,
    # -135 at w = 2 tan(22.5 deg) = 2 (sqrt 2 - 1) rad/s.
    assert r.phase_crossover[2] == pytest.approx(2.0, rel=1e-9)
    assert r.bandwidth_phase[2] == pytest.approx(2.0 * (np.sqrt(2.0) - 1.0), rel=1e-9)
    # [derived] analytic: |H(2)| = 1/4; gain bandwidth solves w (1 + w^2/4) = 4 / 10^(6/20).
    roots = np.roots([0.25, 0.0, 1.0, -4.0 / SIX_DB])
    w_gain = roots[np.abs(roots.imag) < 1e-12].real.max()
    assert r.bandwidth_gain[2] == pytest.approx(w_gain, rel=1e-9)
    assert r.bandwidth[2] == pytest.approx(2.0 * (np.sqrt(2.0) - 1.0), rel=1e-9)
    # [derived] analytic: phase(4) = -90 - 2 atan(2) deg = -216.87 deg (principal
    # value +143.13 deg, so the branch matters): tau_p = (2 atan 2 - pi/2) / 4 s.
    assert r.phase_delay[2] == pytest.approx((2.0 * np.arctan(2.0) - np.pi / 2.0) / 4.0, rel=1e-9)


def test_lightly_damped_case_is_gain_limited(result):
    r, _ = result
    # [derived] analytic (by hand): the second-order phase is -90 deg at w = wn,
    # so omega_180 = wn; -45 deg where 2 zeta x / (1 - x^2) = 1, x = sqrt(1 + zeta^2) - zeta.
    assert r.phase_crossover[3] == pytest.approx(WN4, rel=1e-9)
    x = np.sqrt(1.0 + ZETA4**2) - ZETA4
    assert r.bandwidth_phase[3] == pytest.approx(x * WN4, rel=1e-9)
    # [derived] analytic: |H(wn)| = 1/(2 zeta wn); the 6 dB point lies well below
    # the resonance (root found here with brentq on the closed-form gain).
    target = SIX_DB / (2.0 * ZETA4 * WN4)
    w_gain = brentq(lambda w: abs(h_case(3, 1j * w)) - target, 0.01, 0.5 * WN4, xtol=1e-14)
    assert r.bandwidth_gain[3] == pytest.approx(w_gain, rel=1e-9)
    assert r.bandwidth_gain[3] < r.bandwidth_phase[3]  # gain-limited
    assert r.bandwidth[3] == r.bandwidth_gain[3]
    # [derived] analytic: at x = 2 the second-order phase is -(180 - atan(4 zeta/3)) deg,
    # so tau_p = (pi/2 - atan(4 zeta / 3)) / (2 wn) s.
    expected = (np.pi / 2.0 - np.arctan(4.0 * ZETA4 / 3.0)) / (2.0 * WN4)
    assert r.phase_delay[3] == pytest.approx(expected, rel=1e-9)


def test_response_called_with_batched_arrays(result):
    # common practice: the callable sees (1, nw) once, then (N, k) arrays only.
    _, calls = result
    assert calls[0] == (1, GRID.size)
    assert all(len(c) == 2 and c[0] == 4 for c in calls[1:])
    assert len(calls) < 200  # bisection is batched, not per system


def test_single_system_and_bad_grid():
    # [derived] analytic: same delayed integrator alone, coarser grid.
    r = attitude_bandwidth(lambda w: np.exp(-0.1j * w) / (1j * w), np.logspace(-1, 2, 60))
    assert r.phase_crossover.shape == (1,)
    assert r.phase_crossover[0] == pytest.approx(np.pi / 0.2, rel=1e-9)
    assert r.phase_delay[0] == pytest.approx(0.050, rel=1e-9)
    with pytest.raises(ValueError):
        attitude_bandwidth(lambda w: 1.0 / (1j * w), np.array([1.0, 0.5, 2.0]))


@pytest.mark.parametrize("depth", [2, 5, 8])
def test_several_bisection_steps_per_call_give_the_one_step_answer_bit_for_bit(monkeypatch, depth):
    # [derived] the tree of midpoints holds exactly the points one-at-a-time bisection visits
    # (each 0.5 * (a + b) of the bracket it halves), so the answer cannot depend on how many
    # steps one response call serves; fewer calls is the only difference.
    import damper.measures.bandwidth as bw

    def run(d):
        monkeypatch.setattr(bw, "_tree_depth", lambda n_sys: d)
        calls = []
        return attitude_bandwidth(batch_response(calls), GRID), len(calls)

    one, n_one = run(1)
    many, n_many = run(depth)
    for name in ("phase_crossover", "bandwidth_phase", "bandwidth_gain", "bandwidth", "phase_delay"):
        np.testing.assert_array_equal(getattr(many, name), getattr(one, name), err_msg=name)
    assert n_many < n_one
