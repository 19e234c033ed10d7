"""A run directory is one run: lock, journal, manifest, --force rules, report (docs/run-directory.md).

Behaviour goes through the command line (``damper.cli.main`` or a subprocess). The check
values are the contract of issue 17 ("What to build", item 1) and docs/run-directory.md.
"""

import hashlib
import json
import os
import subprocess
import sys

import pytest

from damper.cli import main
from damper.output.journal import JOURNAL_NAME, LOCK_NAME, MANIFEST_NAME

from .conftest import ROOT

DEMO = os.path.join(ROOT, "cases", "utility_single_aft_cg.yaml")

# Invented one-condition case (fewer outputs than the demo's seven conditions).
ONE = """
title: "one condition (invented)"
aircraft: {name: "Invented", mass: "3900 kg", pitch_inertia: "9800 kg*m**2", wing_area: "25.0 m**2", mean_chord: "1.65 m"}
conditions:
  - name: only-one
    airspeed: "120 kt"
    altitude: 0
    coefficients: {CL_alpha: 5.1, CD: 0.045, CL_delta: 0.40, Cm_alpha: -0.5, Cm_alpha_dot: -3.6, Cm_q: -8.5, Cm_delta: -1.25}
loop:
  actuator: {bandwidth: "20 rad/s"}
requirements:
  damping_ratio: {min: 0.5, max: 1.3}
"""


def _files(root):
    """Every file under `root`, relative with '/' separators."""
    out = set()
    for base, _, names in os.walk(root):
        for name in names:
            out.add(os.path.relpath(os.path.join(base, name), root).replace(os.sep, "/"))
    return out


def _sha(path):
    with open(path, "rb") as fh:
        return hashlib.sha256(fh.read()).hexdigest()


def assert_one_complete_run(root):
    """The directory holds exactly the files its manifest lists, with their SHA-256 [issue 17, item 1]."""
    manifest = json.loads((root / MANIFEST_NAME).read_text())
    assert manifest["complete"] is True
    listed = {f["path"]: f["sha256"] for f in manifest["files"]}
    assert _files(root) == set(listed) | {MANIFEST_NAME}  # no journal, no lock, nothing else
    for rel, sha in listed.items():
        assert _sha(root / rel) == sha, rel
    return manifest


@pytest.fixture(scope="module")
def one_case(tmp_path_factory):
    path = tmp_path_factory.mktemp("case") / "one.yaml"
    path.write_text(ONE, encoding="utf-8")
    return str(path)


@pytest.fixture(scope="module")
def one_run(shared_run):
    """A full design run (plots, responses, report) of the one-condition case; copy it to change it.

    The shared run of ``python -m damper design one.yaml --out run`` (tests/shared_runs.py, the
    same text as ``one_case``), whose standard error tests/test_progress.py reads: the same
    command was run here in this process and there in a subprocess. Read only."""
    run = shared_run.text("one", ONE)
    assert run.code == 0, run.stderr
    return run.path


def _copy(run, tmp_path):
    import shutil

    return shutil.copytree(run, tmp_path / "run")


def test_design_writes_a_manifest_that_matches_its_files(one_run, one_case):
    out = one_run
    manifest = assert_one_complete_run(out)
    with open(one_case, "rb") as fh:
        assert manifest["input_sha256"] == hashlib.sha256(fh.read()).hexdigest()
    parts = {f["path"]: f["part"] for f in manifest["files"]}
    assert parts["design.json"] == "design" and parts["report.html"] == "report"
    assert parts["responses.json"] == "responses"
    assert any(p.startswith("plots/") and parts[p] == "design" for p in parts)  # drawn by the worker process


def test_force_after_a_case_with_more_outputs_leaves_none_of_them(tmp_path, one_run, capsys):
    # issue 17, problem 1a: plots and responses of the earlier run stayed and were embedded
    other = tmp_path / "other.yaml"
    other.write_text(ONE.replace("only-one", "another-one"), encoding="utf-8")
    out = _copy(one_run, tmp_path)
    assert any(f.startswith("plots/only-one-") for f in _files(out)) and (out / "responses.json").exists()
    assert main(["design", str(other), "--out", str(out), "--force", "--no-plots", "--no-responses"]) == 0
    assert_one_complete_run(out)
    assert _files(out) == {"design.json", "report.html", MANIFEST_NAME}
    html = (out / "report.html").read_text()
    assert "data:image" not in html and "only-one" not in html and "another-one" in html


