"""Time responses with actuator limits: oracles are scipy's linear simulation of the
closed loop exported by damper.model.loop, analytic free-oscillation results, and the
limits' own definitions. All airframe numbers are invented."""

import json
import math
import os

import numpy as np
import pytest
import scipy.signal as sig

from damper.analysis.response import (
    Input,
    gust_angle,
    input_end,
    measure,
    pilot_command,
    respond,
    respond_case,
    resolve_responses,
    simulate,
)
from damper.atmosphere import G0
from damper.case import load_case_text
from damper.errors import CaseError
from damper.measures.modes import bare_short_period
from damper.model.airframe import Derivatives, state_matrices
from damper.model.elements import Delay, Lag, LeadLag, Notch, SecondOrderLag, Washout
from damper.model.loop import Hardware, Loop, closed_loop_matrix, to_control

DEG = math.pi / 180.0


def invented(n=3):
    """Three invented conditions: lightly to moderately damped short periods."""
    return Derivatives(
        airspeed=np.array([200.0, 120.0, 70.0])[:n],
        Z_alpha=np.array([-400.0, -250.0, -150.0])[:n],
        Z_q=np.array([0.0, -2.0, -1.0])[:n],
        Z_delta=np.array([-25.0, -30.0, -15.0])[:n],
        M_alpha=np.array([-20.0, -9.0, -6.0])[:n],
        M_alpha_dot=np.array([-0.2, -0.2, -0.3])[:n],
        M_q=np.array([-0.8, -0.6, -0.5])[:n],
        M_delta=np.array([-25.0, -18.0, -12.0])[:n],
    )


def one(d, i):
    return Derivatives(**{f: np.asarray(getattr(d, f))[i] for f in Derivatives.__dataclass_fields__})


def lsim_closed(loop, index, u, t, gust=None):
    """Oracle: scipy.signal.lsim (zero-order hold: exact for inputs constant between
    samples) on python-control's export of the linear closed loop. `u` is the nose-up
    pilot command; it reaches the actuator input as sign(M_delta) u (docs/theory.md s.1).
    With `gust`, the gust angle enters as the first column of the airframe matrix
    ([derived] from alpha_aero = alpha + alpha_g in both equations)."""
    sys = to_control(loop, index, "closed")
    B = np.asarray(sys.B)
    md = np.asarray(loop.airframe.M_delta, dtype=float)
    md = np.broadcast_to(md, np.broadcast_shapes(md.shape, np.shape(loop.gain)))[index]
    u = np.sign(md) * np.asarray(u)
    U = np.asarray(u)[:, None]
    if gust is not None:
        layout = closed_loop_matrix(loop)[2]
        A_air, _ = state_matrices(loop.airframe)
        A_air = np.broadcast_to(A_air, np.broadcast_shapes(A_air.shape[:-2], np.shape(loop.gain)) + (2, 2))[index]
        E = np.zeros((B.shape[0], 1))
        E[layout.alpha, 0] = A_air[0, 0]
        E[layout.q, 0] = A_air[1, 0]
        B = np.hstack([B, E])
        U = np.column_stack([u, gust])
    _, y, _ = sig.lsim((np.asarray(sys.A), B, np.asarray(sys.C), np.zeros((2, B.shape[1]))), U, t, interp=False)
    return y[:, 0], y[:, 1]


def rel(a, b):
    return np.max(np.abs(np.asarray(a) - np.asarray(b))) / np.max(np.abs(b))


DOUBLET = Input("doublet", amplitude=2 * DEG, start=0.2, half_period=0.4)  # a pull first


# ---------------------------------------------------------------------------
# linear loop against a linear simulation
# ---------------------------------------------------------------------------


@pytest.mark.parametrize(
    "hardware",
    [
        Hardware(),
        Hardware(actuator=Lag(0.04), washout=Washout(1.0)),
        Hardware(actuator=SecondOrderLag(45.0, 0.7), sensor=Lag(0.01), washout=Washout(1.5),
                 filters=(LeadLag(0.05, 0.02), Notch(60.0, 0.05, 0.5))),
    ],
    ids=["ideal", "lag+washout", "second-order+filters"],
)
def test_unlimited_loop_matches_linear_simulation(hardware):
    d = invented()
    loop = Loop(d, hardware, np.array([0.3, 0.2, 0.15]))
    h = simulate(loop, DOUBLET, duration=3.0, step=1e-3)
    u = pilot_command(DOUBLET, h.time + 0.5e-3)  # value held over each step (midpoint)
    for i in range(3):
        alpha, q = lsim_closed(loop, (i,), u, h.time)
        # tolerance 1e-6 of the peak: common practice for a 4th-order method at 1 ms
        # (measured about 1e-8 here)
        assert rel(h.q[i], q) < 1e-6
        assert rel(h.alpha[i], alpha) < 1e-6
    # pitch attitude is the integral of q [derived]: trapezoid rule on 1 ms samples
    theta = np.concatenate([np.zeros((3, 1)), np.cumsum(0.5 * (h.q[:, 1:] + h.q[:, :-1]), -1) * 1e-3], -1)
    assert rel(h.theta, theta) < 1e-5


