"""``--figures``: the chosen formats are written, no other; the report embeds them; a bad value is
a one-line error (exit 2). Common practice: one rendering per format, so one format is cheaper."""

from __future__ import annotations

import io
import os
from contextlib import redirect_stderr, redirect_stdout

import pytest

from damper.cli import main

from .conftest import ROOT
from .shared_runs import REPORT_OPTIONS
from .test_run_directory import ONE

DEMO = os.path.join(ROOT, "cases", "utility_single_aft_cg.yaml")


def run(*argv):
    out, err = io.StringIO(), io.StringIO()
    with redirect_stdout(out), redirect_stderr(err):
        code = main([str(a) for a in argv])
    return code, out.getvalue(), err.getvalue()


@pytest.mark.parametrize("options,expected", [
    (("--no-robustness", "--figures", "svg"), {".svg"}),
    (("--no-robustness", "--figures", "png"), {".png"}),
    (REPORT_OPTIONS, {".svg", ".png"}),  # test_report's run of the demo, with --figures svg,png
], ids=["svg", "png", "svg,png"])
def test_only_the_chosen_formats_are_written(shared_run, tmp_path, options, expected):
    if options == REPORT_OPTIONS:
        shared = shared_run("utility_single_aft_cg", options)  # design DEMO <options> (tests/shared_runs.py)
        code, err, out, n = shared.code, shared.stderr, shared.path, 7
    else:
        # The one-condition case of test_run_directory: which formats are written does not depend
        # on how many conditions are drawn (each figure goes through the same save_figure), and
        # the seven conditions of the demo are checked in the svg,png case above.
        case = tmp_path / "one.yaml"
        case.write_text(ONE, encoding="utf-8")
        out = tmp_path / "run"
        code, _, err = run("design", case, "--out", out, "--quiet", *options)
        n = 1
    assert code == 0, err
    written = {os.path.splitext(n)[1] for n in os.listdir(out / "plots")}
    assert written == expected
    html = (out / "report.html").read_text(encoding="utf-8")
    kind = "svg+xml" if ".svg" in expected else "png"
    assert html.count(f"data:image/{kind};base64") >= 3 * n  # three design figures per condition
    images = {os.path.splitext(n)[1] for _, _, names in os.walk(out) for n in names
              if n.endswith((".png", ".svg", ".jpg", ".pdf"))}
    assert images == expected  # the response figures too


def test_a_bad_format_is_one_line(tmp_path):
    code, _, err = run("design", DEMO, "--out", tmp_path / "r", "--figures", "jpg")
    assert code == 2 and err.count("\n") == 1 and "--figures 'jpg'" in err
    assert not (tmp_path / "r").exists()
