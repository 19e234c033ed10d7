"""How the case was understood (issue 19, item 3): each condition echoed as written and in SI,
warnings on implausible plain numbers, the level legend, one CAP unit everywhere.

Check values: 1 kt = 1852/3600 m/s and 1 ft = 0.3048 m (exact by definition); sea-level speed
of sound 340.294 m/s (Source: U.S. Standard Atmosphere 1976).
"""

import json

from damper.case import load_case_text
from damper.case.written import plain_number_warnings
from damper.cli import main
from damper.output.documents.understood import conditions_echo

from .conftest import ROOT

KT = 1852.0 / 3600.0  # m/s, exact
FT = 0.3048  # m, exact
A0 = 340.294  # m/s, Source: U.S. Standard Atmosphere 1976

DERIVS = "{Z_alpha: -300, M_alpha: -12, M_q: -2.5, M_delta: -20}"


def _case(*conditions):
    body = "".join(
        f"  - name: c{i}\n    {speed}\n    altitude: {alt}\n    derivatives: {DERIVS}\n"
        for i, (speed, alt) in enumerate(conditions)
    )
    return f"title: t\naircraft: {{mass: 1200, pitch_inertia: 1800}}\nconditions:\n{body}"


def test_a_plain_airspeed_above_mach_1_is_warned_and_a_written_unit_is_not():
    case = load_case_text(_case(("airspeed: 400", 0), ("airspeed: '400 m/s'", 0), ("airspeed: '400 kt'", 0)))
    (w,) = case.warnings
    assert w.startswith("conditions[0] (c0): airspeed = 400 is a plain number, taken as 400 m/s")
    assert f"({400 / KT:.0f} kt)" in w and f"Mach {400 / A0:.2f}" in w and "'400 kt'" in w


def test_a_plain_equivalent_airspeed_is_judged_by_its_true_mach_number():
    # 300 m/s EAS at sea level is Mach 300/340.294 = 0.88 (no warning); at 6 km TAS = EAS/sqrt(sigma)
    # with sigma = 0.5389 (Source: U.S. Standard Atmosphere 1976), about 409 m/s, Mach 1.29
    case = load_case_text(_case(("equivalent_airspeed: 300", 0), ("equivalent_airspeed: 300", 6000)))
    (w,) = case.warnings
    assert w.startswith("conditions[1] (c1): equivalent_airspeed = 300 is a plain number")


def test_a_plain_altitude_above_25_km_is_warned_unless_the_envelope_goes_there():
    case = load_case_text(_case(("mach: 0.5", 30000), ("mach: 0.5", "'30 km'"), ("mach: 0.5", 20000)))
    (w,) = case.warnings
    assert w.startswith("conditions[0] (c0): altitude = 30000 is a plain number, taken as 30000 m")
    assert f"({30000 / FT:.0f} ft)" in w and "'30000 ft'" in w
    high = {"altitude": {"min": 0.0, "max": 35000.0}, "mach": {"min": 0.3, "max": 0.8}}
    assert plain_number_warnings(case.conditions, high) == []


def test_many_implausible_plain_numbers_make_one_line():
    case = load_case_text(_case(*[("airspeed: 400", 0)] * 6))
    (w,) = case.warnings
    assert w.startswith("conditions: 6 speeds written as plain numbers") and "c0, c1, c2 and 3 more" in w


def test_assess_echoes_each_condition_as_written_and_in_si(tmp_path, capsys):
    path = tmp_path / "c.yaml"
    path.write_text(_case(("airspeed: '120 kt'", "'8000 ft'"), ("airspeed: 110", 0)), encoding="utf-8")
    assert main(["assess", str(path), "--gain", "0.1", "--quiet"]) in (0, 3)
    out = capsys.readouterr().out.splitlines()
    c0 = next(ln for ln in out if ln.startswith("  c0 "))
    assert "airspeed '120 kt', altitude '8000 ft' ->" in c0
    assert f"TAS {120 * KT:.4g} m/s (120 kt)" in c0 and f"{8000 * FT:.0f} m (8000 ft)" in c0
    c1 = next(ln for ln in out if ln.startswith("  c1 "))
    assert "airspeed 110 (plain: m/s)" in c1 and f"({110 / KT:.0f} kt)" in c1 and f"Mach {110 / A0:.3f}" in c1


def test_a_large_case_is_summarised_with_its_first_conditions():
    conds = [{"name": f"p{i}", "airspeed_m_s": 50.0 + i, "equivalent_airspeed_m_s": 50.0 + i, "altitude_m": 100.0 * i,
              "mach": (50.0 + i) / A0, "dynamic_pressure_pa": 1000.0} for i in range(25)]
    lines = conditions_echo(conds).splitlines()
    assert lines[0].startswith("25 conditions as understood: TAS 50-74 m/s") and len(lines) == 1 + 5 + 1
    assert lines[-1] == "  ... and 20 more"


def test_design_json_keeps_the_values_as_written(tmp_path):
    from .test_run_directory import ONE

    path = tmp_path / "one.yaml"
    path.write_text(ONE, encoding="utf-8")
    out = tmp_path / "run"
    assert main(["design", str(path), "--out", str(out), "--no-plots", "--no-responses", "--no-report", "--quiet"]) in (0, 3)
    cond = json.loads((out / "design.json").read_text())["case_summary"]["conditions"][0]
    assert cond["as_written"] == {"airspeed": "120 kt", "altitude": "0"}
    assert abs(cond["airspeed_m_s"] - 120 * KT) < 1e-9


def test_a_level_beside_a_failed_band_is_explained(capsys):
    # the demo's preset is MIL-F-8785C level 1 category B and its own damping band is tighter
    assert main(["assess", f"{ROOT}/cases/utility_single_aft_cg.yaml", "--gain", "0.2", "--quiet"]) in (0, 3)
    out = capsys.readouterr().out
    assert "fails: damping_ratio" in out  # a failed band stands beside level 1 on this case
    legend = [ln for ln in out.splitlines() if ln.startswith("level: ")]
    assert len(legend) == 1 and "MIL-F-8785C category B" in legend[0] and "case's own requirements" in legend[0]


def test_cap_has_one_unit_in_terminal_json_report_and_docs():
    from damper.output.report.format import unit_text
    from damper.requirements.criteria import KINDS

    unit = KINDS["cap"].unit
    assert unit == "(rad/s^2)/g"  # docs/theory.md: CAP = w^2 / (n/alpha) in (rad/s^2)/g
    with open(f"{ROOT}/docs/theory.md", encoding="utf-8") as fh:
        assert f"in {unit}" in fh.read()
    from damper.output.documents.text import handling_table

    assert unit in handling_table({"conditions": []})
    import glob

    src = "".join(open(p, encoding="utf-8").read() for p in sorted(glob.glob(f"{ROOT}/damper/output/report/*.py")))
    assert 'unit_text(KINDS["cap"].unit)' in src and "1/(s^2 g)" not in src
    assert unit_text(unit) == "(rad/s\u00b2)/g"
    with open(f"{ROOT}/docs/case-file.md", encoding="utf-8") as fh:
        assert f"control anticipation parameter, {unit}" in fh.read()