def test_gust_matches_linear_simulation_and_load_factor_definition():
    d = invented()
    loop = Loop(d, Hardware(actuator=Lag(0.04), washout=Washout(1.0)), 0.25)
    for gust in (
        Input("gust_sharp", gust_velocity=8.0, start=0.1),
        Input("gust_one_minus_cosine", gust_velocity=10.0, gust_length=60.0, start=0.1),
    ):
        h = simulate(loop, gust, duration=2.0, step=1e-3)
        for i in range(3):
            ag = gust_angle(gust, h.time, d.airspeed[i])
            if gust.kind == "gust_sharp":
                ag_zoh = gust_angle(gust, h.time + 0.5e-3, d.airspeed[i])
                alpha, q = lsim_closed(loop, (i,), np.zeros_like(h.time), h.time, ag_zoh)
                tol = 1e-6  # exact ZOH oracle, as above
            else:
                # the smooth 1-cosine against a 0.1 ms zero-order-hold oracle (midpoint
                # samples): its O(dt^2) error sets the tolerance [derived]
                tf = np.arange(0, 2.0 + 5e-5, 1e-4)
                agf = gust_angle(gust, tf + 5e-5, d.airspeed[i])
                alpha, q = lsim_closed(loop, (i,), np.zeros_like(tf), tf, agf)
                alpha, q = alpha[::10], q[::10]
                tol = 1e-5
            assert rel(h.q[i], q) < tol
            assert rel(h.alpha[i], alpha) < tol
            np.testing.assert_allclose(h.gust_alpha[i], ag, atol=1e-15)
        # n_z = V (q - alpha') / g0 at the centre of gravity [derived from the alpha' equation];
        # numerical derivative on 1 ms samples, compared away from the sharp edge
        alpha_dot = np.gradient(h.alpha, 1e-3, axis=-1)
        nz = d.airspeed[:, None] * (h.q - alpha_dot) / G0
        ok = np.abs(h.time - 0.1) > 0.01
        assert rel(h.load_factor[:, ok], nz[:, ok]) < 1e-3


def test_upward_gust_raises_load_factor_and_pitches_nose_down():
    # [derived] an upward gust raises the aerodynamic angle of attack; a statically stable
    # airframe (M_alpha < 0) answers nose down and with positive load factor at once.
    d = invented(1)
    h = simulate(Loop(d, Hardware(), 0.0), Input("gust_sharp", gust_velocity=5.0, start=0.1), duration=1.0)
    k = np.searchsorted(h.time, 0.15)
    assert h.load_factor[0, k] > 0 and h.q[0, k] < 0


# ---------------------------------------------------------------------------
# delay
# ---------------------------------------------------------------------------


@pytest.mark.parametrize("delay", [0.02, 0.0173, 0.0004])
def test_delay_matches_high_order_pade(delay):
    # Oracle: the closed loop with an order-8 Pade delay (phase error below 1e-12 rad
    # up to 50 rad/s for these delays, standard Pade error bound); the exact delay
    # is read by cubic Hermite interpolation (error O(step^4)). Tolerance 1e-6 of the
    # peak (common practice; measured about 1e-8). 0.4 ms is shorter than the step,
    # so the step is divided.
    d = invented()
    hw = Hardware(actuator=Lag(0.04), washout=Washout(1.0), delay=Delay(np.asarray(delay), 8))
    loop = Loop(d, hw, np.array([0.3, 0.2, 0.15]))
    h = simulate(loop, DOUBLET, duration=2.0, step=1e-3)
    assert h.substeps == (3 if delay < 1e-3 else 1)
    u = pilot_command(DOUBLET, h.time + 0.5e-3)  # value held over each step (midpoint)
    for i in range(3):
        alpha, q = lsim_closed(loop, (i,), u, h.time)
        assert rel(h.q[i], q) < 1e-6
        assert rel(h.alpha[i], alpha) < 1e-6


