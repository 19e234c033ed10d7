"""Gain search: feasible intervals against an independent dense sweep with python-control."""

import control
import numpy as np
import pytest

from damper.analysis.assess import build_loop
from damper.analysis.search import SearchSettings, search
from damper.case import load_case_text
from damper.model.loop import to_control

# Invented test airframe (derivatives per unit mass/inertia); a slow servo (6 rad/s) makes
# the modal damping rise to a peak of about 0.495 and fall again as the gain grows.
BASE = """
title: search test
aircraft: {mass: 1000, pitch_inertia: 1500}
conditions:
  - name: c1
    airspeed: 60
    altitude: 0
    derivatives: {Z_alpha: -120, M_alpha: -9, M_q: -0.8, M_delta: -14}
loop:
  actuator: {bandwidth: 6}
"""


def _case(requirements):
    return load_case_text(BASE + requirements, "search-test.yaml")


def _oracle_damping(case, gains):
    """Damping of the complex short-period pair from the closed-loop poles of python-control's loop.

    The loop ``L = sign(M_delta) K P`` exported by python-control at K = 1 s gives (A, B, C, D);
    at a gain K it is (A, B, K C, K D) (``to_control``'s docstring), and unity negative feedback
    closes it to ``A - B K C / (1 + K D)`` (the state-space feedback formula, common practice):
    the poles of all gains in one batched ``numpy.linalg.eigvals``. ``control.feedback(...).poles()``
    on the exported loop, one loop at a time, was the oracle; it still runs at every 100th gain
    and must agree.
    """
    gains = np.asarray(gains, dtype=float)
    ss = to_control(build_loop(case, np.ones((1, 1))), (0, 0), "loop")
    A, B, C, D = (np.asarray(m, dtype=float) for m in (ss.A, ss.B, ss.C, ss.D))
    assert B.shape[1] == C.shape[0] == 1  # one input, one output
    k = gains[:, None, None]
    poles = np.linalg.eigvals(A - k * (B @ C) / (1.0 + k * D[0, 0]))
    loop = build_loop(case, gains[None, :])
    for j in range(0, len(gains), 100):
        theirs = control.feedback(to_control(loop, (0, j), "loop"), 1).poles()
        np.testing.assert_allclose(np.sort_complex(poles[j]), np.sort_complex(theirs), rtol=1e-9, atol=1e-12)
    out = []
    for p in poles:
        pair = p[np.abs(p.imag) > 1e-9]
        out.append(-pair[0].real / abs(pair[0]) if pair.size else np.nan)
    return np.array(out)


def _oracle_edges(case, lo, hi, zeta_lo, zeta_hi, n=4001):
    k = np.logspace(np.log10(lo), np.log10(hi), n)
    z = _oracle_damping(case, k)
    ok = (z >= zeta_lo) & (z <= zeta_hi)
    idx = np.nonzero(ok[:-1] != ok[1:])[0]
    edges = []
    for i in idx:  # linear interpolation of the crossing on the dense grid
        target = zeta_lo if min(z[i], z[i + 1]) < zeta_lo <= max(z[i], z[i + 1]) else zeta_hi
        t = (target - z[i]) / (z[i + 1] - z[i])
        edges.append(k[i] * (k[i + 1] / k[i]) ** t)
    return np.array(edges)


def test_two_disjoint_intervals_match_the_oracle():
    case = _case("requirements:\n  damping_measure: modal\n  damping_ratio: {min: 0.45, max: 0.49}\n")
    res = search(case, SearchSettings(gain_min=1e-3, gain_max=10.0, points=121))
    d = res.conditions[0]
    assert len(d.intervals) == 2
    ours = np.array([e for iv in d.intervals for e in iv])
    want = _oracle_edges(case, 1e-2, 1.0, 0.45, 0.49)
    assert want.size == 4
    # Oracle: python-control closed-loop poles on a dense grid; tolerance 1e-3 relative
    np.testing.assert_allclose(ours, want, rtol=1e-3)
    bindings = [(lo.binding, hi.binding) for lo, hi in d.edges]
    assert bindings == [("damping_ratio", "damping_ratio")] * 2
    # the chosen gain lies inside the feasible set
    assert any(a <= d.chosen_gain <= b for a, b in d.intervals)


