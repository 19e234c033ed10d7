"""Stability margins against analytic loops and python-control as an oracle."""

import control
import numpy as np
import pytest

from damper.analysis.assess import assess_loop
from damper.measures.margins import loop_margins
from damper.model.airframe import Derivatives
from damper.model.batch import map_arrays
from damper.model.elements import Delay, Lag, SecondOrderLag, Washout
from damper.model.loop import Hardware, Loop, closed_loop_matrix, loop_response, to_control

from .conftest import TEXTBOOK_GA, random_derivatives

# [derived] an airframe whose pitch-rate response is exactly -1/(s+1) (the alpha mode at
# -2 cancels): a11 = -2, a12 = 1, a21 = 0, a22 = -1, b2 = -1 (V = 50 m/s).
UNIT_LAG_AIRFRAME = Derivatives(50.0, -100.0, 0.0, 0.0, 0.0, 0.0, -1.0, -1.0)


def test_third_order_lag_gain_margin():
    # [derived] L = K/(s+1)^3 crosses -180 deg at sqrt(3) rad/s with |L| = K/8, so GM = 8/K
    # (shared/references.md s.3, "analytic loop checks").
    K = np.array([0.5, 1.0, 2.0, 4.0])
    loop = Loop(UNIT_LAG_AIRFRAME, Hardware(actuator=Lag(1.0), sensor=Lag(1.0)), K)
    L = loop_response(loop, np.array([0.3, 2.0]))
    np.testing.assert_allclose(L, K[:, None] / (1 + 1j * np.array([0.3, 2.0])) ** 3, rtol=1e-12)
    m = loop_margins(loop)
    np.testing.assert_allclose(m.gain_margin_db, 20 * np.log10(8 / K), rtol=1e-9)
    np.testing.assert_allclose(m.phase_crossover_rad_s, np.sqrt(3), rtol=1e-9)
    # K = 4: gain crossing where (1 + w^2)^(3/2) = 4 [derived]
    wc = np.sqrt(4 ** (2 / 3) - 1)
    assert m.gain_crossover_rad_s[3] == pytest.approx(wc, rel=1e-9)
    assert m.phase_margin_deg[3] == pytest.approx(180 - 3 * np.degrees(np.arctan(wc)), rel=1e-9)
    # K = 0.5 never reaches |L| = 1: no gain crossing, no phase margin (null)
    assert np.isnan(m.phase_margin_deg[0]) and np.isnan(m.delay_margin_s[0])


def _oracle(L):
    """python-control margins of a delay-free loop: (upward GMs dB, all PMs deg)."""
    gm, pm, sm, wpc, wgc, wms = control.stability_margins(L, returnall=True)
    gm = np.atleast_1d(gm)
    gm_db = 20 * np.log10(gm[np.isfinite(gm) & (gm > 0)])
    return gm_db, np.atleast_1d(pm), np.atleast_1d(wgc), np.atleast_1d(wpc)


def test_margins_match_python_control_on_random_loops(rng):
    # Oracle: control.stability_margins(returnall=True) on the exported loop (no delay: exact).
    n = 40
    d = random_derivatives(rng, n, unstable_fraction=0.2)
    K = rng.uniform(0.02, 3.0, n)
    hw = Hardware(actuator=Lag(1 / 15.0), sensor=SecondOrderLag(80.0, 0.5), washout=Washout(0.8))
    loop = Loop(d, hw, K)
    m = loop_margins(loop)
    checked = 0
    for i in range(n):
        L = to_control(loop, (i,), "loop")
        gm_db, pm, wgc, wpc = _oracle(L)
        ours_pc = m.phase_crossings_rad_s[i][np.isfinite(m.phase_crossings_rad_s[i])]
        ours_gm = m.gain_margins_db[i][np.isfinite(m.gain_margins_db[i])]
        theirs_pc = wpc[np.isfinite(wpc) & (wpc > 0)]
        # every oracle phase crossing inside our grid (1e-3..1e3 rad/s) is found with its margin
        for w, g in zip(theirs_pc, gm_db[: len(theirs_pc)] if len(gm_db) == len(theirs_pc) else [None] * len(theirs_pc)):
            if 1e-3 < w < 1e3:
                j = np.argmin(np.abs(ours_pc - w))
                assert ours_pc[j] == pytest.approx(w, rel=1e-6)
                if g is not None:
                    assert ours_gm[j] == pytest.approx(g, abs=1e-6)
                checked += 1
        ours_gc = m.gain_crossings_rad_s[i][np.isfinite(m.gain_crossings_rad_s[i])]
        ours_pm = m.phase_margins_deg[i][np.isfinite(m.phase_margins_deg[i])]
        for w, p in zip(wgc, pm):
            if np.isfinite(w) and 1e-3 < w < 1e3:
                j = np.argmin(np.abs(ours_gc - w))
                assert ours_gc[j] == pytest.approx(w, rel=1e-6)
                assert (ours_pm[j] - p + 180) % 360 - 180 == pytest.approx(0, abs=1e-5)
                checked += 1
    assert checked > 40


