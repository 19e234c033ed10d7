"""``damper compare RUN_A RUN_B --out DIR`` end to end through compare.json: a run against
itself, against the same case with one derivative changed, against a case with a renamed
condition and a stricter requirement, schedules on the union of both grids, and bad input."""

from __future__ import annotations

import io
import json
import os
import re
import shutil
from contextlib import redirect_stderr, redirect_stdout

import numpy as np
import pytest

from damper.cli import main

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
BASE = os.path.join(ROOT, "cases", "utility_single_aft_cg.yaml")
UAV = os.path.join(ROOT, "cases", "survey_uav_altitude.yaml")
CHANGED = "25kft-cruise-fwd"


def run(*argv):
    out, err = io.StringIO(), io.StringIO()
    with redirect_stdout(out), redirect_stderr(err):
        code = main([str(a) for a in argv])
    return code, out.getvalue(), err.getvalue()


def _design(case, out, *extra):
    code, _, err = run("design", case, "--out", out, "--no-plots", "--no-report", "--no-responses", *extra)
    assert code in (0, 3), err
    return out


@pytest.fixture(scope="module")
def runs(tmp_path_factory, shared_run):
    d = tmp_path_factory.mktemp("cmp")
    text = open(BASE, encoding="utf-8").read()
    # B: Cm_q of one condition from -8.5 to -5.5 (less natural pitch damping); nothing else changed
    old = "Cm_alpha: -1.10, Cm_alpha_dot: -3.6, Cm_q: -8.5"
    assert text.count(old) == 1
    (d / "b.yaml").write_text(text.replace(old, "Cm_alpha: -1.10, Cm_alpha_dot: -3.6, Cm_q: -5.5"), encoding="utf-8")
    # C: a condition renamed and a gain-margin requirement no gain meets at the forward-CG conditions
    c = text.replace("name: approach-aft", "name: approach-aft-flaps30").replace(
        "  other_mode_damping: {min: 0.30}", "  other_mode_damping: {min: 0.30}\n  gain_margin: {min: 45}")
    (d / "c.yaml").write_text(c, encoding="utf-8")
    # A: the demo's shared run (tests/shared_runs.py, `design BASE --no-plots`; read only: compare
    # writes into its own --out): its design.json is the one `_design` would write (the command
    # line aside; tests/test_run_hashes.py), beside responses and a report that compare does not read
    a = shared_run("utility_single_aft_cg")
    assert a.code in (0, 3), a.stderr
    return {"a": a.path, "b": _design(d / "b.yaml", d / "b"), "c": _design(d / "c.yaml", d / "c"), "dir": d}


def _compare(a, b, out, *extra):
    code, text, err = run("compare", a, b, "--out", out, *extra)
    assert "Traceback" not in err and "internal error" not in err, err
    doc = json.loads((out / "compare.json").read_text()) if code in (0, 3) else None
    return code, text, err, doc


def test_a_run_compared_with_itself_has_zero_deltas_and_nothing_worse(runs, tmp_path):
    code, text, err, doc = _compare(runs["a"], runs["a"], tmp_path / "self")
    assert code == 0, err
    assert doc["only_in_a"] == [] and doc["only_in_b"] == [] and len(doc["conditions"]) == 7
    for row in doc["conditions"]:
        assert row["worse"] == []
        # Source: b - a of equal numbers is 0 (or null where a value is undefined, e.g. no crossing)
        assert all(v in (0.0, None) for k, v in row["delta"].items() if k != "slack")
        assert all(v in (0.0, None) for v in row["delta"]["slack"].values())
    assert doc["verdict"]["met"] and doc["verdict"]["worsened"] == []
    assert "nothing is worse in B than in A" in text
    # the inputs' hashes are recorded as the runs' manifests list them
    manifest = json.loads((runs["a"] / "manifest.json").read_text())
    listed = {f["path"]: f["sha256"] for f in manifest["files"]}
    for r in doc["runs"]:
        assert r["input_sha256"] == manifest["input_sha256"]
        assert r["documents"]["design.json"] == listed["design.json"]
    # overlay plots in the default format only (SVG, as --figures), and a self-contained report
    assert len(doc["figures"]) == 7 and all((tmp_path / "self" / f["svg"]).exists() for f in doc["figures"])
    assert not any("png" in f for f in doc["figures"])
    assert {os.path.splitext(n)[1] for n in os.listdir(tmp_path / "self" / "plots")} == {".svg"}
    page = (tmp_path / "self" / "compare.html").read_text()
    assert page.count("data:image/svg+xml;base64,") == 7 and "data:image/png" not in page
    assert not re.search(r"""(src|href)=["']?(https?:|//)""", page) and "<script" not in page


