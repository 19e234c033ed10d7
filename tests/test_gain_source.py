"""Designed and scheduled gains in ``damper assess``, ``respond``, ``sweep`` and ``robust``
(``--design RUN_DIR`` / ``--schedule FILE``, damper/commands/gain_source.py), end to end
through the commands' JSON, and their errors on bad input."""

from __future__ import annotations

import io
import json
import os
import shutil
from contextlib import redirect_stderr, redirect_stdout

import numpy as np
import pytest

from damper.cli import main

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
PER_CONDITION = os.path.join(ROOT, "cases", "utility_single_aft_cg.yaml")
SCHEDULED = os.path.join(ROOT, "cases", "survey_uav_altitude.yaml")


def run(*argv):
    out, err = io.StringIO(), io.StringIO()
    with redirect_stdout(out), redirect_stderr(err):
        code = main([str(a) for a in argv])
    return code, out.getvalue(), err.getvalue()


@pytest.fixture(scope="module")
def design_run(shared_run):
    """The per-condition demo's shared run (tests/shared_runs.py, `design --no-plots`): the
    design.json and responses these tests read are those of `design --no-plots --no-report
    --no-robustness` (tests/test_run_hashes.py); read only (a test that changes it copies it)."""
    run = shared_run("utility_single_aft_cg")
    assert run.code in (0, 3), run.stderr
    return run.path


@pytest.fixture(scope="module")
def schedule_run(shared_run):
    """The scheduled demo's shared run (`design --no-plots`): its schedule and gain table are
    those of `design --no-plots --no-report --no-robustness --no-responses`; read only."""
    run = shared_run("survey_uav_altitude")
    assert run.code in (0, 3), run.stderr
    return run.path


def _subset(small, big, path="") -> list:
    """Keys of `small` whose values differ in `big` (recursively); [] when `small` is contained in `big`."""
    if isinstance(small, dict):
        if not isinstance(big, dict):
            return [path]
        return [p for k in small for p in _subset(small[k], big.get(k, object()), f"{path}.{k}")]
    return [] if small == big else [path]


def test_assess_design_reproduces_the_designs_results(design_run):
    code, out, err = run("assess", PER_CONDITION, "--design", design_run, "--json")
    assert code in (0, 3), err
    doc = json.loads(out)
    design = json.loads((design_run / "design.json").read_text())
    assert doc["gain_source"]["kind"] == "design"
    by_name = {c["name"]: c for c in doc["conditions"]}
    assert set(by_name) == {c["name"] for c in design["conditions"]}
    for entry in design["conditions"]:
        # Source: the design run itself (design.json's measures at the chosen gain): assess at the
        # same gain must give the same numbers, bit for bit; assess adds the bandwidth measures.
        assert by_name[entry["name"]]["gain_s"] == entry["chosen_gain_s"]
        assert _subset(entry["measures"], by_name[entry["name"]]) == [], entry["name"]


def test_respond_design_reproduces_the_designs_responses(design_run, tmp_path):
    out = tmp_path / "resp"
    code, text, err = run("respond", PER_CONDITION, "--design", design_run, "--out", out, "--no-plots")
    assert code in (0, 3), err
    assert f"the chosen gains of {design_run}" in text
    mine = json.loads((out / "responses.json").read_text())
    theirs = json.loads((design_run / "responses.json").read_text())
    # Source: the design run's own responses.json at its chosen gains.
    assert mine["conditions"] == theirs["conditions"]


def _isa_density(h):
    """U.S. Standard Atmosphere 1976, troposphere (h < 11 km geopotential), kg/m^3.
    Source: U.S. Standard Atmosphere 1976, T = 288.15 - 0.0065 h K, p = 101325 (T/288.15)^5.25588 Pa,
    rho = p / (287.05287 T)."""
    t = 288.15 - 0.0065 * np.asarray(h, float)
    return 101325.0 * (t / 288.15) ** 5.25588 / (287.05287 * t)


def test_assess_schedule_interpolates_the_table_at_each_conditions_dynamic_pressure(schedule_run):
    code, out, err = run("assess", SCHEDULED, "--schedule", schedule_run / "gain-schedule.json", "--json")
    assert code in (0, 3), err
    doc = json.loads(out)
    table = json.loads((schedule_run / "gain-schedule.json").read_text())
    assert table["form"] == "table" and [v["name"] for v in table["variables"]] == ["dynamic_pressure"]
    bps = np.array(table["variables"][0]["breakpoints"])
    gains = np.array(table["gains_s"])
    h = np.array([c["flight"]["altitude_m"] for c in doc["conditions"]])
    v = np.array([c["flight"]["airspeed_m_s"] for c in doc["conditions"]])
    q = 0.5 * _isa_density(h) * v**2  # Source: q = rho V^2 / 2 (definition)
    # Source: linear interpolation clamped at the ends (gain-schedule.json's "interpolation"), written here.
    expected = np.interp(q, bps, gains)
    got = np.array([c["gain_s"] for c in doc["conditions"]])
    np.testing.assert_allclose(got, expected, rtol=1e-6)
    assert len(set(np.round(got, 9))) > 1, "the conditions span several breakpoints"
    # the same with the run directory instead of the file
    code, out2, _ = run("assess", SCHEDULED, "--schedule", schedule_run, "--json")
    assert [c["gain_s"] for c in json.loads(out2)["conditions"]] == list(got)


