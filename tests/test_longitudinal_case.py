"""The longitudinal model from the case file to the command's JSON (issue 20).

Oracle: the four equations of the issue written out here in descriptor form
``E x' = F x + G delta`` (so ``alpha'`` in the pitching-moment equation is solved by
``numpy.linalg.solve``, not substituted by hand as damper does), closed by a first-order
actuator and the damper law ``delta_c = -sign(M_delta) K q`` (docs/theory.md section 1);
eigenvalues by ``numpy.linalg.eigvals``, margins by python-control.
"""

from __future__ import annotations

import io
import json
import textwrap
from contextlib import redirect_stderr, redirect_stdout

import control
import numpy as np
import pytest

from damper.atmosphere import G0
from damper.cli import main

V = 28.0  # m/s
ALTITUDE = 300.0  # m
TAU_ACT = 1.0 / 12.0  # s, actuator time constant (12 rad/s)
K = 0.12  # s
#: Invented light UAV at low speed (plausible numbers; per unit mass and inertia).
BASE = {
    "Z_alpha": -95.0, "Z_q": -1.2, "Z_delta": -7.0,
    "M_alpha": -9.0, "M_alpha_dot": -0.6, "M_q": -2.2, "M_delta": -14.0,
    "X_u": -0.09, "X_alpha": 6.5, "Z_u": -0.70, "M_u": -0.004, "X_delta": 0.4,
}


def run(*argv):
    out, err = io.StringIO(), io.StringIO()
    with redirect_stdout(out), redirect_stderr(err):
        code = main(list(argv))
    return code, out.getvalue(), err.getvalue()


def write_case(tmp_path, derivs, *, model="longitudinal", gamma=None, extra="", name="case.yaml", actuator=True):
    lines = ", ".join(f"{k}: {v!r}" if not isinstance(v, str) else f'{k}: "{v}"' for k, v in derivs.items())
    text = f"""
    title: "longitudinal oracle case"
    model: {model}
    aircraft: {{mass: 110, pitch_inertia: 40}}
    conditions:
      - name: c1
        airspeed: {V}
        altitude: {ALTITUDE}
        {"" if gamma is None else f'flight_path_angle: "{gamma} deg"'}
        derivatives: {{{lines}}}
    loop:
      {f"actuator: {{time_constant: {TAU_ACT}}}" if actuator else ""}
    """
    path = tmp_path / name
    path.write_text(textwrap.dedent(text) + textwrap.dedent(extra))
    return str(path)


def oracle_airframe(d, gamma, g=G0):
    """(A, B) of states (u, alpha, q, theta) from the issue's equations in descriptor form."""
    E = np.eye(4)
    E[2, 1] = -d["M_alpha_dot"]  # q' - M_alpha_dot alpha' = ...
    F = np.array([
        [d["X_u"], d["X_alpha"], 0.0, -g * np.cos(gamma)],
        [d["Z_u"] / V, d["Z_alpha"] / V, (V + d["Z_q"]) / V, -g * np.sin(gamma) / V],
        [d["M_u"], d["M_alpha"], d["M_q"], 0.0],
        [0.0, 0.0, 1.0, 0.0],
    ])
    G = np.array([[d["X_delta"]], [d["Z_delta"] / V], [d["M_delta"]], [0.0]])
    return np.linalg.solve(E, F), np.linalg.solve(E, G)


def oracle_closed_loop(d, gamma):
    """States (u, alpha, q, theta, delta): actuator delta' = (delta_c - delta) / tau, delta_c = -sign(M_delta) K q."""
    A, B = oracle_airframe(d, gamma)
    Acl = np.zeros((5, 5))
    Acl[:4, :4] = A
    Acl[:4, 4] = B[:, 0]
    Acl[4, 2] = -np.sign(d["M_delta"]) * K / TAU_ACT
    Acl[4, 4] = -1.0 / TAU_ACT
    return Acl


def pair(lams):
    """(natural frequency, damping) of a complex pair (its upper member), the definitions of
    docs/theory.md section 4: wn = |l|, zeta = -Re(l) / |l|."""
    lam = lams[np.argmax(lams.imag)]
    return abs(lam), -lam.real / abs(lam)