def test_delay_holds_off_the_damper_exactly():
    # [derived] with an ideal actuator and sensor, the damper command is zero until the
    # pitch rate (which starts moving at the input start) has passed the delay.
    d = invented(1)
    T = 0.05
    step = Input("step", amplitude=-1 * DEG, start=0.2)
    both = respond(Loop(d, Hardware(delay=Delay(np.asarray(T), 2)), 0.3), step, duration=1.0)
    t = both.augmented.time
    before = t <= 0.2 + T
    aug, bare = both.augmented.q[0], both.bare.q[0]
    np.testing.assert_array_equal(aug[before], bare[before])
    assert np.max(np.abs(aug[t > 0.3] - bare[t > 0.3])) > 1e-3


# ---------------------------------------------------------------------------
# measures
# ---------------------------------------------------------------------------


def test_time_to_half_and_overshoot_of_free_oscillation():
    # [derived] after a pulse into an ideal actuator, the bare airframe oscillates freely:
    # q = e^(-zeta wn t) (a cos wd t + b sin wd t), whose peaks of |q| fall by
    # exp(-pi zeta / sqrt(1 - zeta^2)) each and whose envelope halves in ln 2 / (zeta wn).
    d = invented()
    pulse = Input("pulse", amplitude=-2 * DEG, start=0.1, duration=0.15)
    h = simulate(Loop(d, Hardware(), 0.0), pulse, duration=5.0, step=1e-3)
    m = measure(h)
    sp = bare_short_period(d)
    assert np.all(sp.damping_ratio < 0.6)
    # tolerance 1e-4 relative: parabolic peak refinement on 1 ms samples [derived: the
    # peak-time error is below 1e-6 s for these periods]
    np.testing.assert_allclose(m.time_to_half, math.log(2) / (sp.damping_ratio * sp.natural_frequency), rtol=1e-4)
    z = sp.damping_ratio
    np.testing.assert_allclose(m.overshoot, np.exp(-math.pi * z / np.sqrt(1 - z * z)), rtol=1e-4)
    np.testing.assert_allclose(m.input_end, 0.25)


def test_step_overshoot_is_the_classic_one():
    # [derived] for a step the reference is the deviation at the start, so the measured
    # overshoot is the classic (q_peak - q_f) / |q_f| (docs/responses.md); the parabolic
    # peak refinement moves it by less than 1e-4 relative on 1 ms samples.
    d = invented(1)
    h = simulate(Loop(d, Hardware(), 0.0), Input("step", amplitude=1 * DEG, start=0.1), duration=6.0)  # a pull
    m = measure(h)
    q = h.q[0]
    qf = q[-1]
    assert m.overshoot[0] == pytest.approx((np.max(q) - qf) / abs(qf), rel=1e-4)


def test_settling_time_definition():
    d = invented(1)
    h = simulate(Loop(d, Hardware(), 0.0), DOUBLET, duration=5.0)
    m = measure(h)
    e = np.abs(h.q[0])  # after a doublet the final value is trim, q_f = 0 (docs/responses.md)
    band = 0.05 * e.max()
    t_s = float(m.settling_time[0]) + float(m.input_end[0])
    # [derived] outside the band just before, inside from then on (one sample of slack)
    assert np.all(e[h.time > t_s + 1e-3] <= band)
    assert e[np.searchsorted(h.time, t_s) - 1] > band


# ---------------------------------------------------------------------------
# limits
# ---------------------------------------------------------------------------


@pytest.mark.parametrize("actuator", [Lag(1 / 20.0), SecondOrderLag(30.0, 0.7)], ids=["lag", "second-order"])
def test_rate_limit_binds(actuator):
    # [derived] a 3 deg doublet into a 20 rad/s servo asks for about 60 deg/s; the limit is 10 deg/s.
    d = invented(2)
    loop = Loop(d, Hardware(actuator=actuator, washout=Washout(1.0)), 0.2)
    inp = Input("doublet", amplitude=-3 * DEG, start=0.2, half_period=0.5)
    R = 10 * DEG
    lim = simulate(loop, inp, duration=2.0, rate_limit=R)
    free = simulate(loop, inp, duration=2.0)
    ml, mf = measure(lim), measure(free)
    np.testing.assert_allclose(ml.peak_surface_rate, R, rtol=1e-12)  # the limit's definition
    assert np.all(np.abs(lim.surface_rate) <= R * (1 + 1e-12))
    assert np.all(ml.time_at_rate_limit > 0.05)
    assert np.all(mf.peak_surface_rate > 3 * R)
    assert np.all(mf.time_at_rate_limit == 0)
    assert rel(lim.q, free.q) > 0.05


