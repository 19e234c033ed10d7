"""``damper design`` streams its conditions in batches (issue 17, item 5).

The outputs must not depend on the batch size [derived: every condition's search and
responses are computed from that condition alone], and a case with more conditions than
``--max-figures`` draws figures for the infeasible ones and those with the least slack only.
"""

import json
import os

import pytest

import damper.analysis.batches as batches
from damper.analysis.batches import condition_batches, sub_case
from damper.cli import main

from .conftest import ROOT

DEMO = os.path.join(ROOT, "cases", "utility_single_aft_cg.yaml")


def _outputs(out):
    """Every table and JSON document of a run, except the manifest and the recorded command line."""
    got = {}
    for name in sorted(os.listdir(out)):
        if name.endswith((".json", ".csv")) and name != "manifest.json":
            text = (out / name).read_text()
            got[name] = "\n".join(line for line in text.splitlines() if '"command":' not in line)
    return got


def test_batches_cover_every_condition_once():
    assert condition_batches(0) == []
    assert condition_batches(5, 2) == [(0, 2), (2, 4), (4, 5)]  # [derived]
    assert condition_batches(16, 16) == [(0, 16)]


def test_outputs_do_not_depend_on_the_batch_size(tmp_path, monkeypatch, capsys, shared_run):
    # One batch: the demo's shared run (tests/shared_runs.py, `design DEMO --no-plots`), built with
    # the default batch size, which holds the demo's 7 conditions in one batch [derived]; its
    # report is the only thing the --no-report run below leaves out (tests/test_run_hashes.py).
    whole_run = shared_run("utility_single_aft_cg")
    assert whole_run.code == 0, whole_run.stderr
    assert condition_batches(7) == [(0, 7)]
    seen = []
    real = batches.condition_batches

    def spy(n, size=None):  # the batches the run really used (the size is read at call time)
        out = real(n, size)
        seen.append(len(out))
        return out

    monkeypatch.setattr(batches, "condition_batches", spy)
    monkeypatch.setattr(batches, "BATCH_CONDITIONS", 3)  # 7 conditions: batches of 3, 3 and 1
    assert main(["design", DEMO, "--out", str(tmp_path / "small"), "--no-plots", "--no-report"]) == 0
    assert 3 in seen, seen
    small, whole = _outputs(tmp_path / "small"), _outputs(whole_run.path)
    assert len(small) == 9 and small.keys() == whole.keys()  # design.json, responses.json, 7 CSV files
    for name in small:
        assert small[name] == whole[name], name


def test_a_sub_case_keeps_everything_but_the_other_conditions():
    from damper.case import load_case

    case = load_case(DEMO)
    sub = sub_case(case, [4, 1])
    assert sub.names == (case.names[4], case.names[1])
    assert (sub.title, sub.sha256, sub.loop, sub.requirements) == (case.title, case.sha256, case.loop, case.requirements)


def test_more_conditions_than_max_figures_draws_the_tightest(tmp_path, capsys):
    from .test_run_directory import ONE

    three = ONE.replace("loop:", """  - name: second
    airspeed: "150 kt"
    altitude: "8000 ft"
    coefficients: {CL_alpha: 5.2, CD: 0.035, CL_delta: 0.40, Cm_alpha: -0.9, Cm_alpha_dot: -3.6, Cm_q: -8.5, Cm_delta: -1.25}
  - name: third
    airspeed: "90 kt"
    altitude: "2000 ft"
    coefficients: {CL_alpha: 5.0, CD: 0.05, CL_delta: 0.40, Cm_alpha: -0.25, Cm_alpha_dot: -3.2, Cm_q: -7.0, Cm_delta: -1.1}
loop:""")
    case = tmp_path / "three.yaml"
    case.write_text(three, encoding="utf-8")
    out = tmp_path / "run"
    assert main(["design", str(case), "--out", str(out), "--max-figures", "1"]) == 0
    assert "figures drawn for 1 of 3 conditions" in capsys.readouterr().out
    doc = json.loads((out / "design.json").read_text())
    drawn = doc["figures"]["drawn_for"]

    # the rule: infeasible first, then the least worst slack at the chosen gain [derived from the rule text]
    def worst(c):
        return min(k["slack"] if k["slack"] is not None else float("inf") for k in c["measures"]["criteria"])

    ranked = sorted(doc["conditions"], key=lambda c: (c["feasible"], worst(c)))
    assert drawn == [ranked[0]["name"]]
    plots = sorted(os.listdir(out / "plots"))
    assert len(plots) == 1 * 3  # one condition, three figures, SVG (the default)
    csvs = [n for n in os.listdir(out) if n.endswith(".csv")]
    svgs = [n for n in os.listdir(out) if n.startswith("response-") and n.endswith(".svg")]
    assert len(csvs) == 3 and len(svgs) == 1  # every condition's data, one condition's response plot
    html = (out / "report.html").read_text()
    assert html.count("no figure for this condition") == 2 * 3  # two conditions without their three figures


def test_robustness_figures_are_limited_to_the_lowest_pass_fractions():
    from types import SimpleNamespace

    from damper.analysis.robustness_figures import figure_conditions

    conds = tuple(SimpleNamespace(fraction_all=f) for f in (0.9, 0.5, 1.0, 0.5, 0.7))
    result = SimpleNamespace(conditions=conds)
    assert figure_conditions(result, 10) == (0, 1, 2, 3, 4)
    assert figure_conditions(result, 3) == (1, 3, 4)  # [derived: 0.5, 0.5, 0.7 lowest; ties by index]


@pytest.mark.parametrize("value", ["-1", "2001"])
def test_max_figures_is_checked(value, capsys):
    assert main(["design", DEMO, "--out", "unused", "--max-figures", value]) == 2
    assert "--max-figures" in capsys.readouterr().err