def test_sweep_marks_the_designed_gain(design_run, tmp_path):
    design = json.loads((design_run / "design.json").read_text())
    entry = next(c for c in design["conditions"] if c["chosen_gain_s"] > 0)
    csv = tmp_path / "sweep.csv"
    code, text, err = run("sweep", PER_CONDITION, "--condition", entry["name"], "--points", "7", "--design",
                          design_run, "--csv", csv)
    assert code in (0, 3), err
    lines = csv.read_text().splitlines()
    cols = lines[0].split(",")
    rows = [dict(zip(cols, line.split(","))) for line in lines[1:]]
    marked = [r for r in rows if r["marked"]]
    assert len(rows) == 8 and len(marked) == 1 and marked[0]["marked"] == "designed"
    # Source: design.json's chosen gain and its equivalent damping there (the design run).
    assert float(marked[0]["gain_s"]) == entry["chosen_gain_s"]
    assert float(marked[0]["damping_equivalent"]) == entry["measures"]["closed_loop"]["equivalent"]["damping_ratio"]
    assert "designed" in text
    gains = [float(r["gain_s"]) for r in rows]
    assert gains == sorted(gains)
    code, out, err = run("sweep", PER_CONDITION, "--condition", entry["name"], "--points", "7", "--design",
                         design_run, "--json")
    doc = json.loads(out)
    assert doc["marked"]["gain_s"] == entry["chosen_gain_s"] and doc["marked"]["label"] == "designed"
    assert [r["marked"] for r in doc["rows"]].count("designed") == 1
    # without --design/--schedule the CSV has no 'marked' column (unchanged output)
    code, _, _ = run("sweep", PER_CONDITION, "--condition", entry["name"], "--points", "7", "--csv", csv, "--force")
    assert "marked" not in csv.read_text().splitlines()[0]


def test_bad_gain_sources_are_one_line_errors(design_run, schedule_run, tmp_path):
    code, _, err = run("assess", PER_CONDITION, "--design", tmp_path / "no-such-run")
    assert code == 2 and "no such run directory" in err and "Traceback" not in err
    # a run of another case is refused
    code, _, err = run("assess", SCHEDULED, "--design", design_run)
    assert code == 2 and "that run was made from" in err and "utility_single_aft_cg.yaml" in err
    code, _, err = run("respond", SCHEDULED, "--design", design_run)
    assert code == 2 and "that run was made from" in err
    # a schedule run has no per-condition gains
    code, _, err = run("assess", SCHEDULED, "--schedule", schedule_run / "design.json")
    assert code == 2 and "gain-schedule.json" in err
    code, _, err = run("assess", PER_CONDITION, "--design", tmp_path / "empty")
    assert code == 2
    # exactly one source (argparse exits 2)
    with pytest.raises(SystemExit) as exc:
        run("assess", PER_CONDITION, "--gain", "0.1", "--design", design_run)
    assert exc.value.code == 2
    with pytest.raises(SystemExit) as exc:
        run("assess", PER_CONDITION)
    assert exc.value.code == 2
    # a changed design.json (its SHA-256 no longer the manifest's) is refused
    copy = tmp_path / "copy"
    shutil.copytree(design_run, copy)
    doc = json.loads((copy / "design.json").read_text())
    doc["conditions"][0]["chosen_gain_s"] = 0.5
    (copy / "design.json").write_text(json.dumps(doc))
    code, _, err = run("assess", PER_CONDITION, "--design", copy)
    assert code == 2 and "changed since the run wrote it" in err
    # a schedule of another case is used, with a note
    code, out, err = run("assess", PER_CONDITION, "--schedule", schedule_run, "--json")
    assert code in (0, 3) and "made from another case file" in err
    assert json.loads(out)["gain_source"]["kind"] == "schedule"


def test_robust_design_refuses_a_run_of_another_case(design_run, tmp_path):
    case = os.path.join(ROOT, "cases", "utility_single_uncertain.yaml")
    code, _, err = run("robust", case, "--design", design_run, "--samples", "4", "--out", tmp_path / "r", "--quiet")
    assert code == 2 and "that run was made from" in err