@pytest.mark.parametrize(
    "actuator", [None, Lag(1 / 20.0), SecondOrderLag(30.0, 0.7)], ids=["ideal", "lag", "second-order"]
)
def test_travel_limit_binds(actuator):
    d = invented(2)
    loop = Loop(d, Hardware(actuator=actuator), 0.2)
    inp = Input("doublet", amplitude=-2 * DEG, start=0.2, half_period=0.5)
    travel = 1 * DEG
    lim = simulate(loop, inp, duration=2.0, travel=travel)
    free = simulate(loop, inp, duration=2.0)
    ml = measure(lim)
    np.testing.assert_allclose(ml.peak_surface, travel, rtol=1e-12)  # the limit's definition
    assert np.all(np.abs(lim.surface) <= travel * (1 + 1e-12))
    assert np.all(ml.time_at_position_limit > 0.2)
    assert np.all(measure(free).time_at_position_limit == 0)
    assert rel(lim.q, free.q) > 0.05


def test_ideal_actuator_ignores_rate_limit_with_a_note():
    h = simulate(Loop(invented(1), Hardware(), 0.1), DOUBLET, duration=1.0, rate_limit=0.1)
    assert any("rate limit ignored" in n for n in h.notes)


# ---------------------------------------------------------------------------
# batches
# ---------------------------------------------------------------------------


def test_batched_equals_each_condition_alone():
    # conditions x gains, with delay, washout and both limits binding somewhere
    d = invented()
    d2 = Derivatives(**{f: np.asarray(getattr(d, f))[:, None] for f in Derivatives.__dataclass_fields__})
    hw = Hardware(actuator=Lag(0.05), sensor=Lag(0.01), washout=Washout(1.0), delay=Delay(np.asarray(0.015), 2))
    gains = np.array([[0.1, 0.4], [0.2, 0.5], [0.05, 0.6]])
    inp = Input("doublet", amplitude=-3 * DEG, start=0.2, half_period=np.array([[0.4], [0.6], [0.8]]))
    kw = dict(duration=1.5, step=2e-3, rate_limit=20 * DEG, travel=2.5 * DEG)
    both = respond(Loop(d2, hw, gains), inp, **kw)
    assert both.augmented.q.shape == (3, 2, 751)
    assert np.any(both.augmented_measures.time_at_rate_limit > 0)
    assert np.any(both.augmented_measures.time_at_position_limit > 0)
    for i in range(3):
        for j in range(2):
            alone = respond(Loop(one(d, i), hw, gains[i, j]), Input("doublet", amplitude=-3 * DEG, start=0.2,
                                                                      half_period=[0.4, 0.6, 0.8][i]), **kw)
            for name in ("alpha", "q", "theta", "load_factor", "surface", "surface_rate"):
                np.testing.assert_allclose(getattr(both.augmented, name)[i, j], getattr(alone.augmented, name),
                                           rtol=1e-12, atol=1e-15)
                np.testing.assert_allclose(getattr(both.bare, name)[i, j], getattr(alone.bare, name),
                                           rtol=1e-12, atol=1e-15)
            for f in ("time_to_half", "overshoot", "peak_surface_rate", "time_at_rate_limit"):
                np.testing.assert_allclose(getattr(both.augmented_measures, f)[i, j],
                                           getattr(alone.augmented_measures, f), rtol=1e-12)


# ---------------------------------------------------------------------------
# inputs
# ---------------------------------------------------------------------------