def test_one_derivative_changed_lists_the_expected_changes(runs, tmp_path):
    code, text, err, doc = _compare(runs["a"], runs["b"], tmp_path / "ab", "--no-plots")
    assert code == 0, err
    design_a = {c["name"]: c for c in json.loads((runs["a"] / "design.json").read_text())["conditions"]}
    design_b = {c["name"]: c for c in json.loads((runs["b"] / "design.json").read_text())["conditions"]}
    rows = {r["name"]: r for r in doc["conditions"]}
    # what got worse comes first
    assert doc["conditions"][0]["name"] == CHANGED
    for name, row in rows.items():
        if name == CHANGED:
            continue
        # Source: the other conditions' data are byte for byte the same, so the design is too
        assert row["worse"] == [] and all(v in (0.0, None) for k, v in row["delta"].items() if k != "slack")
    row = rows[CHANGED]
    ka, kb = design_a[CHANGED]["chosen_gain_s"], design_b[CHANGED]["chosen_gain_s"]
    # Source: delta = b - a, recomputed here from the two design.json documents
    assert row["delta"]["chosen_gain_s"] == kb - ka
    # [derived] less natural damping (|Cm_q| smaller) needs more feedback: 2 zeta wn grows about K |M_delta|
    assert kb > ka
    slack = lambda entry: {c["name"]: c["slack"] for c in entry["measures"]["criteria"]}  # noqa: E731
    sa, sb = slack(design_a[CHANGED]), slack(design_b[CHANGED])
    expected = sorted(n for n in sa if sa[n] is not None and sb[n] is not None and sb[n] < sa[n])
    # Source: the slack of every requirement in both design.json documents
    assert sorted(w for w in row["worse"] if sa.get(w) is not None) == expected
    # [derived] a larger gain lowers the gain margin: 20 log10(K_crit / K) with K_crit nearly unchanged
    assert "gain_margin" in row["worse"] and row["delta"]["gain_margin_db"] < 0
    assert {w["condition"] for w in doc["verdict"]["worsened"]} == {CHANGED}
    assert "worse in B than in A" in text and CHANGED in text


def test_renamed_condition_and_unmet_requirement_are_listed_and_exit_3(runs, tmp_path):
    code, text, err, doc = _compare(runs["a"], runs["c"], tmp_path / "ac", "--no-plots")
    assert code == 3, err  # run C's own verdict: not met
    assert doc["only_in_a"] == ["approach-aft"] and doc["only_in_b"] == ["approach-aft-flaps30"]
    design_c = json.loads((runs["c"] / "design.json").read_text())
    infeasible = sorted(c["name"] for c in design_c["conditions"] if not c["feasible"])
    assert infeasible, "the 45 dB gain margin is out of reach somewhere"
    # Source: run C's design.json (its feasibility): the verdict is C's own
    assert not doc["verdict"]["met"]
    failed = sorted({i["condition"] for i in doc["verdict"]["items"] if not i["met"] and i["condition"]})
    assert failed == infeasible
    # points where C misses a requirement A met come first
    first = [r["name"] for r in doc["conditions"][: len(infeasible)]]
    assert sorted(first) == infeasible
    assert "NOT MET" in text and "only in A (1): approach-aft" in text


def test_schedules_compared_on_the_union_of_both_grids(tmp_path, shared_run):
    shared = shared_run("survey_uav_altitude")  # design UAV --no-plots (tests/shared_runs.py), read only
    assert shared.code in (0, 3), shared.stderr
    a = shared.path
    text = open(UAV, encoding="utf-8").read().replace("  breakpoints: 4\n", "  breakpoints: 3\n")
    (tmp_path / "b.yaml").write_text(text, encoding="utf-8")
    b = _design(tmp_path / "b.yaml", tmp_path / "b")
    code, _, err, doc = _compare(a, a, tmp_path / "self", "--no-plots")
    assert code == 0, err
    sched = json.loads((a / "schedule.json").read_text())
    rows = {r["label"]: r for r in sched["verification"]["rows"]}
    assert {r["name"] for r in doc["conditions"]} == set(rows)
    for r in doc["conditions"]:
        assert r["worse"] == [] and r["kind"] == "schedule point"
        # Source: the run's own schedule verification (schedule.json) at the same point
        assert r["a"]["chosen_gain_s"] == rows[r["name"]]["gain_s"]
    code, _, err, doc = _compare(a, b, tmp_path / "ab", "--figures", "png")
    assert code in (0, 3), err
    # --figures png: the one overlay (both schedules; schedule points get none) as PNG alone, embedded
    assert [set(f) for f in doc["figures"]] == [{"png", "caption"}]
    assert os.listdir(tmp_path / "ab" / "plots") == [os.path.basename(doc["figures"][0]["png"])]
    assert (tmp_path / "ab" / "compare.html").read_text().count("data:image/png;base64,") == 1
    rows_b = {r["label"]: r for r in json.loads((b / "schedule.json").read_text())["verification"]["rows"]}
    names = {r["name"] for r in doc["conditions"]}
    assert names == set(rows) | set(rows_b) and len(names) > len(rows)  # the union of both grids
    table_a = json.loads((a / "gain-schedule.json").read_text())
    table_b = json.loads((b / "gain-schedule.json").read_text())
    for r in doc["conditions"][:40]:
        if r["name"] in rows_b:
            # Source: linear interpolation of B's own gain table at the point's dynamic pressure
            q = next(x["variables"][0] for x in json.loads((b / "schedule.json").read_text())["verification"]["rows"]
                     if x["label"] == r["name"])
            expected = np.interp(q, table_b["variables"][0]["breakpoints"], table_b["gains_s"])
            assert r["b"]["chosen_gain_s"] == pytest.approx(expected, rel=1e-9)
    assert table_a != table_b


