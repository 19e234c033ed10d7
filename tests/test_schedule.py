"""Gain schedule: interpolation, the inverse-q law, verification between breakpoints, exports."""

import functools

import numpy as np
import pytest

from damper.analysis import envelope as E
from damper.analysis.schedule import Schedule, bilinear, design_schedule
from damper.atmosphere import standard_atmosphere
from damper.case import load_case_text
from damper.model.airframe import from_coefficients
from damper.output.documents import schedule as schedule_out

# Invented test aircraft: constant coefficients, one altitude, a wide speed range so the
# gain needed falls roughly as 1/q (control power grows with q).
SPARSE = """
title: sparse schedule test
aircraft: {mass: 1000, pitch_inertia: 1500, wing_area: 12, mean_chord: 1.3}
envelope:
  altitude: {min: 0, max: 0}
  airspeed: {min: 40, max: 160}
  grid: {altitudes: 2, speeds: 9}
aerodynamics:
  mach: [0.05, 0.6]
  CL_alpha: [5.0, 5.0]
  CD: [0.03, 0.03]
  CL_delta: [0.3, 0.3]
  Cm_alpha: [-0.8, -0.8]
  Cm_alpha_dot: [-3.0, -3.0]
  Cm_q: [-4.0, -4.0]
  Cm_delta: [-1.0, -1.0]
loop:
  actuator: {bandwidth: 30}
requirements:
  damping_measure: modal
  damping_ratio: {min: 0.60, max: 0.70}
schedule:
  variables: [dynamic_pressure]
  breakpoints: 2
  max_breakpoints: MAXBP
"""


def test_linear_interpolation_and_clamping():
    # [derived] hand-computed: halfway between (1000, 0.4) and (3000, 0.2) is 0.3
    s = Schedule(("dynamic_pressure",), "table", (np.array([1000.0, 3000.0, 5000.0]),), np.array([0.4, 0.2, 0.1]))
    np.testing.assert_allclose(s.gain_at([np.array([2000.0, 4000.0, 500.0, 9000.0])]), [0.3, 0.15, 0.4, 0.1])


def test_bilinear_interpolation_and_clamping():
    # [derived] z = 1 + 2x + 3y is reproduced exactly by bilinear interpolation inside the table
    x = np.array([0.0, 1.0, 3.0])
    y = np.array([0.0, 2.0])
    z = 1 + 2 * x[:, None] + 3 * y[None, :]
    np.testing.assert_allclose(bilinear(x, y, z, np.array([0.5, 2.0]), np.array([1.0, 0.5])), [5.0, 6.5])
    # clamped outside: (x=10, y=-1) reads the corner (3, 0)
    assert bilinear(x, y, z, np.array([10.0]), np.array([-1.0]))[0] == pytest.approx(7.0)


def test_inverse_dynamic_pressure_law_fit():
    # [derived] gains exactly proportional to 1/q are reproduced: K_ref q_ref = 0.2 * 2000
    q = np.array([1000.0, 2000.0, 4000.0])
    from damper.analysis.schedule import _make_schedule

    s = _make_schedule(("dynamic_pressure",), "inverse_dynamic_pressure", (q,), 400.0 / q)
    assert s.q_ref == pytest.approx(2000.0)  # geometric mean of 1000, 2000, 4000 [derived]
    assert s.k_ref == pytest.approx(0.2)
    np.testing.assert_allclose(s.gain_at([np.array([4000.0])]), [0.1])


@functools.lru_cache(maxsize=None)
def _sparse(max_breakpoints):
    """(case, design_schedule(case)) of SPARSE with ``max_breakpoints``: designed once per process
    for the tests below that read the same schedule (read only: the results are frozen)."""
    case = load_case_text(SPARSE.replace("MAXBP", str(max_breakpoints)), "sparse.yaml")
    return case, design_schedule(case)


def test_too_sparse_schedule_is_caught_and_repaired():
    fixed = _sparse(0)[1]
    assert not fixed.passed
    between = fixed.verification.points.kind == "between"
    assert np.any(~fixed.verification.passed & between)  # the failures lie between breakpoints
    assert "breakpoints are off" in fixed.message
    repaired = _sparse(9)[1]
    assert repaired.passed, repaired.message
    assert len(repaired.schedule.breakpoints[0]) > 2
    assert repaired.rounds > 1 and repaired.history[-1][1] == 0
    # every verification point of the repaired schedule has its damping inside the band
    z = repaired.verification.damping_ratio
    assert np.all((z >= 0.6 - 1e-9) & (z <= 0.7 + 1e-9))