def test_input_shapes():
    t = np.array([0.0, 0.19, 0.2, 0.59, 0.6, 0.99, 1.0, 1.5])
    np.testing.assert_array_equal(pilot_command(Input("doublet", amplitude=1.0, start=0.2, half_period=0.4), t),
                                  [0, 0, 1, 1, -1, -1, 0, 0])
    np.testing.assert_array_equal(pilot_command(Input("pulse", amplitude=2.0, start=0.2, duration=0.4), t),
                                  [0, 0, 2, 2, 0, 0, 0, 0])
    np.testing.assert_array_equal(pilot_command(Input("step", amplitude=3.0, start=0.2), t), [0, 0, 3, 3, 3, 3, 3, 3])
    # 1-cosine: peak w_g at half the length, L/V long [derived from the definition]
    g = Input("gust_one_minus_cosine", gust_velocity=10.0, gust_length=50.0, start=0.2)
    assert gust_angle(g, 0.2 + 25.0 / 100.0, 100.0) == pytest.approx(0.1)
    assert gust_angle(g, 0.2 + 50.0 / 100.0 + 1e-9, 100.0) == 0.0
    assert input_end(g, 100.0) == pytest.approx(0.7)
    assert gust_angle(Input("gust_sharp", gust_velocity=5.0, start=0.2), 0.2, 100.0) == pytest.approx(0.05)
    with pytest.raises(ValueError):
        Input("ramp")


# ---------------------------------------------------------------------------
# case file and command line
# ---------------------------------------------------------------------------

CASE = """
title: Invented light jet, damper response check
aircraft: {mass: "4800 kg", pitch_inertia: "16000 kg*m**2"}
conditions:
  - name: cruise
    airspeed: 200
    altitude: "8000 m"
    derivatives: {Z_alpha: -400, Z_delta: -25, M_alpha: -20, M_alpha_dot: -0.2, M_q: -0.8, M_delta: -25}
  - name: approach
    airspeed: 70
    altitude: "500 m"
    derivatives: {Z_alpha: -260, Z_q: -1, Z_delta: -15, M_alpha: -6, M_alpha_dot: -0.6, M_q: -2.0, M_delta: -12}
loop:
  actuator: {bandwidth: 25, rate_limit: "30 deg/s", travel: "4 deg"}
  washout: {time_constant: 1.0}
  delay: 0.01
  sample_rate: 100
"""

RESPONSES = """
responses:
  duration: 3
  step: "2 ms"
  output_step: "20 ms"
  inputs:
    - {kind: doublet, amplitude: "-3 deg", half_period: 0.4, start: 0.2}
    - {kind: gust_one_minus_cosine, gust_velocity: "8 m/s", gust_length: "40 m", name: gust}
"""


def test_default_responses_section():
    case = load_case_text(CASE, "test.yaml")
    spec = resolve_responses(case)
    assert spec.default and len(spec.inputs) == 1
    inp = spec.inputs[0]
    assert inp.kind == "doublet" and float(inp.amplitude) == pytest.approx(2 * DEG)  # a pull first
    # half the bare short-period period at each condition (docs/responses.md)
    sp = bare_short_period(case.derivatives())
    np.testing.assert_allclose(inp.half_period, 0.5 * sp.period)


def test_case_responses_and_limits_from_the_case():
    case = load_case_text(CASE + RESPONSES, "test.yaml")
    spec = resolve_responses(case)
    assert (spec.duration, spec.step, spec.output_step) == (3.0, 0.002, 0.02)
    assert [x.label for x in spec.inputs] == ["doublet", "gust"]
    res = respond_case(case, [0.2, 0.3], spec)
    assert res.rate_limit == pytest.approx(30 * DEG) and res.travel == pytest.approx(4 * DEG)
    m = res.responses[0].augmented_measures
    assert m.peak_surface_rate.shape == (2,)
    assert np.all(m.peak_surface_rate <= 30 * DEG * (1 + 1e-12))
    assert res.responses[0].augmented.q.shape == (2, 1501)


@pytest.mark.parametrize(
    "inputs, message",
    [
        ("[{kind: pulse, amplitude: 0.02}]", "needs duration"),
        ("[{kind: gust_sharp, gust_velocity: 5, gust_length: 30}]", "does not belong"),
        ("[{kind: gust_one_minus_cosine, gust_velocity: 5}]", "needs gust_length"),
        ("[{kind: doublet, amplitud: 0.02}]", "did you mean 'amplitude'"),
        ("[{kind: doublet, half_period: 2, start: 0.5}]", "not before responses.duration"),
    ],
)
def test_bad_responses_section(inputs, message):
    text = CASE + f"responses:\n  duration: 4\n  inputs: {inputs}\n"
    with pytest.raises(CaseError, match=message) as info:
        resolve_responses(load_case_text(text, "test.yaml"))
    assert "responses.inputs" in str(info.value)


