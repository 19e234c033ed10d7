"""Every sub-command on every demo case ends as a user expects: exit 0 (met), 3 (some
requirement not met) or 2 (bad input), never 1 (a bug in damper), with terminal output and
with ``--json`` where the command has it. Cases with an envelope and no conditions are
evaluated at their design points (docs/case-file.md, "Cases without conditions")."""

from __future__ import annotations

import glob
import io
import json
import os
from contextlib import redirect_stderr, redirect_stdout

import pytest

from damper.cli import main

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
DEMOS = sorted(glob.glob(os.path.join(ROOT, "cases", "*.yaml")))
OK = (0, 2, 3)


def run(*argv):
    out, err = io.StringIO(), io.StringIO()
    with redirect_stdout(out), redirect_stderr(err):
        code = main(list(argv))
    return code, out.getvalue(), err.getvalue()


@pytest.mark.parametrize("case", DEMOS, ids=[os.path.basename(c) for c in DEMOS])
def test_every_command_on_every_demo_case(case, tmp_path, shared_run):
    code, out, err = run("assess", case, "--gain", "0.1")
    assert code in OK and "internal error" not in err, err
    assert "Preliminary engineering analysis" in out
    code, out, err = run("assess", case, "--gain", "0.1", "--json")
    assert code in OK, err
    doc = json.loads(out)
    names = [c["name"] for c in doc["conditions"]]
    assert names, "every demo case is evaluated somewhere"
    code, out, err = run("sweep", case, "--condition", names[0], "--points", "9")
    assert code in OK and "internal error" not in err, err
    code, out, err = run("respond", case, "--gain", "0.1", "--no-plots", "--out", str(tmp_path / "respond"))
    assert code in OK and "internal error" not in err, err
    code, out, err = run("robust", case, "--gain", "0.1", "--samples", "16", "--no-plots", "--quiet",
                         "--out", str(tmp_path / "robust"))
    assert code in OK and "internal error" not in err, err
    shared = shared_run(os.path.basename(case))  # design --no-plots (tests/shared_runs.py)
    code, out, err = shared.code, shared.stdout, shared.stderr
    assert code in OK and "internal error" not in err, err
    run_dir = shared.copy_to(tmp_path / "design")  # `report` rewrites report.html: a copy
    code, out, err = run("report", str(run_dir))
    assert code in OK and "internal error" not in err, err