def split_modes(lams):
    """Phugoid: the complex pair of smallest magnitude; short period: the next complex pair
    (a case with the modes well apart: 'slow' and 'fast' name them)."""
    cplx = sorted((x for x in lams if abs(x.imag) > 1e-9), key=abs)
    return np.array(cplx[:2]), np.array(cplx[2:4])


def flipped(d):
    """The same airframe with the elevator's sign convention reversed (M_delta > 0)."""
    return {**d, **{k: -d[k] for k in ("Z_delta", "M_delta", "X_delta")}}


CASES = [
    pytest.param(BASE, 0.0, id="level-Mdelta-negative"),
    pytest.param(flipped(BASE), 5.0, id="climb-5deg-Mdelta-positive"),
    pytest.param(BASE, -3.0, id="descent-3deg-Mdelta-negative"),
]


@pytest.mark.parametrize("derivs, gamma_deg", CASES)
def test_assess_json_matches_the_four_state_oracle(tmp_path, derivs, gamma_deg):
    path = write_case(tmp_path, derivs, gamma=gamma_deg)
    code, out, err = run("assess", path, "--gain", str(K), "--json")
    assert code in (0, 3), err
    c = json.loads(out)["conditions"][0]
    assert c["model"] == "longitudinal"
    gamma = np.radians(gamma_deg)
    assert c["flight"]["flight_path_angle_rad"] == pytest.approx(gamma, abs=1e-15)

    # every closed-loop eigenvalue (oracle: numpy eigvals of the 5x5 matrix written above)
    lam = np.linalg.eigvals(oracle_closed_loop(derivs, gamma))
    got = np.array([complex(re, im) for re, im in c["closed_loop"]["eigenvalues"]])
    assert got.size == 5
    for x in lam:
        assert np.min(np.abs(got - x)) < 1e-8 * max(1.0, abs(x))

    # closed-loop phugoid and short period (same oracle, pairs named by magnitude)
    ph, sp = split_modes(lam)
    wn, zeta = pair(ph)
    assert c["closed_loop"]["phugoid"]["natural_frequency_rad_s"] == pytest.approx(wn, rel=1e-8)
    assert c["closed_loop"]["phugoid"]["damping_ratio"] == pytest.approx(zeta, abs=1e-8)
    assert c["closed_loop"]["phugoid"]["period_s"] == pytest.approx(2 * np.pi / abs(ph[0].imag), rel=1e-8)
    wn, zeta = pair(sp)
    assert c["closed_loop"]["short_period"]["natural_frequency_rad_s"] == pytest.approx(wn, rel=1e-8)
    assert c["closed_loop"]["short_period"]["damping_ratio"] == pytest.approx(zeta, abs=1e-8)

    # bare airframe (oracle: eigvals of the 4x4 matrix)
    A, B = oracle_airframe(derivs, gamma)
    ph, sp = split_modes(np.linalg.eigvals(A))
    wn, zeta = pair(ph)
    assert c["bare"]["phugoid"]["natural_frequency_rad_s"] == pytest.approx(wn, rel=1e-8)
    assert c["bare"]["phugoid"]["damping_ratio"] == pytest.approx(zeta, abs=1e-8)
    wn, zeta = pair(sp)
    assert c["bare"]["short_period"]["natural_frequency_rad_s"] == pytest.approx(wn, rel=1e-8)

    # margins at the actuator input (oracle: python-control on L = sign(M_delta) K act(s) q/delta(s))
    plant = control.ss(A, B, np.array([[0.0, 0.0, 1.0, 0.0]]), np.zeros((1, 1)))
    L = np.sign(derivs["M_delta"]) * K * control.tf([1.0], [TAU_ACT, 1.0]) * control.ss2tf(plant)
    gm, pm, _, wpc, wgc, _ = control.stability_margins(L, returnall=True)
    crossings = c["margins"]["gain_crossings"]
    assert len(crossings) == len(wgc)
    for w in wgc:
        assert min(abs(x["frequency_rad_s"] - w) for x in crossings) < 1e-6 * w
    assert c["margins"]["phase_margin_deg"] == pytest.approx(min(abs(p) for p in pm), abs=1e-6)
    finite = [(w, 20 * np.log10(g)) for w, g in zip(wpc, gm) if np.isfinite(g) and w > 0]
    for w, g_db in finite:
        near = min(c["margins"]["phase_crossings"], key=lambda x: abs(x["frequency_rad_s"] - w))
        assert near["frequency_rad_s"] == pytest.approx(w, rel=1e-6)
        assert near["gain_margin_db"] == pytest.approx(g_db, abs=1e-6)


