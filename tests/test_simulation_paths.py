"""The simulation's two integrators against each other and against scipy.

* The streamlined RK4 loop (damper.analysis.simulation_rk4) must give the records of the
  reference loop (damper.analysis.simulation_parts.integrate, the loop every earlier
  result was computed with) bit for bit: same operations, same order (Source: the
  reference loop itself, run in the same process), with and without the damper's
  authority and its own rate limit (simulation_authority), on the authority demo's loops too.
* The linear blocks (damper.analysis.simulation_linear, on by default) agree with the
  step-by-step loop to rounding, and with scipy's linear simulation as closely as the
  step-by-step loop does; a run's results do not depend on the other runs of its batch
  (bit for bit, batches of one size).

All airframe numbers are invented.
"""

import contextlib
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


def _mixed_signs(d):
    """The invented airframes with the elevator's moment and lift reversed on the first and
    last members (a positive M_delta: trailing-edge down pitches nose up, as on a canard;
    the damper's command carries sign(M_delta), docs/theory.md s.1)."""
    from dataclasses import replace

    flip = np.array([-1.0, 1.0, -1.0])
    return replace(d, M_delta=np.asarray(d.M_delta) * flip, Z_delta=np.asarray(d.Z_delta) * flip)


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
        ("positive M_delta, mixed signs", Loop(_mixed_signs(d), lag_delay, K), DOUBLET,
         dict(duration=1.5, rate_limit=0.15, travel=np.array([2.0, np.inf, 1.5]) * DEG)),
        ("failed damper", Loop(d, Hardware(actuator=Lag(0.05)), K), NO_INPUT,
         dict(duration=1.0, rate_limit=0.1, travel=1.5 * DEG, failed_command=hardover)),
        ("failed damper, delay", Loop(d, Hardware(actuator=SecondOrderLag(40.0, 0.6), delay=Delay(np.asarray(0.02), 3)),
                                      K), NO_INPUT, dict(duration=1.0, rate_limit=0.1, travel=1.5 * DEG, failed_command=hardover)),
    ]


CASES = hostile()
IDS = [c[0] for c in CASES]


def series(h):
    return {k: getattr(h, k) for k in h.SERIES if getattr(h, k) is not None}


@contextlib.contextmanager
def _set(obj, name, value):
    """``obj.name = value`` for the block's duration (restored afterwards)."""
    before = getattr(obj, name)
    setattr(obj, name, value)
    try:
        yield
    finally:
        setattr(obj, name, before)


_RUNS = {}


def _run(table, name, how):
    """The simulation of case `name` of `table` (``"hostile"``: :data:`CASES`; ``"authority"``:
    :data:`AUTHORITY`) by the loop `how`, computed once per process and read by every test that
    compares it (results are only read):

    * ``"reference"``: simulation_parts.integrate (rk4.supported off);
    * ``"step"``: the streamlined step-by-step loop (linear blocks off); on the authority loops
      with simulation_parts.integrate removed, so that no member falls back to the reference;
    * ``"blocks"``: the linear blocks on: (history, {True: blocks advanced by them, False:
      blocks left to the step loop}) as the ``linear_blocks`` fixture counts them.
    """
    key = (table, name, how)
    if key not in _RUNS:
        _, loop, inp, kw = next(c for c in (CASES if table == "hostile" else AUTHORITY) if c[0] == name)[:4]
        _RUNS[key] = _simulated(loop, inp, kw, how, table == "authority")
    return _RUNS[key]


def _simulated(loop, inp, kw, how, no_fallback):
    import damper.analysis.simulation_parts as sp

    if how == "reference":
        with _set(rk4, "LINEAR_BLOCKS", False), _set(rk4, "supported", lambda model: False):
            return simulate(loop, inp, **kw)
    if how == "step":
        with _set(rk4, "LINEAR_BLOCKS", False), _set(sp, "integrate", None if no_fallback else sp.integrate):
            return simulate(loop, inp, **kw)
    counts = {True: 0, False: 0}
    with _set(rk4, "LINEAR_BLOCKS", True), _set(linear, "attempt", _counting(linear.attempt, counts)):
        return simulate(loop, inp, **kw), counts


def _counting(attempt, counts):
    """`attempt` that adds the members' blocks it advanced (True) and left (False) to `counts`."""
    def counting(*args):
        Z, ok = attempt(*args)
        counts[True] += int(ok.sum())
        counts[False] += int((~ok).sum())
        return Z, ok

    return counting


@pytest.mark.parametrize("name,loop,inp,kw", CASES, ids=IDS)
def test_streamlined_loop_equals_the_reference_bit_for_bit(name, loop, inp, kw):
    fast = _run("hostile", name, "step")  # the step-by-step loop
    ref = _run("hostile", name, "reference")  # the reference loop
    for key, value in series(ref).items():
        assert getattr(fast, key).tobytes() == value.tobytes(), key  # bits, signed zeros included
    assert fast.substeps == ref.substeps