def test_derivatives_off_breakpoint_match_direct_computation():
    # At Mach between table points the derivatives equal from_coefficients with the
    # coefficients interpolated by hand and the 1976 atmosphere (Nelson's formulas, from memory).
    case = load_case_text(SPARSE.replace("MAXBP", "0").replace("Cm_q: [-4.0, -4.0]", "Cm_q: [-4.0, -6.0]"), "t.yaml")
    env, aero = E.envelope_from_case(case)
    pts = E.points_at(env, np.array([2500.0]), np.array([100.0]))
    d = E.derivatives_at(case, env, aero, pts)
    air = standard_atmosphere(2500.0)
    mach = 100.0 / air.speed_of_sound
    t = (mach - 0.05) / (0.6 - 0.05)
    want = from_coefficients(
        dynamic_pressure=0.5 * air.density * 100.0**2, airspeed=100.0, mass=1000.0, pitch_inertia=1500.0,
        wing_area=12.0, mean_chord=1.3, CL_alpha=5.0, CD=0.03, CL_delta=0.3, Cm_alpha=-0.8,
        Cm_alpha_dot=-3.0, Cm_q=-4.0 + t * (-2.0), Cm_delta=-1.0,
    )
    for f in ("Z_alpha", "M_alpha", "M_q", "M_delta", "M_alpha_dot", "Z_delta"):
        assert float(getattr(d, f)[0]) == pytest.approx(float(getattr(want, f)), rel=1e-12), f


def test_cg_shift_changes_cm_alpha_by_cl_alpha_times_shift():
    # [derived] classical static-margin relation: dCm_alpha = CL_alpha * d(x_cg / c)
    text = SPARSE.replace("MAXBP", "0").replace(
        "  grid: {altitudes: 2, speeds: 9}",
        "  grid: {altitudes: 2, speeds: 9}\n  configurations:\n    - {name: ref, mass: 1000, pitch_inertia: 1500}\n"
        "    - {name: aft, mass: 1000, pitch_inertia: 1500, cg: 0.35}",
    )
    case = load_case_text(text, "t.yaml")
    env, aero = E.envelope_from_case(case)
    pts = E.points_at(env, np.array([0.0]), np.array([80.0]))
    d = E.derivatives_at(case, env, aero, pts)
    qsc_over_iy = 0.5 * 1.225 * 80.0**2 * 12 * 1.3 / 1500
    assert float(d.M_alpha[1] - d.M_alpha[0]) == pytest.approx(5.0 * 0.10 * qsc_over_iy, rel=1e-3)


def test_exports_round_trip_and_are_byte_identical(tmp_path):
    # r1 may be test_too_sparse_schedule_is_caught_and_repaired's schedule (designed once per
    # process); r2 is designed again here from the same case: the two must write the same bytes
    case, r1 = _sparse(9)
    r2 = design_schedule(case)
    (bp,), gains = schedule_out.read_csv(schedule_out.to_csv(r1.schedule, case))
    np.testing.assert_array_equal(bp, r1.schedule.breakpoints[0])
    np.testing.assert_array_equal(gains, r1.schedule.gains)
    import json

    import yaml

    j = json.loads(schedule_out.to_csv and __import__("json").dumps(schedule_out.table_dict(r1.schedule, case)))
    assert j["gains_s"] == r1.schedule.gains.tolist()
    y = yaml.safe_load(schedule_out.to_yaml(r1.schedule, case))
    assert y["variables"][0]["breakpoints"] == r1.schedule.breakpoints[0].tolist()
    a, b = tmp_path / "a", tmp_path / "b"
    a.mkdir()
    b.mkdir()
    schedule_out.write_schedule(a, case, r1, command="x")
    schedule_out.write_schedule(b, case, r2, command="x")
    for name in ("gain-schedule.csv", "gain-schedule.json", "gain-schedule.yaml", "gain_schedule.h", "schedule.json"):
        assert (a / name).read_bytes() == (b / name).read_bytes(), name
    header = (a / "gain_schedule.h").read_text()
    assert "static const double damper_gain_s[" in header and case.sha256 in header


def test_conditions_schedule_interpolates_derivatives():
    # Without an envelope the breakpoints are the conditions' dynamic pressures.
    text = """
title: conditions schedule
aircraft: {mass: 1000, pitch_inertia: 1500}
conditions:
  - {name: a, airspeed: 50, altitude: 0, derivatives: {Z_alpha: -120, M_alpha: -9, M_q: -1.0, M_delta: -14}}
  - {name: b, airspeed: 80, altitude: 0, derivatives: {Z_alpha: -300, M_alpha: -23, M_q: -1.6, M_delta: -36}}
loop: {actuator: {bandwidth: 20}}
schedule: {variables: [dynamic_pressure]}
"""
    r = design_schedule(load_case_text(text, "c.yaml"))
    q = 0.5 * 1.225 * np.array([50.0, 80.0]) ** 2
    np.testing.assert_allclose(r.schedule.breakpoints[0], q, rtol=1e-6)
    between = r.verification.points.kind == "between"
    assert between.sum() == 3
    # the midpoint's M_alpha is the mean of the two conditions' [derived: linear interpolation]
    mid = np.nonzero(between)[0][1]
    assert float(r.verification.points.derivatives.M_alpha[mid]) == pytest.approx(-16.0)
    assert "interpolated linearly" in r.message
    assert r.warnings == ()