def test_two_state_approximation_and_phugoid_criteria_in_the_json(tmp_path):
    extra = """
    requirements:
      damping_ratio: {min: 0.3}
      phugoid_damping_ratio: {min: 0.04}
      phugoid_time_to_double: {min: "55 s"}
    """
    path = write_case(tmp_path, BASE, extra=extra)
    code, out, err = run("assess", path, "--gain", str(K), "--json")
    c = json.loads(out)["conditions"][0]
    two = c["closed_loop"]["short_period_two_state"]
    # oracle: the two-state equations of docs/theory.md section 1 (speed and attitude held) with the actuator
    v = V
    a11, a12 = BASE["Z_alpha"] / v, 1 + BASE["Z_q"] / v
    b1 = BASE["Z_delta"] / v
    mad = BASE["M_alpha_dot"]
    A = np.array([[a11, a12, b1],
                  [BASE["M_alpha"] + mad * a11, BASE["M_q"] + mad * a12, BASE["M_delta"] + mad * b1],
                  [0.0, -np.sign(BASE["M_delta"]) * K / TAU_ACT, -1 / TAU_ACT]])
    wn, zeta = pair(np.array([x for x in np.linalg.eigvals(A) if abs(x.imag) > 1e-9]))
    assert two["natural_frequency_rad_s"] == pytest.approx(wn, rel=1e-8)
    assert two["damping_ratio"] == pytest.approx(zeta, abs=1e-8)
    full = c["closed_loop"]["short_period"]
    differs = abs(full["damping_ratio"] - zeta) > 0.05 or abs(full["natural_frequency_rad_s"] - wn) > 0.05 * wn
    assert two["differs"] is bool(differs)
    crit = {x["name"]: x for x in c["criteria"]}
    lam = np.linalg.eigvals(oracle_closed_loop(BASE, 0.0))
    ph, _ = split_modes(lam)
    _, zeta_ph = pair(ph)
    assert crit["phugoid_damping_ratio"]["value"] == pytest.approx(zeta_ph, abs=1e-8)
    assert crit["phugoid_damping_ratio"]["met"] is bool(zeta_ph >= 0.04)
    stable = ph[0].real < 0
    assert crit["phugoid_time_to_double"]["met"] is True if stable else crit["phugoid_time_to_double"]["value"] > 0
    # the damping band applies to the four-state closed loop's modal pair by default (docs/theory.md section 8)
    assert crit["damping_ratio"]["measure"] == "modal"
    assert crit["damping_ratio"]["value"] == pytest.approx(full["damping_ratio"], abs=1e-15)


