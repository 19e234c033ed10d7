"""The simulation's two integrators against each other and against scipy.

* The streamlined RK4 loop (damper.analysis.simulation_rk4) must give the records of the
  reference loop (damper.analysis.simulation_parts.integrate, the loop every earlier
  result was computed with) bit for bit: same operations, same order (Source: the
  reference loop itself, run in the same process).
* The linear blocks (damper.analysis.simulation_linear, on by default) agree with the
  step-by-step loop to rounding, and with scipy's linear simulation as closely as the
  step-by-step loop does; a member's results do not depend on the other members of its
  batch (each member alone gives the same bits).

All airframe numbers are invented.
"""

import math

import numpy as np
import pytest

import damper.analysis.simulation_linear as linear
import damper.analysis.simulation_rk4 as rk4
from damper.analysis.failure_commands import hardover_command
from damper.analysis.response import Input, pilot_command, simulate
from damper.model.elements import Delay, Lag, LeadLag, Notch, SecondOrderLag, Washout
from damper.model.loop import Hardware, Loop
from tests.conftest import textbook_longitudinal
from tests.test_response import invented, lsim_closed, rel

DEG = math.pi / 180.0
DOUBLET = Input("doublet", amplitude=4 * DEG, start=0.2, half_period=0.4)  # large: the limits act
K = np.array([0.3, 0.2, 0.15])
NO_INPUT = Input("step", amplitude=0.0, start=0.0)


def hostile():
    """Loops whose limits act (rate, travel), with delays long, short (substeps) and mixed,
    each actuator kind, filters, washout, a gust, the four-state airframe and failed
    dampers (name, loop, input, keywords of simulate)."""
    d = invented()
    hardover = hardover_command(np.full(3, 2 * DEG), np.full(3, 0.2), np.ones(3))
    lag_delay = Hardware(actuator=Lag(0.05), washout=Washout(1.0), delay=Delay(np.asarray(0.02), 3))
    return [
        ("lag rate and travel", Loop(d, lag_delay, K), DOUBLET, dict(duration=2.0, rate_limit=0.1, travel=2 * DEG)),
        ("delay within the step", Loop(d, Hardware(actuator=Lag(0.04), delay=Delay(np.asarray(0.0004), 3)), K),
         DOUBLET, dict(duration=0.6, rate_limit=0.2, travel=3 * DEG)),
        ("long delay", Loop(d, Hardware(actuator=Lag(0.04), delay=Delay(np.asarray(0.25), 3)), 2 * K), DOUBLET,
         dict(duration=2.0, rate_limit=0.3)),
        ("mixed delays", Loop(d, Hardware(actuator=Lag(0.04), delay=Delay(np.array([0.02, 0.0, 0.0173]), 3)), K),
         DOUBLET, dict(duration=1.5, rate_limit=0.2, travel=3 * DEG)),
        ("second order, filters", Loop(d, Hardware(actuator=SecondOrderLag(45.0, 0.7), sensor=Lag(0.01),
                                                   washout=Washout(1.5), filters=(LeadLag(0.05, 0.02),
                                                                                  Notch(60.0, 0.05, 0.5)),
                                                   delay=Delay(np.asarray(0.015), 3)), K),
         DOUBLET, dict(duration=2.0, rate_limit=0.15, travel=2.5 * DEG)),
        ("ideal, travel, mixed delays", Loop(d, Hardware(delay=Delay(np.array([0.03, 0.0, 0.01]), 2)), K), DOUBLET,
         dict(duration=1.5, travel=1 * DEG)),
        ("ideal, travel, delay", Loop(d, Hardware(delay=Delay(np.asarray(0.03), 2)), K), DOUBLET,
         dict(duration=1.5, travel=1 * DEG)),
        ("gust", Loop(d, lag_delay, K), Input("gust_one_minus_cosine", gust_velocity=10.0, gust_length=60.0, start=0.1),
         dict(duration=1.5, rate_limit=0.05)),
        ("four-state airframe", Loop(textbook_longitudinal(), lag_delay, np.array([0.0, 0.1, 0.3])), DOUBLET,
         dict(duration=2.0, rate_limit=0.2, travel=3 * DEG)),
        ("limits per member", Loop(d, lag_delay, K), DOUBLET,
         dict(duration=1.5, rate_limit=np.array([0.1, 0.3, np.inf]), travel=np.array([2.0, np.inf, 1.0]) * DEG)),
        ("second order, limits per member", Loop(d, Hardware(actuator=SecondOrderLag(40.0, 0.6), delay=Delay(
            np.asarray(0.02), 3)), K), DOUBLET,
         dict(duration=1.5, rate_limit=np.array([0.1, np.inf, 0.2]), travel=np.array([np.inf, 2.0, 1.0]) * DEG)),
        ("failed damper", Loop(d, Hardware(actuator=Lag(0.05)), K), NO_INPUT,
         dict(duration=1.0, rate_limit=0.1, travel=1.5 * DEG, failed_command=hardover)),
        ("failed damper, delay", Loop(d, Hardware(actuator=SecondOrderLag(40.0, 0.6), delay=Delay(np.asarray(0.02), 3)),
                                      K), NO_INPUT, dict(duration=1.0, rate_limit=0.1, travel=1.5 * DEG, failed_command=hardover)),
    ]


CASES = hostile()
IDS = [c[0] for c in CASES]


def series(h):
    return {k: getattr(h, k) for k in h.SERIES if getattr(h, k) is not None}


