"""Loop assembly: frequency responses, state space, sign convention, python-control export."""

import control
import numpy as np
import pytest

from damper.measures.modes import closed_loop_modes
from damper.model.airframe import Derivatives, state_matrices
from damper.model.elements import Delay, Lag, Notch, SecondOrderLag, Washout
from damper.model.loop import (
    Hardware,
    Loop,
    closed_loop_matrix,
    loop_response,
    pilot_pitch_rate_response,
    plant_response,
    plant_state_space,
    to_control,
)

from .conftest import TEXTBOOK_GA, random_derivatives

W = np.logspace(-2, 2.5, 60)
HARDWARE = Hardware(
    actuator=Lag(0.05),
    sensor=SecondOrderLag(120.0, 0.7),
    washout=Washout(1.0),
    filters=(Notch(80.0, 0.05, 0.5),),
)


def test_ideal_two_state_loop_closed_form():
    # [derived] ideal hardware: A_cl = A - B sign(M_delta) K [0 1]; its characteristic
    # polynomial s^2 + (2 zeta wn) s + wn^2 with
    # 2 zeta wn = -(a11 + a22) + sign(Md) K b2 and wn^2 = a11 a22 - a12 a21 - sign(Md) K (a11 b2 - a21 b1).
    d = TEXTBOOK_GA
    K = np.array([0.0, 0.05, 0.1, 0.2, 0.4])
    loop = Loop(d, Hardware(), K)
    A_cl, _, layout = closed_loop_matrix(loop)
    modes = closed_loop_modes(A_cl, layout.alpha, layout.q)
    A, B = state_matrices(d)
    (a11, a12), (a21, a22) = A
    b1, b2 = B[:, 0]
    sg = np.sign(d.M_delta)
    two_zeta_wn = -(a11 + a22) + sg * K * b2
    wn2 = a11 * a22 - a12 * a21 - sg * K * (a11 * b2 - a21 * b1)
    wn = np.sqrt(wn2)
    np.testing.assert_allclose(modes.short_period.natural_frequency, wn, rtol=1e-10)
    np.testing.assert_allclose(modes.short_period.damping_ratio, two_zeta_wn / (2 * wn), rtol=1e-10)
    # positive gain adds damping (design.md s.4)
    assert np.all(np.diff(modes.short_period.damping_ratio) > 0)
    assert not modes.ambiguous.any()


def test_plant_response_matches_its_state_space():
    # Oracle: python-control evaluates the assembled realisation; no delay, so exact.
    loop = Loop(TEXTBOOK_GA, HARDWARE, 0.3)
    got = plant_response(loop, W)
    sys = to_control(loop, (), "open")
    want = np.array([complex(sys(1j * w)) for w in W])
    np.testing.assert_allclose(got, want, rtol=1e-9)


def test_loop_sign_convention():
    # design.md s.4: L = sign(M_delta) K P; for a normal airframe at low frequency with
    # ideal hardware, L(0) = K * (-Md-ish positive static gain) > 0 (negative feedback adds damping)
    loop = Loop(TEXTBOOK_GA, Hardware(), 0.2)
    L0 = loop_response(loop, np.array([1e-6]))[0]
    assert L0.real > 0
    flipped = Derivatives(**{**TEXTBOOK_GA.__dict__, "M_delta": np.asarray(11.87)})
    # unusual elevator sign: the command sign follows it, so positive K still adds damping
    A_cl, _, lay = closed_loop_matrix(Loop(flipped, Hardware(), np.array([0.0, 0.2])))
    z = closed_loop_modes(A_cl, lay.alpha, lay.q).short_period.damping_ratio
    assert z[1] > z[0]


def test_closed_loop_eigenvalues_match_python_control_feedback(rng):
    # Oracle: control.feedback on the exported loop transfer function (Pade delay in both).
    d = random_derivatives(rng, 12, unstable_fraction=0.3)
    K = rng.uniform(0.01, 2.0, 12)
    hw = Hardware(actuator=Lag(1 / 25.0), sensor=Lag(0.01), washout=Washout(1.2), delay=Delay(np.asarray(0.02), 3))
    loop = Loop(d, hw, K)
    A_cl, _, _ = closed_loop_matrix(loop)
    ours = np.linalg.eigvals(A_cl)
    for i in range(12):
        L = to_control(loop, (i,), "loop")
        want = np.sort_complex(control.feedback(L, 1).poles())
        np.testing.assert_allclose(np.sort_complex(ours[i]), want, rtol=1e-7, atol=1e-8)


def test_pilot_response_matches_closed_loop_state_space():
    loop = Loop(TEXTBOOK_GA, HARDWARE, 0.25)
    got = pilot_pitch_rate_response(loop, W)
    sys = to_control(loop, (), "closed")
    # the exported closed loop takes the command at the actuator input (surface
    # convention); the pilot's nose-up command reaches it as sign(M_delta) times itself
    want = np.sign(TEXTBOOK_GA.M_delta) * np.array([complex(sys(1j * w)[1, 0]) for w in W])
    np.testing.assert_allclose(got, want, rtol=1e-8)


def test_layout_names_blocks():
    loop = Loop(TEXTBOOK_GA, Hardware(actuator=Lag(0.05), delay=Delay(np.asarray(0.01), 2)), 0.1)
    _, layout = plant_state_space(loop)
    assert [b[0] for b in layout.blocks] == ["actuator", "airframe", "delay"]
    assert (layout.alpha, layout.q, layout.n) == (1, 2, 5)


def test_batch_equals_one_at_a_time(rng):
    d = random_derivatives(rng, 5)
    K = rng.uniform(0.05, 1.0, (5, 3))
    from damper.model.batch import map_arrays

    d2 = map_arrays(d, lambda a: a[:, None])
    loop = Loop(d2, HARDWARE, K)
    A_cl, _, lay = closed_loop_matrix(loop)
    batch = closed_loop_modes(A_cl, lay.alpha, lay.q)
    for i in range(5):
        for j in range(3):
            di = map_arrays(d, lambda a: a[i])
            one_A, _, _ = closed_loop_matrix(Loop(di, HARDWARE, K[i, j]))
            one = closed_loop_modes(one_A, lay.alpha, lay.q)
            assert one.short_period.damping_ratio == pytest.approx(batch.short_period.damping_ratio[i, j], rel=1e-9)
            np.testing.assert_allclose(np.sort_complex(one.eigenvalues), np.sort_complex(batch.eigenvalues[i, j]), rtol=1e-9)
