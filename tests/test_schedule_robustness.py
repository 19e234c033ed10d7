"""Robustness of a schedule: the study runs at the schedule's tightest verification points.

Test data are invented (the regional twin-jet demo case with a small uncertainty section).
"""

import functools
import json
import os

import numpy as np
import pytest

from damper.analysis.robustness import robustness, uncertainty_spec
from damper.analysis.schedule import design_schedule
from damper.analysis.schedule_points import schedule_study_case, tightest_points
from damper.case import load_case_text
from damper.cli import main

from .conftest import ROOT

TWINJET = os.path.join(ROOT, "cases", "regional_twinjet_envelope.yaml")
UNCERTAIN = """
uncertainty:
  samples: 40
  seed: 3
  schedule_points: 4
  parameters:
    - {name: M_alpha, relative: 0.10}
    - {name: M_q, relative: 0.10}
"""
ZERO = """
uncertainty:
  samples: 8
  seed: 3
  schedule_points: 5
  parameters:
    - {name: M_alpha, relative: 0.0}
"""


def _twinjet_text(extra):
    """The demo case with its uncertainty section replaced by `extra`."""
    with open(TWINJET, encoding="utf-8") as f:
        text = f.read()
    return text[: text.index("\n# Tolerances of the data")] + "\n" + extra


def _twinjet(extra):
    return load_case_text(_twinjet_text(extra), "twinjet.yaml")


@functools.lru_cache(maxsize=None)
def _designed(extra):
    """(case, design_schedule(case)) of the demo with the uncertainty section `extra`, designed
    once per process for every test below that reads it (none changes it)."""
    case = _twinjet(extra)
    return case, design_schedule(case)


@pytest.fixture(scope="module")
def uncertain_run(tmp_path_factory):
    """``design twinjet.yaml --out run --no-plots --no-responses`` of the demo with the study
    section UNCERTAIN: built once per test run (tests/shared_runs.py: under a lock, in the
    directory common to the pytest-xdist workers) and read by the two tests that designed the
    same case with the same options each on its own. Read only."""
    from .shared_runs import _built_once, run_main

    base = tmp_path_factory.getbasetemp()
    if os.environ.get("PYTEST_XDIST_WORKER"):
        base = base.parent  # common to every worker of this test run

    def build(where):
        (where / "twinjet.yaml").write_text(_twinjet_text(UNCERTAIN), encoding="utf-8")
        argv = ["design", "twinjet.yaml", "--out", "run", "--no-plots", "--no-responses"]
        code, out, err = run_main(argv, cwd=where)
        return {"code": code, "stdout": out, "stderr": err, "argv": argv}

    return _built_once(base / "shared-runs", "twinjet-schedule-robustness", build)


def test_tightest_points_take_each_configuration_first_then_the_least_slack():
    # [derived] order by slack (ties by index), one least-slack point per configuration
    # first, repeated labels skipped
    slack = np.array([0.5, 0.1, 0.3, np.nan, 0.1, 0.9, 0.2])
    conf = np.array([0, 0, 0, 1, 0, 1, 0])
    labels = ["a", "b", "c", "d", "b", "f", "g"]
    assert tightest_points(slack, conf, 4, labels).tolist() == [1, 5, 6, 2]
    assert tightest_points(slack, conf, 3).tolist() == [1, 5, 4]
    assert tightest_points(slack, conf, 99, labels).tolist() == [1, 5, 6, 2, 0, 3]


def test_study_points_carry_the_verification_gain_and_derivatives():
    # the nominal study (zero spread) reproduces the schedule verification at every studied
    # point: the same worst slack from an independent evaluation of the same loops
    case = _twinjet(ZERO)
    sched = design_schedule(case)
    study, gains, idx = schedule_study_case(case, sched, 5)
    assert len(study.conditions) == 5 and len({c.name for c in study.conditions}) == 5
    ver = sched.verification
    np.testing.assert_array_equal(gains, ver.gains[idx])
    # the least slack of all is studied first
    assert ver.worst_slack[idx[0]] == np.nanmin(ver.worst_slack)
    r = robustness(study, gains, uncertainty_spec(study), refine=False)
    for k, c in enumerate(study.conditions):
        assert c.configuration in ("light-fwd", "heavy-aft")
        assert c.name == ver.points.labels[idx[k]]
    # slacks: (criteria, conditions, samples); every sample is the nominal loop
    np.testing.assert_allclose(r.slacks.min(axis=0)[:, 0], ver.worst_slack[idx], rtol=1e-9, atol=1e-12)
    np.testing.assert_allclose(r.damping[:, 0], ver.damping_ratio[idx], rtol=1e-9)
    assert np.ptp(r.slacks.min(axis=0), axis=1).max() == 0.0