def authority_loops():
    """Loops with the damper's own limits (name, loop, input, keywords of simulate, which of
    the authority limit and its rate limit must act): each actuator kind, with and without
    delay (every member delayed: the block's commands are known before it; no delay or
    mixed delays: they depend on the state), limits per member, a batch in which only some
    members saturate, a failed damper (its command is not limited)."""
    d = invented()
    lag_delay = Hardware(actuator=Lag(0.05), washout=Washout(1.0), delay=Delay(np.asarray(0.02), 3))
    second = Hardware(actuator=SecondOrderLag(45.0, 0.7), sensor=Lag(0.01), washout=Washout(1.5),
                      filters=(LeadLag(0.05, 0.02),), delay=Delay(np.asarray(0.015), 3))
    small = Input("doublet", amplitude=1 * DEG, start=0.2, half_period=0.4)
    medium = Input("doublet", amplitude=2 * DEG, start=0.2, half_period=0.4)
    gust = Input("gust_one_minus_cosine", gust_velocity=10.0, gust_length=60.0, start=0.1)
    hardover = hardover_command(np.full(3, 2 * DEG), np.full(3, 0.2), np.ones(3))
    both = dict(authority=0.5 * DEG, authority_rate_limit=3 * DEG)
    return [
        ("authority, lag, delay", Loop(d, lag_delay, K), DOUBLET,
         dict(duration=1.5, rate_limit=0.3, travel=3 * DEG, authority=0.5 * DEG), (True, False)),
        ("authority rate limit, lag, no delay", Loop(d, Hardware(actuator=Lag(0.05), washout=Washout(1.0)), K),
         DOUBLET, dict(duration=1.5, rate_limit=0.3, authority=np.inf, authority_rate_limit=3 * DEG), (False, True)),
        ("both, second order, filters, delay", Loop(d, second, K), DOUBLET,
         dict(duration=1.5, rate_limit=0.3, travel=3 * DEG, **both), (True, True)),
        ("both, second order, no delay", Loop(d, Hardware(actuator=SecondOrderLag(40.0, 0.6)), K), DOUBLET,
         dict(duration=1.5, rate_limit=0.2, travel=2 * DEG, **both), (True, True)),
        ("ideal, authority rate limit, delay", Loop(d, Hardware(washout=Washout(1.0), delay=Delay(np.asarray(0.0173),
                                                                                               2)), K), small,
         dict(duration=1.5, authority=np.inf, authority_rate_limit=10 * DEG), (False, True)),
        ("ideal, both, mixed delays", Loop(d, Hardware(washout=Washout(1.0), delay=Delay(np.array([0.03, 0.0, 0.01]),
                                                                                          2)), K), medium,
         dict(duration=1.5, travel=1 * DEG, authority=0.4 * DEG, authority_rate_limit=10 * DEG), (True, True)),
        ("ideal, both, no delay", Loop(d, Hardware(), K), DOUBLET, dict(duration=1.0, travel=3 * DEG, **both),
         (True, True)),
        ("lag, limits per member, mixed delays",
         Loop(d, Hardware(actuator=Lag(0.04), delay=Delay(np.array([0.02, 0.0, 0.0173]), 3)), K), DOUBLET,
         dict(duration=1.5, rate_limit=0.2, authority=np.array([0.3, 5.0, 0.8]) * DEG,
              authority_rate_limit=np.array([2.0, np.inf, 5.0]) * DEG), (True, True)),
        ("delay within the step", Loop(d, Hardware(actuator=Lag(0.04), delay=Delay(np.asarray(0.0004), 3)), K),
         DOUBLET, dict(duration=0.6, rate_limit=0.2, **both), (True, True)),
        ("four-state airframe", Loop(textbook_longitudinal(), lag_delay, np.array([0.0, 0.1, 0.3])), DOUBLET,
         dict(duration=2.0, rate_limit=0.2, travel=3 * DEG, authority=0.3 * DEG, authority_rate_limit=2 * DEG),
         (True, True)),
        ("gust", Loop(d, lag_delay, K), gust, dict(duration=1.5, rate_limit=0.3, **both), (True, True)),
        ("batch, some saturate", Loop(d, lag_delay, np.linspace(0.02, 0.4, 6)[:, None]), small,
         dict(duration=1.5, rate_limit=0.3, authority=0.3 * DEG, authority_rate_limit=6 * DEG), (True, True)),
        ("failed damper, authority given", Loop(d, lag_delay, K), NO_INPUT,
         dict(duration=1.0, rate_limit=0.1, travel=1.5 * DEG, failed_command=hardover, **both), (False, False)),
    ]


AUTHORITY = authority_loops()


def assert_same_bits(fast, ref):
    """Every record of two histories equal (np.array_equal), bit for bit (signed zeros)."""
    for key, value in series(ref).items():
        assert np.array_equal(getattr(fast, key), value) and getattr(fast, key).tobytes() == value.tobytes(), key
    if ref.damper_demand_peak is None:
        assert fast.damper_demand_peak is None
    else:
        assert fast.damper_demand_peak.tobytes() == ref.damper_demand_peak.tobytes(), "damper_demand_peak"
    assert fast.substeps == ref.substeps