def test_edges_refined_to_1e4_relative():
    case = _case("requirements:\n  damping_measure: modal\n  damping_ratio: {min: 0.45, max: 0.49}\n")
    res = search(case, SearchSettings(gain_min=1e-3, gain_max=10.0, points=41))
    d = res.conditions[0]
    lo = d.intervals[0][0]
    # just inside is feasible, 1e-4 outside is not [derived from the definition of an edge]
    from damper.analysis.search import evaluate_points

    inside = evaluate_points(case, np.array([0, 0]), np.array([lo * (1 + 2e-4), lo * (1 - 1e-4)]))
    assert inside.criteria.all_met.tolist() == [True, False]


def test_infeasible_condition_names_the_binding_requirement():
    # By construction the damping peaks near 0.495 (see BASE): a 0.9 minimum cannot be met.
    case = _case("requirements:\n  damping_measure: modal\n  damping_ratio: {min: 0.9, max: 1.3}\n  gain_margin: {min: 6}\n")
    res = search(case, SearchSettings(gain_min=1e-3, gain_max=10.0, points=81))
    d = res.conditions[0]
    assert not d.feasible and d.intervals == ()
    assert d.binding[0][0] == "damping_ratio"
    # closest miss: the chosen gain sits at the damping peak, missing 0.9 by (0.9 - 0.495)/0.9
    assert d.binding[0][1] == pytest.approx((0.495 - 0.9) / 0.9, abs=0.01)


def test_policies():
    req = "requirements:\n  damping_measure: modal\n  damping_ratio: {min: 0.45, max: 0.49}\n"
    case = _case(req)
    least = search(case, SearchSettings(gain_min=1e-3, gain_max=10.0, points=81, policy="least_gain")).conditions[0]
    assert least.chosen_gain == pytest.approx(least.intervals[0][0], rel=1e-12)
    target = search(
        case, SearchSettings(gain_min=1e-3, gain_max=10.0, points=161, policy="damping_target", damping_target=0.47)
    )
    d = target.conditions[0]
    z = target.chosen.modes.short_period.damping_ratio[0]
    assert z == pytest.approx(0.47, abs=0.003)
    assert any(a <= d.chosen_gain <= b for a, b in d.intervals)
    balanced = search(case, SearchSettings(gain_min=1e-3, gain_max=10.0, points=81))
    chosen_worst = balanced.chosen.criteria.worst_slack[0]
    # balanced: no swept feasible gain has more worst-case slack than the chosen one
    assert chosen_worst >= balanced.sweep.criteria.worst_slack[0][balanced.sweep.criteria.all_met[0]].max() - 1e-9


def test_equivalent_mismatch_band_judges_the_fit_cost():
    # The requirement's value is the fit's own cost J (the same number design.json reports),
    # and a maximum below the fit's cost at every gain leaves no feasible gain
    # [derived: the slack definition of damper.requirements.criteria].
    from damper.analysis.assess import assess

    case = _case("requirements:\n  damping_ratio: {min: 0.0, max: 5.0}\n  equivalent_mismatch: {max: 50}\n")
    names = [c.name for c in case.requirements.criteria]
    assert "equivalent_mismatch" in names
    a = assess(case, np.array([0.02]), with_bandwidth=False)
    j = names.index("equivalent_mismatch")
    np.testing.assert_array_equal(a.criteria.values[j], a.equivalent.mismatch)
    assert a.criteria.slacks[j, 0] == pytest.approx((50.0 - float(a.equivalent.mismatch[0])) / 50.0)
    tight = _case("requirements:\n  equivalent_mismatch: {max: 1e-9}\n")
    d = search(tight, SearchSettings(gain_min=0.001, gain_max=0.5, points=41))
    assert not d.conditions[0].feasible


def test_damping_target_policy_needs_its_target():
    # The library refuses the policy without its parameter with a clear ValueError (no
    # UnboundLocalError from deep inside the search).
    from damper.analysis.search import SearchSettings

    with pytest.raises(ValueError, match="needs damping_target"):
        SearchSettings(policy="damping_target")
    with pytest.raises(ValueError, match="needs damping_target"):
        SearchSettings(policy="damping_target", damping_target=float("nan"))
    with pytest.raises(ValueError, match="unknown policy"):
        SearchSettings(policy="fastest")
    assert SearchSettings(policy="damping_target", damping_target=0.7).damping_target == 0.7