def test_design_runs_the_study_on_a_schedule_case(uncertain_run):
    out, rc, text = uncertain_run.path, uncertain_run.code, uncertain_run.stdout
    assert rc in (0, 3)  # 0 met, 3 not met: the verdict (docs/verdict.md) is checked in tests/test_verdict.py
    assert "robustness at the scheduled gains, at the tightest verification points" in text
    doc = json.loads((out / "robustness.json").read_text())
    assert len(doc["conditions"]) == 4
    assert doc["method"]["conditions_studied"].startswith("the 4 verification points of the schedule")
    sched = json.loads((out / "schedule.json").read_text())
    assert sched  # the schedule is still designed and written
    assert "conditions studied" in (out / "report.html").read_text()


def test_conditions_schedule_points_interpolate_mass_between_conditions():
    # [derived] a point a quarter of the way from condition "slow one" to "fast one" has a
    # quarter of the mass difference (masses interpolated like the derivatives)
    text = """
title: conditions schedule with masses (invented)
aircraft: {mass: 1000, pitch_inertia: 1500}
conditions:
  - {name: slow one, airspeed: 50, altitude: 0, mass: 900, pitch_inertia: 1400,
     derivatives: {Z_alpha: -120, M_alpha: -9, M_q: -1.0, M_delta: -14}}
  - {name: fast one, airspeed: 80, altitude: 0, mass: 1100, pitch_inertia: 1600,
     derivatives: {Z_alpha: -300, M_alpha: -23, M_q: -1.6, M_delta: -36}}
loop: {actuator: {bandwidth: 20}}
schedule: {variables: [dynamic_pressure]}
uncertainty:
  samples: 4
  schedule_points: 20
  parameters:
    - {name: mass, relative: 0.05}
"""
    case = load_case_text(text, "c.yaml")
    sched = design_schedule(case)
    study, gains, idx = schedule_study_case(case, sched, 20)
    by_name = {c.name: c for c in study.conditions}
    assert len(study.conditions) == sched.verification.passed.size == 5
    assert by_name["slow one"].mass == 900 and by_name["fast one"].pitch_inertia == 1600
    assert by_name["slow one~fast one 25%"].mass == 950
    assert by_name["slow one~fast one 75%"].pitch_inertia == 1550
    r = robustness(study, gains, uncertainty_spec(study), refine=False)
    assert r.values.shape[1] == 5


def test_robust_reads_a_schedule_file_and_studies_its_tightest_points(tmp_path, capsys, uncertain_run):
    # the same study from the written gain-schedule.json as from the design run itself
    path = uncertain_run.path.parent / "twinjet.yaml"
    design = uncertain_run.path  # read only: robust writes into its own --out
    assert uncertain_run.code in (0, 3)  # 0 met, 3 not met: the verdict (docs/verdict.md) is checked in tests/test_verdict.py
    out = tmp_path / "robust"
    assert main(["robust", str(path), "--schedule", str(design), "--out", str(out), "--no-plots", "--quiet"]) in (0, 3)
    assert "tightest verification points" in capsys.readouterr().out
    a = json.loads((design / "robustness.json").read_text())
    b = json.loads((out / "robustness.json").read_text())
    assert [c["name"] for c in a["conditions"]] == [c["name"] for c in b["conditions"]]
    assert [c["gain_s"] for c in a["conditions"]] == [c["gain_s"] for c in b["conditions"]]
    assert a["joint"] == b["joint"]


@functools.lru_cache(maxsize=None)
def _twinjet_table():
    """gain-schedule.json of the twinjet's schedule as text: designed once for every
    parametrisation below (each changes its own parsed copy). The schedule of the case with
    the study section UNCERTAIN (read by test_pass_fraction_plot_fits_long_condition_names too):
    the same variables, breakpoints and gains as without the section (only the recorded input
    hash differs, which no parametrisation changes or reads)."""
    from damper.output.documents.schedule import table_dict

    case, designed = _designed(UNCERTAIN)
    return json.dumps(table_dict(designed.schedule, case))