def test_gain_margin_cross_check_puts_a_pole_on_the_axis():
    # design.md s.5: scaling the gain by the gain margin puts a closed-loop pole on the
    # imaginary axis. Pade order 8 makes the state-space delay error negligible here.
    hw = Hardware(actuator=Lag(1 / 20.0), sensor=Lag(0.01), washout=Washout(1.0), delay=Delay(np.asarray(0.03), 8))
    K = np.array([0.1, 0.3, 0.6])
    res = assess_loop(Loop(TEXTBOOK_GA, hw, K))
    gm = res.margins.gain_margin_db
    assert np.all(np.isfinite(gm))
    K_edge = K * 10 ** (gm / 20)
    A, _, lay = closed_loop_matrix(Loop(TEXTBOOK_GA, hw, K_edge))
    lam = np.linalg.eigvals(A)
    closest = lam[np.arange(3), np.argmin(np.abs(lam.real), -1)]
    np.testing.assert_allclose(closest.real, 0, atol=1e-6)
    np.testing.assert_allclose(np.abs(closest.imag), res.margins.phase_crossover_rad_s, rtol=1e-5)


def test_delay_margin_makes_the_loop_marginal():
    # [derived] extra delay = delay margin rotates the phase at the gain crossing to -180 deg.
    hw = Hardware(actuator=Lag(1 / 20.0), washout=Washout(1.0))
    loop = Loop(TEXTBOOK_GA, hw, 1.0)
    m = loop_margins(loop)
    wc = m.gain_crossings_rad_s[np.isfinite(m.gain_crossings_rad_s)]
    dm = float(m.delay_margin_s)
    L = loop_response(loop, wc) * np.exp(-1j * wc * dm)
    hit = np.min(np.abs(L + 1))
    assert hit < 1e-8


def test_disk_margin_against_python_control(rng):
    # Oracle: control.disk_margins (skew 0, balanced) on a dense grid; and the disk's
    # gain/phase from Seiler, Packard and Gahinet (IEEE CSM 2020), from memory.
    d = random_derivatives(rng, 6)
    K = rng.uniform(0.05, 1.0, 6)
    hw = Hardware(actuator=Lag(1 / 20.0), washout=Washout(1.0))
    loop = Loop(d, hw, K)
    m = loop_margins(loop, stable=np.ones(6, bool))
    omega = np.logspace(-3, 3, 20001)
    for i in range(6):
        dm, dgm, dpm = control.disk_margins(to_control(loop, (i,), "loop"), omega, skew=0.0)
        assert m.disk_margin[i] == pytest.approx(dm, rel=1e-4)
        assert m.disk_phase_margin_deg[i] == pytest.approx(dpm, rel=1e-4)


def test_disk_margin_closed_form():
    # [derived] L = K/(s+1)^2: S - T = ((s+1)^2 - K)/((s+1)^2 + K); alpha = 2 / max|S - T|.
    K = 3.0
    loop = Loop(UNIT_LAG_AIRFRAME, Hardware(actuator=Lag(1.0)), K)
    m = loop_margins(loop, stable=True)
    w = np.logspace(-3, 3, 200001)
    s = 1j * w
    peak = np.max(np.abs(((s + 1) ** 2 - K) / ((s + 1) ** 2 + K)))
    assert float(m.disk_margin) == pytest.approx(2 / peak, rel=1e-7)


def test_unstable_loop_has_no_margins_but_keeps_its_crossings():
    # An unstable closed loop has no stability margins: every margin value is null, while
    # its gain and phase crossings stay listed (docs/theory.md s.5). The phase margin of a
    # stable loop is the distance to instability (>= 0); its signed value is kept beside it.
    hw = Hardware(actuator=Lag(1 / 20.0), washout=Washout(1.0), delay=Delay(np.asarray(0.03), 3))
    res = assess_loop(Loop(TEXTBOOK_GA, hw, np.array([1.0, 5.0])))
    m = res.margins
    assert res.modes.stable.tolist() == [True, False]
    for name in ("gain_margin_db", "gain_margin_low_db", "phase_margin_deg", "phase_margin_signed_deg",
                 "gain_crossover_rad_s", "delay_margin_s", "disk_margin", "disk_phase_margin_deg"):
        assert np.isnan(getattr(m, name)[1]), name
    assert np.isfinite(m.gain_crossings_rad_s[1]).any() and np.isfinite(m.phase_crossings_rad_s[1]).any()
    assert m.phase_margin_deg[0] == pytest.approx(abs(m.phase_margin_signed_deg[0]))
    assert m.phase_margin_deg[0] > 0 and m.delay_margin_s[0] > 0 and 0 < m.disk_margin[0] < 2