def test_respond_command_writes_files_and_refuses_to_overwrite(tmp_path, capsys):
    from damper.cli import CAUTION_SHORT, main

    path = tmp_path / "case.yaml"
    one_condition = CASE[: CASE.index("  - name: approach")] + CASE[CASE.index("loop:"):]
    path.write_text(one_condition + RESPONSES.replace("- {kind: gust", "# - {kind: gust"))
    out = tmp_path / "run"
    assert main(["respond", str(path), "--gain", "0.2", "--out", str(out)]) == 0
    text = capsys.readouterr().out
    assert CAUTION_SHORT in text and "deg/s" in text and "cruise" in text
    names = sorted(os.listdir(out))
    assert "responses.json" in names
    assert {"response-01-cruise-1-doublet.csv", "response-01-cruise-1-doublet.svg",
            "response-01-cruise-1-doublet.svg"} <= set(names)
    doc = json.loads((out / "responses.json").read_text())
    assert doc["conditions"][0]["responses"][0]["augmented"]["peak_surface_rate_rad_s"] <= 30 * DEG * (1 + 1e-9)
    assert doc["provenance"]["input_sha256"]
    with open(out / "response-01-cruise-1-doublet.csv") as fh:
        header = fh.readline().strip().split(",")
        rows = fh.readlines()
    assert header[0] == "time_s" and "augmented_q_rad_s" in header and "bare_nz_g" in header
    assert len(rows) == 151  # 3 s at 20 ms
    # an earlier run is never overwritten silently
    assert main(["respond", str(path), "--gain", "0.2", "--out", str(out)]) == 2
    assert main(["respond", str(path), "--gain", "0.2", "--out", str(out), "--force", "--no-plots"]) == 0


def test_respond_into_a_design_run_rebuilds_its_report(tmp_path, capsys):
    # [common practice] a report never describes files that have since been replaced.
    from damper.cli import main

    path = tmp_path / "case.yaml"
    one_condition = CASE[: CASE.index("  - name: approach")] + CASE[CASE.index("loop:"):]
    path.write_text(one_condition + RESPONSES.replace("- {kind: gust", "# - {kind: gust"))
    out = tmp_path / "run"
    assert main(["design", str(path), "--out", str(out), "--no-plots"]) == 0
    assert "--gain 0.123" not in (out / "report.html").read_text()
    capsys.readouterr()
    assert main(["respond", str(path), "--gain", "0.123", "--out", str(out), "--force", "--no-plots"]) == 0
    assert "rebuilt report.html" in capsys.readouterr().out
    assert "--gain 0.123" in (out / "report.html").read_text()
    # a directory without a design run gets no report
    bare = tmp_path / "bare"
    assert main(["respond", str(path), "--gain", "0.123", "--out", str(bare), "--no-plots"]) == 0
    assert not (bare / "report.html").exists()


def test_response_csv_fields_follow_the_documented_format():
    # [derived] docs/responses.md ("Outputs per condition"): numbers to 9 significant digits (Python's own ".9g"
    # format is the oracle, value by value), flags as 1/0, non-finite values as empty fields.
    from types import SimpleNamespace

    from damper.output.documents.responses import CSV_SERIES, response_csv

    rng = np.random.default_rng(3)
    n = 6
    values = np.array([0.0, -0.0, np.nan, np.inf, 1.0 / 3.0, -2.5e-12])

    def history(shift):
        h = {name: values * (1 + shift) + rng.normal(size=n) * (name == "alpha") for name, _ in CSV_SERIES}
        h["rate_limited"] = np.array([True, False, True, False, False, True])
        h["position_limited"] = np.array([False] * n)
        return SimpleNamespace(time=np.arange(n) * 0.01, pilot=values, gust_alpha=-values, **h)

    bare, aug = history(0.0), history(1.0)
    text = response_csv(bare, aug, stride=2)
    lines = text.splitlines()
    cols = [bare.time, aug.pilot, aug.gust_alpha] + [getattr(h, name) for h in (bare, aug) for name, _ in CSV_SERIES]

    def field(v):
        if isinstance(v, (bool, np.bool_)):
            return "1" if v else "0"
        return format(float(v), ".9g") if math.isfinite(v) else ""

    expected = [",".join(field(c[i]) for c in cols) for i in range(0, n, 2)]
    assert lines[1:] == expected and text.endswith("\n")
    assert lines[0].split(",")[:3] == ["time_s", "pilot_command_rad", "gust_alpha_rad"]
    assert ",," in lines[2] and lines[1].split(",")[1] == "0" and "-0" in lines[1].split(",")