def test_a_second_run_into_a_locked_directory_is_refused_naming_the_holder(tmp_path, one_case, capsys):
    from damper.output.rundir import RunDirectory

    out = tmp_path / "run"
    with RunDirectory(out, "damper design held-by-this-test", mode="new") as held:
        rc = subprocess.run([sys.executable, "-m", "damper", "design", one_case, "--out", str(out)],
                            capture_output=True, text=True, cwd=ROOT, timeout=60)
        assert rc.returncode == 2
        err = rc.stderr.strip()
        assert err.count("\n") == 0 and err.startswith("damper: error: ")
        assert f"pid {os.getpid()}" in err and "held-by-this-test" in err and "in use by another damper run" in err
        assert _files(out) == {LOCK_NAME, JOURNAL_NAME}
        held.finish()


def test_two_runs_into_one_directory_at_once_exactly_one_succeeds(tmp_path, one_case):
    # issue 17, problem 1b: both exited 0 and mixed their files
    out = tmp_path / "run"
    cmds = [[sys.executable, "-m", "damper", "design", case, "--out", str(out), "--no-plots"] for case in (DEMO, one_case)]
    procs = [subprocess.Popen(c, cwd=ROOT, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True) for c in cmds]
    results = [(p.wait(timeout=120), p.stderr.read()) for p in procs]
    codes = sorted(r for r, _ in results)
    assert codes == [0, 2], results
    loser = [e for r, e in results if r == 2][0]
    assert "in use by another damper run" in loser or "holds an earlier run" in loser
    manifest = assert_one_complete_run(out)
    winner = DEMO if results[0][0] == 0 else one_case
    assert manifest["input_sha256"] == _sha(winner)
    doc = json.loads((out / "design.json").read_text())
    assert doc["provenance"]["input_sha256"] == _sha(winner)


def test_an_interrupted_run_is_incomplete_and_can_be_replaced_with_force(tmp_path, one_case, capsys):
    from damper.output.files import write_atomic
    from damper.output.rundir import RunDirectory

    out = tmp_path / "run"
    with pytest.raises(KeyboardInterrupt):
        with RunDirectory(out, "damper design interrupted-by-this-test", mode="new"):
            write_atomic(out / "design.json", "{}")
            raise KeyboardInterrupt
    assert _files(out) == {"design.json", JOURNAL_NAME}  # the lock is gone, the journal stays
    assert main(["design", one_case, "--out", str(out), "--no-plots"]) == 2
    assert "incomplete" in capsys.readouterr().err
    assert main(["design", one_case, "--out", str(out), "--no-plots", "--force"]) == 0
    assert_one_complete_run(out)


def test_nothing_written_leaves_nothing_behind(tmp_path, capsys):
    # a run that fails before its first file leaves no run: no journal, no lock, no directory
    out = tmp_path / "new"
    assert main(["robust", DEMO, "--design", str(tmp_path / "no-such-run"), "--out", str(out)]) == 2
    assert not out.exists()


def test_a_directory_with_a_users_file_is_refused_even_with_force(tmp_path, one_case, capsys):
    mine = tmp_path / "mine"
    mine.mkdir()
    (mine / "report.html").write_text("my own report", encoding="utf-8")
    (mine / "design.json").write_text("{}", encoding="utf-8")
    for extra in ([], ["--force"]):
        assert main(["design", one_case, "--out", str(mine), "--no-plots", *extra]) == 2
        err = capsys.readouterr().err
        assert err.count("damper: error:") == 1 and "holds files no damper run wrote" in err and "--force" not in err
    assert (mine / "report.html").read_text() == "my own report"
    assert sorted(os.listdir(mine)) == ["design.json", "report.html"]  # not even a lock file was left
    # a user's file added to a finished run: that run can no longer be replaced either
    run = tmp_path / "run"
    assert main(["design", one_case, "--out", str(run), "--no-plots"]) == 0
    (run / "notes.txt").write_text("mine", encoding="utf-8")
    assert main(["design", one_case, "--out", str(run), "--no-plots", "--force"]) == 2
    assert "'notes.txt'" in capsys.readouterr().err
    assert (run / "notes.txt").read_text() == "mine"


def test_the_root_directory_is_refused_without_advice_to_force(one_case, capsys):
    assert main(["design", one_case, "--out", "/", "--no-plots"]) == 2
    err = capsys.readouterr().err
    assert "holds files no damper run wrote" in err and "add --force" not in err
    assert not os.path.exists(os.path.join("/", LOCK_NAME)) and not os.path.exists(os.path.join("/", JOURNAL_NAME))