def test_reduction_to_the_short_period_case(tmp_path):
    # speed derivatives zero in level flight: alpha and q obey the two-state equations exactly
    # (docs/theory.md section 8), so the short period and the margins of the short-period case
    # come back (the gravity term only moves u and theta, which then feed nothing back).
    zero = {**BASE, **{k: 0.0 for k in ("X_u", "X_alpha", "Z_u", "M_u", "X_delta")}}
    short = {k: v for k, v in BASE.items() if k not in ("X_u", "X_alpha", "Z_u", "M_u", "X_delta")}
    docs = {}
    for model, d in (("longitudinal", zero), ("short_period", short)):
        path = write_case(tmp_path, d, model=model, name=f"{model}.yaml")
        code, out, err = run("assess", path, "--gain", str(K), "--json")
        assert code in (0, 3), err
        docs[model] = json.loads(out)["conditions"][0]
    lon, sp = docs["longitudinal"], docs["short_period"]
    for key in ("damping_ratio", "natural_frequency_rad_s"):
        assert lon["closed_loop"]["short_period"][key] == pytest.approx(sp["closed_loop"]["short_period"][key], rel=1e-9)
        assert lon["bare"]["short_period"][key] == pytest.approx(sp["bare"]["short_period"][key], rel=1e-9)
    # the gain and phase crossings are those of the same loop; the disk margin is defined for a
    # stable loop only, and the neutral speed and attitude (a double root at the origin) are not
    for key in ("gain_margin_db", "phase_margin_deg", "gain_crossover_rad_s", "phase_crossover_rad_s"):
        a, b = lon["margins"][key], sp["margins"][key]
        assert (a is None and b is None) or a == pytest.approx(b, rel=1e-9), key
    assert [x for x in lon["closed_loop"]["eigenvalues"] if x == [0.0, 0.0]] == [[0.0, 0.0]] * 2
    assert lon["closed_loop"]["short_period_two_state"]["differs"] is False


def test_reduction_with_gravity_removed_is_bit_for_bit_in_the_measures():
    # the model level (gravity is no case key): speed terms and gravity zero -> the loop's
    # margins and equivalent fit equal the two-state loop's, modes to 1e-9 (docs/theory.md section 8)
    from damper.analysis.assess import assess_loop
    from damper.measures.margins import loop_margins
    from damper.model.airframe import Derivatives
    from damper.model.elements import Lag, Washout
    from damper.model.longitudinal import with_speed_terms
    from damper.model.loop import Hardware, Loop

    short = Derivatives(airspeed=np.asarray(V), **{k: np.asarray(v) for k, v in BASE.items()
                                                  if k in Derivatives.__dataclass_fields__})
    lon = with_speed_terms(short, X_u=0.0, X_alpha=0.0, Z_u=0.0, M_u=0.0, gravity=0.0)
    hw = Hardware(actuator=Lag(TAU_ACT), washout=Washout(2.0))
    gains = np.array([0.05, 0.12, 0.4])
    a = assess_loop(Loop(lon, hw, gains), w=np.logspace(-3, 3, 31))
    b = assess_loop(Loop(short, hw, gains), w=np.logspace(-3, 3, 31))
    # margins of the loops themselves (the assessment withholds them where the loop is not
    # strictly stable, and the free speed and attitude are two roots at the origin)
    w = np.logspace(-3, 3, 31)
    ma, mb = loop_margins(Loop(lon, hw, gains), w=w), loop_margins(Loop(short, hw, gains), w=w)
    np.testing.assert_array_equal(ma.phase_margin_deg, mb.phase_margin_deg)
    np.testing.assert_array_equal(ma.gain_margin_db, mb.gain_margin_db)
    np.testing.assert_array_equal(ma.disk_margin, mb.disk_margin)
    np.testing.assert_allclose(a.equivalent.damping_ratio, b.equivalent.damping_ratio, atol=1e-9)
    np.testing.assert_allclose(a.modes.short_period.damping_ratio, b.modes.short_period.damping_ratio, atol=1e-9)
    np.testing.assert_allclose(a.modes.short_period.natural_frequency, b.modes.short_period.natural_frequency,
                               rtol=1e-9)
    np.testing.assert_allclose(a.equivalent_plain.damping_ratio, b.equivalent.damping_ratio, atol=1e-9)