@pytest.mark.parametrize("name,loop,inp,kw,acting", AUTHORITY, ids=[c[0] for c in AUTHORITY])
def test_streamlined_loop_with_an_authority_equals_the_reference_bit_for_bit(name, loop, inp, kw, acting):
    fast = _run("authority", name, "step")  # the streamlined loop runs every one of them
    ref = _run("authority", name, "reference")  # the reference loop
    assert_same_bits(fast, ref)
    # the limits the case is about act (the comparison is not between idle limiters)
    assert (bool(ref.authority_limited.any()), bool(ref.authority_rate_limited.any())) == acting
    if name.startswith("batch"):  # some members saturate, others do not
        hit = ref.authority_limited.any(-1)
        assert hit.any() and not hit.all()


def test_the_demo_cases_own_loops_with_an_authority_bit_for_bit(monkeypatch):
    # the authority demo's three conditions at three gains each, its own actuator, delay,
    # authority and damper rate limit, its two inputs and a larger doublet that saturates
    import os
    from dataclasses import replace

    from damper.analysis.response import respond_case, resolve_responses
    from damper.case.load import load_case

    case = load_case(os.path.join(os.path.dirname(os.path.dirname(__file__)), "cases",
                                  "light_twin_damper_authority.yaml"))
    spec = resolve_responses(case)
    spec = replace(spec, duration=3.0, inputs=spec.inputs + (Input("doublet", amplitude=3 * DEG, start=0.5,
                                                                  half_period=0.5),))
    gains = np.array([0.05, 0.15, 0.3]) * np.ones((3, 1))
    monkeypatch.setattr(rk4, "LINEAR_BLOCKS", False)  # the step-by-step loop
    fast = respond_case(case, gains, spec)
    monkeypatch.setattr(rk4, "supported", lambda model: False)
    ref = respond_case(case, gains, spec)
    assert fast.authority is not None
    for f, r in zip(fast.responses, ref.responses):
        assert_same_bits(f.augmented, r.augmented)
        assert_same_bits(f.bare, r.bare)
    assert ref.responses[-1].augmented.authority_limited.any()
    assert ref.responses[-1].augmented.authority_rate_limited.any()


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
    monkeypatch.setattr(rk4, "LINEAR_BLOCKS", True)
    monkeypatch.setattr(linear, "attempt", _counting(linear.attempt, counts))
    return counts


@pytest.mark.parametrize("name,loop,inp,kw", CASES, ids=IDS)
def test_linear_blocks_agree_with_the_step_loop(name, loop, inp, kw):
    step = _run("hostile", name, "step")
    fast, blocks = _run("hostile", name, "blocks")
    for key, value in series(step).items():
        if value.dtype == bool:
            np.testing.assert_array_equal(getattr(fast, key), value, err_msg=key)
        else:
            # tolerance 1e-11 of each series' peak: rounding of sums taken in another
            # order over a few thousand steps (common practice; measured 4e-14 at most)
            scale = max(np.max(np.abs(value)), 1e-300)
            assert np.max(np.abs(getattr(fast, key) - value)) <= 1e-11 * scale, key
    eligible = "within the step" not in name  # a delay of a step or less: no block inputs
    assert (blocks[True] > 0) == eligible  # the blocks ran where they apply


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
    # (each run beside copies of the next one: a batch in which which runs reach a limit,
    # and which delays are shortest, differ from the case's own batch)
    batch, _ = _run("hostile", name, "blocks")
    for i in range(3):
        j = (i + 1) % 3
        other_loop, other_kw = _members(loop, kw, [j, i, j])
        other = simulate(other_loop, inp, **other_kw)
        for key, value in series(batch).items():
            assert getattr(other, key)[1].tobytes() == value[i].tobytes(), (i, j, key)


@pytest.mark.parametrize("name,loop,inp,kw,acting", AUTHORITY, ids=[c[0] for c in AUTHORITY])
def test_linear_blocks_with_an_authority_agree_with_the_step_loop(name, loop, inp, kw, acting):
    # every run delayed: the damper's limited command is known before the block, so a
    # block is linear whatever the authority does; otherwise the blocks do not run
    step = _run("authority", name, "step")
    fast, blocks = _run("authority", name, "blocks")
    for key, value in series(step).items():
        if value.dtype == bool:
            np.testing.assert_array_equal(getattr(fast, key), value, err_msg=key)
        else:  # tolerance as in test_linear_blocks_agree_with_the_step_loop (common practice)
            scale = max(np.max(np.abs(value)), 1e-300)
            assert np.max(np.abs(getattr(fast, key) - value)) <= 1e-11 * scale, key
    if step.damper_demand_peak is not None:
        np.testing.assert_allclose(fast.damper_demand_peak, step.damper_demand_peak, rtol=1e-11, atol=0)
    eligible = not any(w in name for w in ("mixed", "within the step", "no delay"))
    assert (blocks[True] > 0) == eligible


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