def test_respond_with_force_into_a_design_run_keeps_the_design_files(tmp_path, one_run, one_case, capsys):
    out = _copy(one_run, tmp_path)
    before = {f["path"]: f for f in assert_one_complete_run(out)["files"]}
    assert main(["respond", one_case, "--gain", "0.123", "--out", str(out)]) == 2  # without --force: refused
    assert "add --force to replace its responses (its other files are kept)" in capsys.readouterr().err
    assert main(["respond", one_case, "--gain", "0.123", "--out", str(out), "--force", "--no-plots"]) == 0
    after = {f["path"]: f for f in assert_one_complete_run(out)["files"]}
    for path, entry in before.items():
        if entry["part"] in ("design", "schedule", "robustness"):
            assert after[path]["sha256"] == entry["sha256"], path  # the design's own files are untouched
        if entry["part"] == "responses" and path.endswith((".png", ".svg")):
            assert path not in after  # the old response plots are gone (this respond drew none)
    doc = json.loads((out / "responses.json").read_text())
    assert doc["conditions"][0]["gain_s"] == 0.123
    assert "--gain 0.123" in (out / "report.html").read_text()
    commands = [c["command"] for c in json.loads((out / MANIFEST_NAME).read_text())["commands"]]
    assert commands[0].startswith("damper design") and commands[1].startswith("damper respond")


def test_report_embeds_only_listed_files_with_matching_hashes(tmp_path, one_run, capsys):
    out = _copy(one_run, tmp_path)
    html = (out / "report.html").read_text()
    n_images = html.count("data:image")
    assert n_images == 4  # root locus, loop response, gain sweep and the doublet response of the one condition
    # change one plot (every rendering the run wrote) after the run: it is left out and named
    renderings = [out / "plots" / f"only-one-root-locus.{ext}" for ext in ("svg", "png")]
    assert any(p.exists() for p in renderings)
    for path in (p for p in renderings if p.exists()):
        path.write_bytes(path.read_bytes() + b" ")
    # a plot the run did not write (here: taken off the manifest), where the report looks for one: not shown
    manifest = json.loads((out / MANIFEST_NAME).read_text())
    manifest["files"] = [f for f in manifest["files"] if "only-one-gain-sweep" not in f["path"]]
    (out / MANIFEST_NAME).write_text(json.dumps(manifest), encoding="utf-8")
    assert main(["report", str(out)]) == 0
    err = capsys.readouterr().err
    assert "left out of the report" in err and "only-one-root-locus" in err
    html = (out / "report.html").read_text()
    assert html.count("data:image") == n_images - 2 and "changed since it was written" in html.replace("\n", " ")
    assert "INCOMPLETE RUN" not in html
    # a report.html of someone else's is never replaced
    (out / "report.html").unlink()
    (out / "report.html").write_text("mine", encoding="utf-8")
    manifest = json.loads((out / MANIFEST_NAME).read_text())
    manifest["files"] = [f for f in manifest["files"] if f["path"] != "report.html"]
    (out / MANIFEST_NAME).write_text(json.dumps(manifest), encoding="utf-8")
    assert main(["report", str(out)]) == 2
    assert "report.html was not written by a damper run" in capsys.readouterr().err
    assert (out / "report.html").read_text() == "mine"


def test_report_marks_an_incomplete_run(tmp_path, one_run, capsys):
    out = _copy(one_run, tmp_path)
    # make it look interrupted: a journal beside the design's files, no manifest
    manifest = json.loads((out / MANIFEST_NAME).read_text())
    lines = [json.dumps({"start": "damper design (test)"})]
    lines += [json.dumps({"done": f["path"], "sha256": f["sha256"], "part": f["part"]}) for f in manifest["files"]]
    (out / JOURNAL_NAME).write_text("\n".join(lines) + "\n", encoding="utf-8")
    (out / MANIFEST_NAME).unlink()
    assert main(["report", str(out)]) == 0
    assert "the run is incomplete" in capsys.readouterr().out
    assert "INCOMPLETE RUN" in (out / "report.html").read_text()
    assert not (out / MANIFEST_NAME).exists()  # the report does not complete a run


def test_report_refuses_a_directory_no_run_wrote(tmp_path, capsys):
    d = tmp_path / "copied"
    d.mkdir()
    (d / "design.json").write_text(json.dumps({"conditions": []}), encoding="utf-8")
    assert main(["report", str(d)]) == 2
    assert "no manifest or journal" in capsys.readouterr().err
    assert sorted(os.listdir(d)) == ["design.json"]
