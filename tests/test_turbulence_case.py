"""The ``turbulence:`` case section end to end: ``damper assess --json`` and design.json carry
``bare.turbulence`` and ``closed_loop.turbulence`` per condition (issue 22 JSON contract),
checked against a frequency-domain integral written here and the standard's table."""

from __future__ import annotations

import io
import json
from contextlib import redirect_stderr, redirect_stdout

import numpy as np
import pytest

from damper.cli import main

G0 = 9.80665  # m/s^2, standard gravity (Source: ISO 80000-3 / the 1976 standard atmosphere)
KT = 1852.0 / 3600.0  # m/s per knot (Source: definition of the knot)
FT = 0.3048  # m per foot (Source: definition)

# Invented airframe, ideal hardware (no loop section): the closed loop is the two-state short period.
D = {"Z_alpha": -300.0, "Z_delta": -15.0, "M_alpha": -9.0, "M_alpha_dot": -0.5, "M_q": -1.6, "M_delta": -22.0}
V = 80.0
CASE = f"""
title: turbulence check (invented)
aircraft: {{mass: 1200, pitch_inertia: 2200, wing_area: 16.0, mean_chord: 1.5}}
conditions:
  - name: cruise
    airspeed: {V}
    altitude: "15000 ft"
    derivatives: {{Z_alpha: {D['Z_alpha']}, Z_delta: {D['Z_delta']}, M_alpha: {D['M_alpha']},
                  M_alpha_dot: {D['M_alpha_dot']}, M_q: {D['M_q']}, M_delta: {D['M_delta']}}}
requirements:
  damping_ratio: {{min: 0.4}}
"""


def run(*argv):
    out, err = io.StringIO(), io.StringIO()
    with redirect_stdout(out), redirect_stderr(err):
        code = main([str(a) for a in argv])
    return code, out.getvalue(), err.getvalue()


def _assess(tmp_path, turbulence, gain):
    path = tmp_path / "case.yaml"
    path.write_text(CASE + turbulence, encoding="utf-8")
    code, out, err = run("assess", path, "--gain", gain, "--json")
    assert code in (0, 3), err
    return json.loads(out)["conditions"][0], path


def _oracle(k, sigma, length):
    """rms of q (rad/s), alpha (rad) and n_z (g) by integrating |H|^2 times the Dryden spectrum.

    Source: the two-state short period with the gust as an angle of attack w_g / V entering
    through Z_alpha and M_alpha (M_alpha_dot acting through alpha' only), the damper
    delta = -sign(M_delta) K q, n_z = -(Z_alpha (alpha + alpha_g) + Z_delta delta) / g0
    (docs/turbulence.md section 3, written out here); the Dryden vertical spectrum of
    MIL-F-8785C (from memory): Phi(w) = sigma^2 L/(pi V) (1 + 3 (L w/V)^2) / (1 + (L w/V)^2)^2.
    """
    za, zd, ma, mad, mq, md = (D[k_] for k_ in ("Z_alpha", "Z_delta", "M_alpha", "M_alpha_dot", "M_q", "M_delta"))
    fb = -np.sign(md) * k
    a = np.array([[za / V, 1.0 + zd / V * fb],
                  [ma + mad * za / V, mq + mad * (1.0 + zd / V * fb) + md * fb]])
    b = np.array([za / V, ma + mad * za / V]) / V  # per unit w_g (m/s)
    w = np.logspace(-6, 5, 400_001)
    s = 1j * w
    det = (s - a[0, 0]) * (s - a[1, 1]) - a[0, 1] * a[1, 0]
    h_alpha = ((s - a[1, 1]) * b[0] + a[0, 1] * b[1]) / det
    h_q = (a[1, 0] * b[0] + (s - a[0, 0]) * b[1]) / det
    h_nz = -(za * (h_alpha + 1.0 / V) + zd * fb * h_q) / G0
    x = length * w / V
    phi = sigma**2 * length / (np.pi * V) * (1 + 3 * x**2) / (1 + x**2) ** 2
    out = {}
    for name, h in (("q", h_q), ("alpha", h_alpha), ("nz", h_nz)):
        f = np.abs(h) ** 2 * phi
        integral = np.trapezoid(f * w, np.log(w)) + f[0] * w[0]  # d(w) = w d(ln w); the rest below w[0]
        out[name] = np.sqrt(integral)
    return out


@pytest.mark.parametrize("gain", [0.0, 0.15])
def test_assess_rms_equals_the_frequency_domain_integral(tmp_path, gain):
    entry, _ = _assess(tmp_path, "turbulence: {gust_rms: 2.0, scale_length: 533.4}\n", gain)
    bare, closed = entry["bare"]["turbulence"], entry["closed_loop"]["turbulence"]
    assert closed["gust_rms_m_s"] == 2.0 and closed["scale_length_m"] == 533.4
    for got, k in ((closed, gain), (bare, 0.0)):
        ref = _oracle(k, 2.0, 533.4)
        assert got["rms_pitch_rate_rad_s"] == pytest.approx(ref["q"], rel=1e-4)
        assert got["rms_angle_of_attack_rad"] == pytest.approx(ref["alpha"], rel=1e-4)
        assert got["rms_load_factor_g"] == pytest.approx(ref["nz"], rel=1e-4)
    # surface fields are null for the bare airframe, with the reason
    assert bare["rms_surface_rad"] is None and "bare airframe" in bare["reasons"]["rms_surface_rad"]
    # Source: delta = -sign(M_delta) K q, so rms(delta) = K rms(q) with ideal hardware
    assert closed["rms_surface_rad"] == pytest.approx(gain * closed["rms_pitch_rate_rad_s"], rel=1e-9, abs=1e-15)
    # ideal hardware: the surface acceleration has a white-noise part (docs/turbulence.md section 5)
    if gain > 0:
        assert closed["rate_limit_exceedances_per_s"] is None and closed["reasons"]["rate_limit_exceedances_per_s"]


