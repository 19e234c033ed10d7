"""Progress on standard error (issue 19, item 4): a stage log when stderr is not a terminal,
a bar on a terminal, nothing with --quiet; standard output stays clean (common practice)."""

import io
import json
import subprocess
import sys

from damper.output.progress import Reporter

from .conftest import ROOT
from .test_run_directory import ONE

TWIN = f"{ROOT}/cases/regional_twinjet_envelope.yaml"


def _run(*args):
    return subprocess.run([sys.executable, "-m", "damper", *args], cwd=ROOT, capture_output=True, text=True,
                          timeout=600)


def _stage_lines(err):
    return [ln for ln in err.splitlines() if ln.startswith("damper: ") and not ln.startswith(
        ("damper: warning:", "damper: error:", "damper: note:"))]


def test_design_logs_every_stage_on_a_pipe_and_nothing_with_quiet(tmp_path, shared_run):
    case = tmp_path / "one.yaml"
    case.write_text(ONE, encoding="utf-8")
    # `python -m damper design one.yaml --out run` in a subprocess, standard error a pipe: the run
    # that tests/test_run_directory.py reads too (tests/shared_runs.py, shared_process_design)
    proc = shared_run.text("one", ONE)
    assert proc.code == 0, proc.stderr
    lines = _stage_lines(proc.stderr)
    # a start and an end line per stage, in the order the stages run
    assert lines[:2] == ["damper: search 0/1 conditions", lines[1]] and lines[1].startswith("damper: search 1/1 conditions (")
    stages = [ln.split()[1] for ln in lines]
    for stage in ("search", "responses", "figures", "report"):
        assert stage in stages, (stage, lines)
    assert stages.index("search") < stages.index("responses") < stages.index("figures") < stages.index("report")
    assert all(ln.endswith(" s)") for ln in lines if ln.split()[1] == "report" and "done" in ln)
    assert len(lines) <= 12  # not chatty: start and end of each stage on a quick run
    assert "\r" not in proc.stderr  # no bar when standard error is not a terminal
    assert not any(ln.startswith("damper: search") for ln in proc.stdout.splitlines())  # stdout: the summary only

    quiet = _run("design", str(case), "--out", str(tmp_path / "quiet"), "--no-plots", "--quiet")
    assert quiet.returncode == 0, quiet.stderr
    assert _stage_lines(quiet.stderr) == [] and quiet.stderr == ""


def test_json_on_stdout_stays_clean_while_progress_goes_to_stderr(tmp_path):
    case = tmp_path / "one.yaml"
    case.write_text(ONE, encoding="utf-8")
    proc = _run("assess", str(case), "--gain", "0.2", "--json")
    assert proc.returncode in (0, 3), proc.stderr
    doc = json.loads(proc.stdout)  # the whole of standard output is one JSON document
    assert doc["conditions"][0]["name"] == "only-one"
    assert "damper: assess 0/1 conditions" in proc.stderr.splitlines()
    quiet = _run("assess", str(case), "--gain", "0.2", "--json", "--quiet")
    assert json.loads(quiet.stdout)["conditions"][0]["name"] == "only-one" and quiet.stderr == ""


def test_the_log_is_throttled_and_ends_each_stage_with_its_time():
    buf = io.StringIO()
    r = Reporter(stream=buf, terminal=False)
    with r.stage("search", 2000, "conditions") as st:
        for k in range(16, 2001, 16):  # 125 updates inside LOG_INTERVAL: none printed
            st.update(k)
    lines = buf.getvalue().splitlines()
    assert lines[0] == "damper: search 0/2000 conditions"
    assert lines[1].startswith("damper: search 2000/2000 conditions (") and lines[1].endswith(" s)")
    assert len(lines) == 2


def test_the_terminal_bar_redraws_in_place_and_ends_its_line():
    buf = io.StringIO()
    r = Reporter(stream=buf, terminal=True)
    with r.stage("responses", 4, "conditions") as st:
        st.update(2)
    r(0, 10, "samples")  # the robustness study's own parts, through the callback
    r(10, 10, "samples")
    text = buf.getvalue()
    assert text.count("\n") == 2 and text.endswith("\n")
    assert "\rresponses" in text and "4/4 conditions" in text and "\rrobustness" in text and "10/10 samples" in text


def test_quiet_writes_nothing():
    buf = io.StringIO()
    r = Reporter(stream=buf, enabled=False, terminal=True)
    with r.stage("search", 3, "conditions") as st:
        st.update(3)
    r(5, 5, "corners")
    assert buf.getvalue() == ""


def test_the_schedule_reports_its_rounds():
    from damper.analysis.schedule import design_schedule
    from damper.case import load_case

    calls = []
    result = design_schedule(load_case(TWIN), progress=lambda done, total, stage: calls.append((done, total, stage)))
    assert calls[0] == (0, None, "schedule") and calls[-1] == (result.rounds, result.rounds, "schedule")
    assert [c[0] for c in calls[1:-1]] == list(range(1, result.rounds + 1))


def test_an_error_or_interrupt_message_starts_its_own_line():
    buf = io.StringIO()
    r = Reporter(stream=buf, terminal=True)
    r.stage("search", 10, "conditions").update(3)
    assert not buf.getvalue().endswith("\n")
    r.end_line()  # what damper.cli does before printing "damper: interrupted" or an error
    assert buf.getvalue().endswith("\n") and buf.getvalue().count("\n") == 1