def test_dc_phase_crossing_of_a_divergent_airframe():
    # [derived] statically unstable airframe with no washout: L(0) < 0 is a phase crossing
    # at zero frequency; the gain at which the real pole crosses the origin is 1/|L(0)|.
    d = Derivatives(50.0, -100.0, 0.0, 0.0, 6.0, 0.0, -1.0, -10.0)
    K = 0.05
    loop = Loop(d, Hardware(), K)
    L0 = loop_response(loop, np.array([0.0]))[0].real
    assert L0 < 0
    m = loop_margins(loop)
    assert 0.0 in m.phase_crossings_rad_s.tolist()
    # at K/|L0| the closed loop has an eigenvalue at the origin
    A, _, _ = closed_loop_matrix(Loop(d, Hardware(), K / abs(L0)))
    assert np.min(np.abs(np.linalg.eigvals(A))) < 1e-9


def test_grid_cannot_step_over_a_touching_gain_crossing():
    # A lightly damped sensor resonance lifts |L| just above 1 in a narrow band that a
    # coarse grid (20 points per decade) sees only as a peak 0.05 dB below 1; the
    # touch check must still find both crossings, as a dense reference grid does.
    hw = Hardware(actuator=Lag(1 / 30.0), sensor=SecondOrderLag(50.0, 0.05))
    base = Loop(TEXTBOOK_GA, hw, 1.0)
    w_fine = np.logspace(1.5, 2, 200001)
    k_peak = 10 ** (0.1 / 20) / np.abs(loop_response(base, w_fine)).max()
    loop = Loop(TEXTBOOK_GA, hw, k_peak)
    coarse = np.logspace(-3, 3, 121)
    grid_db = 20 * np.log10(np.abs(loop_response(loop, coarse[coarse > 30])))
    assert -1.0 < grid_db.max() < 0.0  # precondition: the grid alone shows no crossing there
    found = loop_margins(loop, w=coarse).gain_crossings_rad_s
    found = found[np.isfinite(found) & (found > 30)]
    mag = np.abs(loop_response(loop, w_fine)) - 1
    want = w_fine[:-1][np.sign(mag[:-1]) != np.sign(mag[1:])]
    assert want.size == 2
    np.testing.assert_allclose(np.sort(found), want, rtol=1e-5)


def test_batched_margins_equal_one_at_a_time(rng):
    d = random_derivatives(rng, 7)
    K = rng.uniform(0.05, 2.0, 7)
    hw = Hardware(actuator=Lag(1 / 20.0), washout=Washout(1.0), delay=Delay(np.asarray(0.02), 2))
    batch = loop_margins(Loop(d, hw, K), chunk=3)
    for i in range(7):
        one = loop_margins(Loop(map_arrays(d, lambda a: a[i]), hw, K[i]))
        for f in ("gain_margin_db", "phase_margin_deg", "delay_margin_s", "disk_margin", "gain_crossover_rad_s"):
            a, b = getattr(one, f), getattr(batch, f)[i]
            assert (np.isnan(a) and np.isnan(b)) or a == pytest.approx(b, rel=1e-12), f


def test_disk_ratio_in_real_arithmetic_equals_the_complex_formula():
    # [derived] |(1 - L)/(1 + L)| from ln|L| and arg L equals the complex expression,
    # for |L| below, at and far above 1 (no overflow), and is inf at L = -1.
    from damper.measures.margins import disk_ratio

    rng = np.random.default_rng(9)
    mag = np.concatenate([10.0 ** rng.uniform(-6, 6, 200), [1.0, 1e200, 1e-300]])
    phase = np.concatenate([rng.uniform(-np.pi, np.pi, 200), [0.3, 2.0, 1.0]])
    L = mag * np.exp(1j * phase)
    expected = np.abs((1.0 - L) / (1.0 + L))
    np.testing.assert_allclose(disk_ratio(np.log(mag), phase), expected, rtol=1e-9)
    assert disk_ratio(np.array([0.0]), np.array([np.pi]))[0] > 1e15
