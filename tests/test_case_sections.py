"""The case's sections are typed in damper.case; nothing outside it reads a raw case dict (issue 18).

Unit conversions are checked against their definitions: 1 ft = 0.3048 m and 1 kt = 1852/3600 m/s
(exact, international definitions), 1 deg = pi/180 rad, 1 ms = 1e-3 s (SI prefixes).
"""

from __future__ import annotations

import ast
import dataclasses
import hashlib
import math
from pathlib import Path

import pytest

from damper.case import load_case_text
from damper.case.model import Case

ROOT = Path(__file__).resolve().parents[1]
DEG = math.pi / 180.0  # Source: definition of the degree
FT = 0.3048  # Source: international foot, exact

BASE = """title: Invented sections test
aircraft:
  mass: 5000 kg
  pitch_inertia: 20000 kg*m**2
  wing_area: 20 m**2
  mean_chord: 2 m
conditions:
  - name: coeffs
    airspeed: 150
    altitude: 3000
    coefficients: {CL_alpha: '0.09 1/deg', CD: 0.03, Cm_alpha: -0.8, Cm_q: -9, Cm_delta: -1.2}
  - name: dims
    airspeed: 120
    altitude: 1000
    derivatives: {Z_alpha: -300, M_alpha: -8, M_q: -1.5, M_delta: -12}
loop:
  authority: 2 deg
  delay: 10 ms
  actuator: {bandwidth: 20 rad/s, travel: 10 deg}
"""

SECTIONS = """schedule:
  variables: [dynamic_pressure]
  breakpoints: 4
responses:
  duration: 4 s
  step: 2 ms
  inputs:
    - {kind: doublet, amplitude: 1 deg}
    - {kind: gust_one_minus_cosine, gust_velocity: 10 kt, gust_length: 100 ft}
turbulence:
  gust_rms: 2 m/s
  scale_length: 1750 ft
  ground_elevation: 1000 ft
requirements:
  preset: {standard: MIL-F-8785C, level: 1, category: B}
  phase_margin: {min: 40}
  turbulence_load_factor_rms: {max: 0.2}
uncertainty:
  samples: 300
  cg_shift: {range: [-0.02, 0.03]}
  parameters:
    - {name: delay, absolute: 2 ms}
failures:
  recognition_time: 2 s
  limits: {pitch_attitude: {max: 5 deg}}
"""


def _damper_modules():
    for path in sorted((ROOT / "damper").rglob("*.py")):
        rel = path.relative_to(ROOT).as_posix()
        if not rel.startswith("damper/case/"):
            yield rel, ast.parse(path.read_text(encoding="utf-8"), rel)


def test_no_module_outside_the_case_layer_reads_a_raw_case():
    found = []
    for rel, tree in _damper_modules():
        for node in ast.walk(tree):
            if isinstance(node, ast.Attribute) and node.attr == "raw":
                found.append(f"{rel}:{node.lineno}: .raw")
            elif isinstance(node, ast.keyword) and node.arg == "raw":
                found.append(f"{rel}:{node.lineno}: raw=")
            elif (isinstance(node, ast.Call) and isinstance(node.func, ast.Name) and node.func.id in ("getattr", "hasattr")
                  and len(node.args) > 1 and isinstance(node.args[1], ast.Constant) and node.args[1].value == "raw"):
                found.append(f"{rel}:{node.lineno}: {node.func.id}(..., 'raw')")
    assert found == []


def test_the_walk_would_find_a_raw_read():
    # the check above is live: the same walk flags a module that reads case.raw
    tree = ast.parse("def f(case):\n    return case.raw['conditions']\n")
    assert any(isinstance(n, ast.Attribute) and n.attr == "raw" for n in ast.walk(tree))


def test_case_has_no_raw_and_keeps_its_text_and_hash():
    assert "raw" not in {f.name for f in dataclasses.fields(Case)}
    case = load_case_text(BASE)
    assert not hasattr(case, "raw")
    assert case.text == BASE
    assert case.sha256 == hashlib.sha256(BASE.encode("utf-8")).hexdigest()  # Source: FIPS 180-4 (hashlib)
    with pytest.raises(dataclasses.FrozenInstanceError):
        case.schedule = None


def test_absent_sections_are_none():
    case = load_case_text(BASE)
    assert (case.envelope, case.aerodynamics, case.schedule, case.responses, case.turbulence, case.uncertainty,
            case.failures, case.requirements_given.preset) == (None,) * 8