def test_verdict_read_from_run_bs_verdict_objects():
    from damper.output.documents.compare import verdict_of_run

    item = {"part": "robustness", "condition": "x", "requirement": "gain_margin", "met": False,
            "detail": {"value": 0.9, "lower": 0.95, "upper": None, "slack": -0.05, "unit": "1"}, "text": "90 %"}
    summary = {"part": "design", "condition": None, "requirement": "all", "met": True,
               "detail": {"value": None, "lower": None, "upper": None, "slack": None, "unit": ""}, "text": "7 of 7"}
    docs = {"design.json": {"conditions": [], "verdict": {"met": True, "items": [summary]}},
            "robustness.json": {"verdict": {"met": False, "items": [item, summary]}}}
    verdict, source = verdict_of_run(docs)
    assert not verdict.met and verdict.exit_status() == 3  # Source: damper/verdict.py, exit 3 when not met
    assert "design.json" in source and "robustness.json" in source
    assert [i.doc() for i in verdict.items] == [summary, item]  # design before robustness, each once


def test_bad_input_is_one_line_exit_2(runs, tmp_path):
    code, _, err, _ = _compare(runs["a"], tmp_path / "absent", tmp_path / "o1")
    assert code == 2 and "RUN_B" in err and "no such run directory" in err
    hand = tmp_path / "hand"
    hand.mkdir()
    shutil.copy(runs["a"] / "design.json", hand / "design.json")
    code, _, err, _ = _compare(runs["a"], hand, tmp_path / "o2")
    assert code == 2 and "no manifest.json" in err
    changed = tmp_path / "changed"
    shutil.copytree(runs["b"], changed)
    doc = json.loads((changed / "design.json").read_text())
    doc["conditions"][0]["chosen_gain_s"] = 1.0
    (changed / "design.json").write_text(json.dumps(doc))
    code, _, err, _ = _compare(runs["a"], changed, tmp_path / "o3")
    assert code == 2 and "changed since the run wrote it" in err
    code, _, err, _ = _compare(runs["a"], runs["b"], tmp_path / "o4", "--case-b", BASE)
    assert code == 2 and "is not the" in err and "RUN_B was made from" in err
    code, _, err, _ = _compare(runs["a"], runs["b"], runs["a"], "--force")
    assert code == 2 and "is one of the compared runs" in err
    assert (runs["a"] / "design.json").exists()
    assert not (tmp_path / "o1").exists() and not (tmp_path / "o3").exists()


def test_worse_counts_unbounded_slack_and_a_lower_pass_fraction():
    from damper.output.documents.compare import compare_point, point_record

    def entry(pm_slack, pm_met, gm_slack, k):
        crit = [{"name": "phase_margin", "slack": pm_slack, "met": pm_met},
                {"name": "gain_margin", "slack": gm_slack, "met": gm_slack >= 0}]
        return {"chosen_gain_s": k, "feasible": True, "feasible_gains_s": [[0.01, 0.5]],
                "measures": {"criteria": crit, "level": {"overall": "worse than 3"}}}

    a = point_record(entry(None, True, 2.0, 0.1), pass_fraction=0.99)   # no gain crossing: PM unbounded
    b = point_record(entry(1.5, True, 2.5, 0.2), pass_fraction=0.95)
    cmp = compare_point(a, b)
    # Source: the definitions in docs/compare.md: an unbounded met slack that becomes finite decreased;
    # a larger slack did not; a lower pass fraction is worse
    assert cmp["worse"] == ["phase_margin", "robustness_pass_fraction"]
    assert cmp["delta"]["slack"] == {"phase_margin": None, "gain_margin": 0.5}
    assert cmp["delta"]["chosen_gain_s"] == 0.2 - 0.1 and cmp["delta"]["robustness_pass_fraction"] == 0.95 - 0.99
    assert a["feasible_low_s"] == 0.01 and a["feasible_high_s"] == 0.5 and a["level"] == 4.0
    assert compare_point(a, a)["worse"] == [] and compare_point(b, a)["worse"] == ["gain_margin"]


def test_union_of_grids_keeps_each_point_once_and_names_label_clashes_apart():
    from types import SimpleNamespace

    from damper.analysis.compare_points import _union

    a = SimpleNamespace(labels=("p", "q", "q"), altitude=np.array([0.0, 1.0, 1.0]),
                        airspeed=np.array([10.0, 20.0, 20.01]))
    b = SimpleNamespace(labels=("q", "r"), altitude=np.array([1.0, 2.0]), airspeed=np.array([20.0, 30.0]))
    idx, names = _union([a, b])
    # Source: the rule in the function's docstring, applied by hand: b's "q" is a's first "q"
    assert idx.tolist() == [0, 1, 2, 4] and names == ["p", "q", "q (2)", "r"]