def test_force_and_moment_forms_of_the_speed_derivatives(tmp_path):
    # the dimension tells the form (design notes section 4): N s/m divided by the mass, N s
    # (N m per m/s) by the pitch inertia; mass 110 kg, inertia 40 kg m^2 (the case above)
    dims = {**BASE, "X_u": f"{BASE['X_u'] * 110} N*s/m", "Z_u": f"{BASE['Z_u'] * 110} N*s/m",
            "X_alpha": f"{BASE['X_alpha'] * 110} N", "M_u": f"{BASE['M_u'] * 40} N*s",
            "X_delta": f"{BASE['X_delta'] * 110} N"}
    outs = []
    for name, d in (("plain.yaml", BASE), ("dims.yaml", dims)):
        code, out, err = run("assess", write_case(tmp_path, d, name=name), "--gain", str(K), "--json")
        assert code in (0, 3), err
        outs.append(json.loads(out)["conditions"][0]["closed_loop"]["eigenvalues"])
    np.testing.assert_allclose(np.array(outs[0]), np.array(outs[1]), rtol=1e-12, atol=1e-12)


def test_coefficients_give_the_textbook_speed_derivatives(tmp_path):
    # Nelson, Flight Stability and Automatic Control, 2nd ed., ch. 3-4 (from memory), written
    # out here: X_u = (CT_u - CD_u - 2 CD) Q / V, X_alpha = (CL0 - CD_alpha) Q,
    # Z_u = -(CL_u + 2 CL0) Q / V, M_u = Cm_u qbar S c / (Iy V), CL0 = m g cos(gamma) / (qbar S)
    from damper.atmosphere import standard_atmosphere
    from damper.case.load import load_case

    m, iy, s, c, v, gamma = 110.0, 40.0, 2.8, 0.45, 30.0, np.radians(3.0)
    coef = dict(CL_alpha=5.1, CD=0.06, CL_delta=0.3, Cm_alpha=-0.6, Cm_alpha_dot=-1.5, Cm_q=-4.0, Cm_delta=-1.1,
                CL_u=0.05, CD_u=0.01, Cm_u=-0.03, CT_u=-0.06, CD_alpha=0.2)
    text = f"""
    title: coefficients
    model: longitudinal
    aircraft: {{mass: {m}, pitch_inertia: {iy}, wing_area: {s}, mean_chord: {c}}}
    conditions:
      - {{name: c, airspeed: {v}, altitude: 0, flight_path_angle: "3 deg", coefficients: {json.dumps(coef)}}}
    """
    path = tmp_path / "coef.yaml"
    path.write_text(textwrap.dedent(text))
    d = load_case(str(path)).conditions[0].derivatives
    qbar = 0.5 * float(standard_atmosphere(0.0).density) * v * v
    Q = qbar * s / m
    cl0 = m * G0 * np.cos(gamma) / (qbar * s)
    assert float(d.X_u) == pytest.approx((coef["CT_u"] - coef["CD_u"] - 2 * coef["CD"]) * Q / v, rel=1e-12)
    assert float(d.X_alpha) == pytest.approx((cl0 - coef["CD_alpha"]) * Q, rel=1e-12)
    assert float(d.Z_u) == pytest.approx(-(coef["CL_u"] + 2 * cl0) * Q / v, rel=1e-12)
    assert float(d.M_u) == pytest.approx(coef["Cm_u"] * qbar * s * c / (iy * v), rel=1e-12)
    assert float(d.flight_path_angle) == pytest.approx(gamma, rel=1e-15)


@pytest.mark.parametrize("what, edit, words", [
    ("missing speed derivative", lambda d: {k: v for k, v in d.items() if k != "M_u"}, ["derivatives", "M_u", "longitudinal"]),
    ("speed key on a short-period case", None, ["X_u", "short_period"]),
    ("phugoid requirement on a short-period case", "phugoid", ["phugoid_damping_ratio", "longitudinal"]),
])
def test_one_line_errors(tmp_path, what, edit, words):
    if edit is None:
        path = write_case(tmp_path, BASE, model="short_period")
    elif edit == "phugoid":
        short = {k: v for k, v in BASE.items() if k not in ("X_u", "X_alpha", "Z_u", "M_u", "X_delta")}
        path = write_case(tmp_path, short, model="short_period",
                          extra="requirements:\n  phugoid_damping_ratio: {min: 0.04}\n")
    else:
        path = write_case(tmp_path, edit(BASE))
    code, out, err = run("assess", path, "--gain", "0.1")
    assert code == 2, what
    lines = [x for x in err.strip().splitlines() if x]
    assert len(lines) == 1 and "Traceback" not in err, err
    for w in words:
        assert w in lines[0], (what, lines[0])