def test_conditions_schedule_warns_when_variants_share_a_breakpoint():
    # Two CG variants at each speed without 'configuration' keys: the between-condition checks
    # would join a forward-CG point to an aft-CG neighbour, so the user is told; with keys,
    # each variant is interpolated on its own and nothing is said.
    base = """
title: variants
aircraft: {mass: 1000, pitch_inertia: 1500}
conditions:
  - {name: a-fwd, airspeed: 50, altitude: 0, CONF_F derivatives: {Z_alpha: -120, M_alpha: -9, M_q: -1.0, M_delta: -14}}
  - {name: a-aft, airspeed: 50, altitude: 0, CONF_A derivatives: {Z_alpha: -120, M_alpha: -5, M_q: -1.0, M_delta: -13}}
  - {name: b-fwd, airspeed: 80, altitude: 0, CONF_F derivatives: {Z_alpha: -300, M_alpha: -23, M_q: -1.6, M_delta: -36}}
  - {name: b-aft, airspeed: 80, altitude: 0, CONF_A derivatives: {Z_alpha: -300, M_alpha: -13, M_q: -1.6, M_delta: -33}}
loop: {actuator: {bandwidth: 20}}
schedule: {variables: [dynamic_pressure]}
"""
    plain_case = load_case_text(base.replace("CONF_F ", "").replace("CONF_A ", ""), "v.yaml")
    plain = design_schedule(plain_case)
    assert len(plain.warnings) == 2
    assert "a-fwd, a-aft" in plain.warnings[0] and "configuration" in plain.warnings[0]
    keyed = design_schedule(load_case_text(
        base.replace("CONF_F ", "configuration: fwd, ").replace("CONF_A ", "configuration: aft, "), "v.yaml"))
    assert keyed.warnings == ()
    assert "warning: conditions a-fwd, a-aft" in schedule_out.schedule_summary(plain)
    assert schedule_out.schedule_document(plain_case, plain)["warnings"] == list(plain.warnings)


def test_verification_points_are_distinct():
    # The envelope corners are regular-grid points too, and dense points can land on the
    # grid: each (altitude, airspeed, configuration) is verified and counted once, the
    # corners keeping their kind [common practice: a count of checks counts distinct checks].
    r = _sparse(0)[1]
    p = r.verification.points
    keys = set(zip(np.round(p.altitude, 6), np.round(p.airspeed, 6), p.configuration))
    assert len(keys) == p.altitude.size
    assert (p.kind == "corner").sum() == 2  # one altitude: the lowest and highest speed


def test_refinement_stops_when_infeasible_breakpoints_make_no_progress():
    # A damping band (0.90-0.95) that no gain reaches at part of the speed range: more
    # breakpoints cannot mend that, so refinement stops once a round fails at no smaller
    # fraction of its points (instead of running to max_breakpoints) and says why.
    text = SPARSE.replace("MAXBP", "12").replace("{min: 0.60, max: 0.70}", "{min: 0.90, max: 0.95}")
    r = design_schedule(load_case_text(text, "s.yaml"))
    assert not r.passed and not np.all(r.design.feasible)
    assert r.rounds < 4
    assert "refinement stopped after" in r.message and "no gain meeting every requirement" in r.message
    assert r.history[-1][1] >= 1


@pytest.mark.parametrize("variables, message", [
    ("[altitude, mach]", "a 2-D schedule needs an envelope with aerodynamic tables"),
    ("[]", "needs at least 1 item"),
    ("[altitude, mach, airspeed]", "has more than 2 items"),
])
def test_a_schedule_over_the_conditions_has_one_variable_or_the_loader_refuses_it(variables, message):
    """Source: docs/case-file.md (schedule.variables: one variable, or two with an envelope). The
    schedule over the conditions (damper/analysis/schedule_conditions.py) has no guard of its own:
    the case layer refuses anything but one variable there, naming the line of the key."""
    import os

    from damper.errors import CaseError

    path = os.path.join(os.path.dirname(__file__), "cases", "invalid", "schedule_2d_without_envelope.yaml")
    text = open(path, encoding="utf-8").read()
    assert "variables: [altitude, mach]" in text.splitlines()[16]  # [derived] line 17 of the file
    with pytest.raises(CaseError) as err:
        load_case_text(text.replace("[altitude, mach]", variables), "c.yaml")
    assert str(err.value).startswith("c.yaml:17: schedule.variables") and message in str(err.value)