@pytest.mark.parametrize(
    "change, words",
    [
        (lambda d: d.update(gains_s=d["gains_s"][:2]), "gains_s: shape (2, 4)"),
        (lambda d: d["variables"][1].update(unit="kt"), "variables[1].unit: 'kt'"),
        (lambda d: d.update(form="spline"), "form: 'spline'"),
        (lambda d: d["variables"][0].update(breakpoints=[0, 8000, 4000, 12000]), "ascending"),
        (lambda d: d.update(gains_s=[[float("nan")] * 4] * 4), "gains_s: must be finite"),
    ],
)
def test_schedule_file_errors_name_the_field(tmp_path, change, words):
    from damper.errors import DamperError
    from damper.output.documents.schedule import schedule_from_table

    doc = json.loads(_twinjet_table())
    assert schedule_from_table(doc).gain_at([np.array([4000.0]), np.array([0.5])]).shape == (1,)
    change(doc)
    with pytest.raises(DamperError, match=None) as err:
        schedule_from_table(doc, "gs.json")
    assert words in str(err.value) and str(err.value).startswith("gs.json: ")


@pytest.mark.parametrize("name, form", [("regional_twinjet_envelope.yaml", "table"), ("survey_uav_altitude.yaml", "table"),
                                        ("survey_uav_altitude.yaml", "inverse_dynamic_pressure")])
def test_schedule_file_reads_back_the_written_schedule(name, form):
    # gain-schedule.json (repr precision) read back gives the same gains everywhere
    from damper.output.documents.schedule import schedule_from_table, table_dict

    with open(os.path.join(ROOT, "cases", name), encoding="utf-8") as f:
        text = f.read()
    case = load_case_text(text.replace("form: table", f"form: {form}"), name)
    s = design_schedule(case).schedule
    back = schedule_from_table(json.loads(json.dumps(table_dict(s, case))))
    assert back.variables == s.variables and back.form == s.form == form
    rng = np.random.default_rng(5)
    q = [rng.uniform(b[0], b[-1], 50) for b in s.breakpoints]
    np.testing.assert_array_equal(back.gain_at(q), s.gain_at(q))


def test_table_names_the_requirement_met_by_the_fewest_samples():
    # [derived] the column shows the criterion with the smallest pass count and its percentage
    from damper.output.documents.robustness import _most_missed

    c = {"samples": 10, "pass": {"criteria": [
        {"name": "stability", "passed": 10, "fraction": 1.0},
        {"name": "cap", "passed": 7, "fraction": 0.7},
        {"name": "gain_margin", "passed": 9, "fraction": 0.9},
    ]}}
    assert _most_missed(c) == "cap (70.0)"
    for k in c["pass"]["criteria"]:
        k["passed"], k["fraction"] = 10, 1.0
    assert _most_missed(c) == "-"


@pytest.mark.parametrize("extra", ["", " with a much longer name than any envelope label would have"])
def test_robustness_titles_fit_the_figure(extra):
    # a verification label as condition name makes long titles: they shrink or break, never clip
    from damper.output.style import DPI, new_figure
    from damper.output.figures.robustness import _title

    fig = new_figure(6.8, 5.0)
    fig.set_dpi(DPI)
    _title(fig, f"heavy-aft h=12000 m V=137.7 m/s{extra}: damping and gain margin under uncertainty (K = 1.009 s)")
    r = fig.canvas.get_renderer()
    box = fig.texts[0].get_window_extent(r)
    assert box.x1 <= fig.bbox.width and box.x0 >= 0


def test_pass_fraction_plot_fits_long_condition_names(tmp_path):
    # verification labels as condition names: every y tick label lies inside the figure
    from damper.output.style import DPI
    from damper.output.figures.robustness import _draw_pass

    case, designed = _designed(UNCERTAIN)
    study, gains, _ = schedule_study_case(case, designed, 4)
    r = robustness(study, gains, uncertainty_spec(study), refine=False)
    fig = _draw_pass(study, r)
    fig.set_dpi(DPI)
    renderer = fig.canvas.get_renderer()
    ax = fig.axes[0]
    assert min(t.get_window_extent(renderer).x0 for t in ax.get_yticklabels()) >= 0.0