def test_sections_are_typed_in_si():
    case = load_case_text(BASE + SECTIONS)
    assert case.schedule.variables == ("dynamic_pressure",) and case.schedule.breakpoints == 4
    r = case.responses
    assert (r.duration_s, r.step_s) == (4.0, pytest.approx(2e-3))
    assert r.output_step_s == pytest.approx(0.01)  # Source: docs/case-file.md, output_step's default 0.01 s
    doublet, gust = r.inputs
    assert doublet.amplitude_rad == pytest.approx(1 * DEG) and doublet.half_period_s is None
    assert gust.gust_velocity_m_s == pytest.approx(10 * 1852 / 3600)  # Source: international knot, exact
    assert gust.gust_length_m == pytest.approx(100 * FT)
    t = case.turbulence
    assert t.ground_elevation_m == pytest.approx(1000 * FT)
    assert (t.spec.gust_rms, t.spec.scale_length) == (2.0, pytest.approx(1750 * FT))
    g = case.requirements_given
    assert (g.preset.standard, g.preset.level, g.preset.category) == ("MIL-F-8785C", 1, "B")
    assert set(g.own_keys) == {"phase_margin", "turbulence_load_factor_rms"}  # the presets are not own keys
    assert g.turbulence_load_factor_rms_max_g == 0.2 and g.rate_limit_exceedances_max_per_s is None
    u = case.uncertainty
    assert (u.samples, u.cg_shift.low, u.cg_shift.high) == (300, -0.02, 0.03)
    assert u.parameters[0].absolute == pytest.approx(2e-3)
    f = case.failures
    assert f.recognition_time_s == 2.0
    assert f.limits.pitch_attitude_rad == pytest.approx((-5 * DEG, 5 * DEG))


def test_coefficients_keep_their_lift_curve_slope_for_the_cg_effect():
    from damper.analysis.uncertainty import _cg_effect

    case = load_case_text(BASE + SECTIONS)
    coeffs, dims = case.conditions
    assert coeffs.lift_curve_slope_per_rad == pytest.approx(0.09 / DEG)
    assert dims.lift_curve_slope_per_rad is None
    effect, source = _cg_effect(case, case.uncertainty.cg_shift)
    # Delta Cm_alpha = CL_alpha dx/c, so Delta M_alpha per dx/c = CL_alpha qbar S c / Iy
    # (the classical static-margin shift, e.g. Etkin & Reid, Dynamics of Flight, from memory)
    assert effect[0] == pytest.approx(0.09 / DEG * coeffs.dynamic_pressure * 20.0 * 2.0 / 20000.0)
    # without CL_alpha: the normal-force slope CN_alpha = -Z_alpha m / (qbar S), times qbar S c / Iy
    assert effect[1] == pytest.approx(300.0 * 5000.0 * 2.0 / 20000.0)
    assert source == ("coefficients.CL_alpha", "normal-force slope from Z_alpha")


def test_every_quantity_keeps_its_text_beside_its_si_value():
    case = load_case_text(BASE + SECTIONS)
    assert case.written_text("loop.actuator.bandwidth") == "20 rad/s"
    assert case.written_text("responses.inputs[1].gust_length") == "100 ft"
    assert case.written_text("turbulence.ground_elevation") == "1000 ft"
    assert case.written_text("uncertainty.parameters[0].absolute") == "2 ms"  # a spread in its parameter's unit
    assert case.written_text("conditions[1].airspeed") == "120"  # a plain number, as YAML read it
    assert case.written_text("schedule.breakpoints") is None  # a count, not a quantity
    plain = {w.key: w.plain for w in case.written}
    assert plain["conditions[1].airspeed"] and not plain["aircraft.mass"]
    # each text beside its SI value: 1750 ft is 533.4 m (Source: international foot, exact)
    assert case.written_text("turbulence.scale_length") == "1750 ft"
    assert case.turbulence.spec.scale_length == pytest.approx(1750 * FT)


#: Where the Case keeps each top-level section of the case file (a new section needs a typed home).
SECTION_HOMES = {
    "title": "title", "model": "model", "aircraft": "aircraft", "atmosphere": "altitude_kind",
    "conditions": "conditions", "envelope": "envelope", "aerodynamics": "aerodynamics", "schedule": "schedule",
    "loop": "loop", "requirements": "requirements", "responses": "responses", "turbulence": "turbulence",
    "analysis": "settings", "uncertainty": "uncertainty", "failures": "failures",
}


def test_every_section_of_the_schema_has_a_typed_home_on_the_case():
    from damper.case.schema import CASE

    fields = {f.name for f in dataclasses.fields(Case)}
    assert set(CASE.fields) == set(SECTION_HOMES), "a new section: give it a field of Case (DEVELOPERS.md)"
    assert {home for home in SECTION_HOMES.values()} <= fields