def test_perturbed_and_interpolated_airframes_stay_longitudinal(tmp_path):
    # the known bug: Derivatives(**fields) dropped the speed terms in the robustness sampling
    # and the schedule's interpolation; the airframe's type must survive both
    from damper.analysis import schedule_conditions
    from damper.analysis.uncertainty import resolve_axes, sampled_loop, uncertainty_spec
    from damper.case.load import load_case
    from damper.model.longitudinal import LongitudinalDerivatives

    extra = """
    uncertainty:
      samples: 8
      parameters:
        - {name: M_u, relative: 0.3}
        - {name: mass, relative: 0.1}
    """
    path = write_case(tmp_path, BASE, extra=extra)
    case = load_case(path)
    spec = uncertainty_spec(case)
    axes = resolve_axes(case, spec, np.array([K]))
    u = np.array([[1.0, 1.0]])
    loop = sampled_loop(case, axes, np.array([K]), np.array([0]), u)
    assert isinstance(loop.airframe, LongitudinalDerivatives)
    # M_u at nominal + 30 % of |nominal|; a 10 % heavier mass scales the X and Z derivatives by nominal / sampled mass
    mass_scale = 1.0 / 1.1
    assert float(loop.airframe.M_u[0]) == pytest.approx(BASE["M_u"] + 0.3 * abs(BASE["M_u"]), rel=1e-12)
    assert float(loop.airframe.X_u[0]) == pytest.approx(BASE["X_u"] * mass_scale, rel=1e-12)
    assert float(loop.airframe.Z_u[0]) == pytest.approx(BASE["Z_u"] * mass_scale, rel=1e-12)
    two = write_case(tmp_path, BASE, name="two.yaml", extra="")
    case2 = load_case(two)
    pts, *_ = schedule_conditions._conditions_points(case2, "dynamic_pressure")
    assert isinstance(pts.derivatives, LongitudinalDerivatives)


def test_demo_case_designs_cleanly(shared_run):
    # the demo's shared run (tests/shared_runs.py, `design --no-plots`): its design.json is that of
    # `design --no-plots --no-responses --no-report --no-robustness` (tests/test_run_hashes.py)
    shared = shared_run("survey_uav_loiter_longitudinal")
    code, out, err = shared.code, shared.stdout, shared.stderr
    assert code == 0, out + err
    doc = shared.json("design.json")
    for c in doc["conditions"]:
        assert c["feasible"]
        m = c["measures"]
        assert m["model"] == "longitudinal"
        assert m["closed_loop"]["phugoid"]["damping_ratio"] >= 0.04  # MIL-F-8785C level 1 (from memory)
    assert "phugoid" in out


@pytest.mark.parametrize("level, name, minimum", [
    (1, "phugoid_damping_ratio", 0.04),  # Source: MIL-F-8785C para 3.2.1.2, level 1 (from memory)
    (2, "phugoid_damping_ratio", 0.0),  # Source: MIL-F-8785C para 3.2.1.2, level 2 (from memory)
    (3, "phugoid_time_to_double", 55.0),  # Source: MIL-F-8785C para 3.2.1.2, level 3, s (from memory)
])
def test_phugoid_preset_by_level(level, name, minimum):
    from damper.requirements.spec import build_requirements

    raw = {"preset": {"standard": "MIL-F-8785C", "level": level, "category": "B", "aircraft_class": None},
           "margins_preset": None, "damping_measure": None, "free_zero": "no"}
    lon = {c.name: c for c in build_requirements(raw, model="longitudinal").criteria}
    assert lon[name].lower == minimum and lon[name].upper == float("inf")
    assert "3.2.1.2" in lon[name].source and "from memory" in lon[name].source
    assert lon["damping_ratio"].measure == "modal"
    short = build_requirements(raw, model="short_period")
    assert not [c for c in short.criteria if c.name.startswith("phugoid")]
    assert short.damping_measure == "equivalent"