@pytest.mark.parametrize("name,loop,inp,kw", CASES, ids=IDS)
def test_streamlined_loop_equals_the_reference_bit_for_bit(name, loop, inp, kw, monkeypatch):
    monkeypatch.setattr(rk4, "LINEAR_BLOCKS", False)  # the step-by-step loop
    fast = simulate(loop, inp, **kw)
    monkeypatch.setattr(rk4, "supported", lambda model: False)  # the reference loop
    ref = simulate(loop, inp, **kw)
    for key, value in series(ref).items():
        assert getattr(fast, key).tobytes() == value.tobytes(), key  # bits, signed zeros included
    assert fast.substeps == ref.substeps


def test_the_delay_lines_block_reads_only_stored_samples():
    # [derived] a read at t_k + c h - T (c <= 1) uses the samples at and below
    # floor(k + c - T/h) + 1; steps k0 .. k0 + b - 1 read only samples up to k0 when
    # b - 1 + floor(1 - T/h) + 1 <= 0, i.e. b = floor(T/h) (T/h not an integer).
    from damper.analysis.simulation_parts import delay_line, linear_part
    from damper.model.batch import flatten

    for T in (0.0173, 0.2504, 0.0024):
        flat, _ = flatten(Loop(invented(1), Hardware(actuator=Lag(0.05), delay=Delay(np.asarray(T), 2)), 0.2))
        line = delay_line(np.array([T]), 1e-3, linear_part(flat, 1))
        assert line.block == math.floor(T / 1e-3)


@pytest.fixture
def linear_blocks(monkeypatch):
    """The linear blocks switched on; counts the members' blocks they advanced (True) and
    left to the step-by-step loop (False)."""
    counts = {True: 0, False: 0}
    attempt = linear.attempt

    def counting(*args):
        Z, ok = attempt(*args)
        counts[True] += int(ok.sum())
        counts[False] += int((~ok).sum())
        return Z, ok

    monkeypatch.setattr(rk4, "LINEAR_BLOCKS", True)
    monkeypatch.setattr(linear, "attempt", counting)
    return counts


def _stepped(loop, inp, kw):
    before = rk4.LINEAR_BLOCKS
    rk4.LINEAR_BLOCKS = False
    try:
        return simulate(loop, inp, **kw)
    finally:
        rk4.LINEAR_BLOCKS = before


@pytest.mark.parametrize("name,loop,inp,kw", CASES, ids=IDS)
def test_linear_blocks_agree_with_the_step_loop(name, loop, inp, kw, linear_blocks):
    step = _stepped(loop, inp, kw)
    fast = simulate(loop, inp, **kw)
    for key, value in series(step).items():
        if value.dtype == bool:
            np.testing.assert_array_equal(getattr(fast, key), value, err_msg=key)
        else:
            # tolerance 1e-11 of each series' peak: rounding of sums taken in another
            # order over a few thousand steps (common practice; measured 4e-14 at most)
            scale = max(np.max(np.abs(value)), 1e-300)
            assert np.max(np.abs(getattr(fast, key) - value)) <= 1e-11 * scale, key
    eligible = "within the step" not in name  # a delay of a step or less: no block inputs
    assert (linear_blocks[True] > 0) == eligible  # the blocks ran where they apply


def _members(loop, kw, rows):
    """The case's members `rows` (indices into its three members) as a batch of their own:
    their own delays, gains and limits."""
    from damper.model.batch import flatten, take

    flat, _ = flatten(loop)
    rows = np.asarray(rows)
    kw = {k: (np.broadcast_to(np.asarray(v, dtype=float), (3,))[rows] if np.ndim(v) else v) for k, v in kw.items()}
    return take(flat, rows), kw


@pytest.mark.parametrize("name,loop,inp,kw", [c for c in CASES if "failed" not in c[0]],
                         ids=[i for i in IDS if "failed" not in i])
def test_a_members_results_do_not_depend_on_the_other_members(name, loop, inp, kw, linear_blocks):
    # [derived] the blocks are aligned on the step grid and judged member by member, so a
    # run gives the same bits whichever runs share its batch (here: batches of the same
    # size, in which the other members reach a limit or not, with delays of their own)
    batch = simulate(loop, inp, **kw)
    for i in range(3):
        for j in range(3):
            other_loop, other_kw = _members(loop, kw, [j, i, j])
            other = simulate(other_loop, inp, **other_kw)
            for key, value in series(batch).items():
                assert getattr(other, key)[1].tobytes() == value[i].tobytes(), (i, j, key)


def test_linear_blocks_match_scipy_with_an_exact_delay(linear_blocks):
    # Oracle: scipy.signal.lsim (zero-order hold) of the closed loop with an order-8 Pade
    # delay, as tests/test_response.py::test_delay_matches_high_order_pade; tolerance 1e-6
    # of the peak (common practice for RK4 at 1 ms; the step loop meets it too).
    d = invented()
    loop = Loop(d, Hardware(actuator=Lag(0.04), washout=Washout(1.0), delay=Delay(np.asarray(0.0173), 8)), K)
    h = simulate(loop, DOUBLET, duration=2.0, step=1e-3)
    assert linear_blocks[True] > 0 and linear_blocks[False] == 0  # no limits: every block
    u = pilot_command(DOUBLET, h.time + 0.5e-3)  # value held over each step (midpoint)
    for i in range(3):
        alpha, q = lsim_closed(loop, (i,), u, h.time)
        assert rel(h.q[i], q) < 1e-6
        assert rel(h.alpha[i], alpha) < 1e-6