def test_the_standards_intensity_at_each_conditions_height_above_ground(tmp_path):
    entry, _ = _assess(tmp_path, "turbulence: {severity: moderate}\n", 0.1)
    t = entry["closed_loop"]["turbulence"]
    # Source: MIL-F-8785C medium/high altitude, probability 1e-3 (moderate) at 15000 ft: 8.0 ft/s,
    # L_w = 1750 ft (from memory; docs/turbulence.md table)
    assert t["gust_rms_m_s"] == pytest.approx(8.0 * FT, rel=1e-12)
    assert t["scale_length_m"] == pytest.approx(1750 * FT, rel=1e-12)
    entry, _ = _assess(tmp_path, "turbulence: {severity: moderate, ground_elevation: \"14500 ft\"}\n", 0.1)
    t = entry["closed_loop"]["turbulence"]
    # Source: MIL-F-8785C low altitude (from memory): sigma_w = 0.1 W20 (W20 = 30 kt, moderate), L_w = h
    assert t["gust_rms_m_s"] == pytest.approx(0.1 * 30 * KT, rel=1e-9)
    assert t["scale_length_m"] == pytest.approx(500 * FT, rel=1e-9)


def test_design_json_carries_turbulence_at_the_chosen_gain(tmp_path):
    _, path = _assess(tmp_path, "turbulence: {gust_rms: 1.5, scale_length: 300}\n", 0.1)
    out = tmp_path / "run"
    code, _, err = run("design", path, "--out", out, "--no-plots", "--no-report", "--no-responses")
    assert code in (0, 3), err
    entry = json.loads((out / "design.json").read_text())["conditions"][0]
    t = entry["measures"]["closed_loop"]["turbulence"]
    ref = _oracle(entry["chosen_gain_s"], 1.5, 300.0)
    assert t["rms_pitch_rate_rad_s"] == pytest.approx(ref["q"], rel=1e-4)
    code, text, err = run("assess", path, "--design", out, "--json")
    assert json.loads(text)["conditions"][0]["closed_loop"]["turbulence"] == t  # Source: the design run itself


def test_bad_turbulence_sections_are_one_line_errors(tmp_path):
    for section, words in (("turbulence: {gust_rms: 2}\n", "together"),
                           ("turbulence: {severity: heavy}\n", "must be one of light, moderate, severe"),
                           ("turbulence: {exceedance_probability: 0.003}\n", "no interpolation"),
                           ("turbulence: {severity: light, gust_rms: 1, scale_length: 100}\n", "not both")):
        path = tmp_path / "bad.yaml"
        path.write_text(CASE + section, encoding="utf-8")
        code, _, err = run("assess", path, "--gain", "0.1")
        assert code == 2 and words in err and "Traceback" not in err, err


def test_turbulence_requirements_are_checked_per_condition(tmp_path):
    ref = _oracle(0.15, 2.0, 533.4)
    low, high = 0.5 * ref["nz"], 2.0 * ref["nz"]
    for limit, met in ((low, False), (high, True)):
        req = (f"requirements:\n  damping_ratio: {{min: 0.4}}\n  turbulence_load_factor_rms: {{max: {float(limit)!r}}}\n"
               "  rate_limit_exceedances: {max: 0.1}\n")
        path = tmp_path / "req.yaml"
        path.write_text(CASE.replace("requirements:\n  damping_ratio: {min: 0.4}\n", req)
                        + "turbulence: {gust_rms: 2.0, scale_length: 533.4}\n", encoding="utf-8")
        code, out, err = run("assess", path, "--gain", "0.15", "--json")
        checks = {c["name"]: c for c in json.loads(out)["conditions"][0]["closed_loop"]["turbulence"]["requirements"]}
        nz = checks["turbulence_load_factor_rms"]
        # Source: the frequency-domain integral above against the limit written here
        assert nz["met"] is met and nz["value"] == pytest.approx(ref["nz"], rel=1e-4)
        assert nz["slack"] == pytest.approx((limit - nz["value"]) / limit, rel=1e-12)
        # no rate limit in this case (ideal hardware): not judged as met, with the reason
        assert checks["rate_limit_exceedances"]["met"] is False and checks["rate_limit_exceedances"]["reason"]
        code, text, _ = run("assess", path, "--gain", "0.15")
        # the run's verdict lists it (and the exit status says so)
        assert ("not met: cruise: turbulence_load_factor_rms (in turbulence:" in text) is not met
        assert code == 3  # the rate-limit requirement cannot be met without a rate limit
    from damper.analysis.turbulence_case import case_turbulence, check_turbulence, turbulence_items
    from damper.case import load_case

    case = load_case(str(path))
    items = turbulence_items(case, check_turbulence(case, case_turbulence(case, 0.15).closed_loop))
    assert [(i.part, i.condition, i.requirement, i.met) for i in items] == [
        ("design", "cruise", "rate_limit_exceedances", False)]


def test_a_turbulence_requirement_needs_the_section(tmp_path):
    path = tmp_path / "nosection.yaml"
    path.write_text(CASE.replace("  damping_ratio: {min: 0.4}\n",
                                 "  damping_ratio: {min: 0.4}\n  turbulence_load_factor_rms: {max: 0.1}\n"),
                    encoding="utf-8")
    code, _, err = run("assess", path, "--gain", "0.1")
    assert code == 2 and "needs a turbulence: section" in err
