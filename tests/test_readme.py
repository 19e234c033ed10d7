"""The README's two set-up commands stay true (common practice: docs that run)."""

import os
import re

from .conftest import ROOT


def _commands():
    text = open(os.path.join(ROOT, "README.md"), encoding="utf-8").read()
    return re.findall(r"```\n(.+?)\n```", text)


def test_readme_has_exactly_two_setup_commands_and_ci_runs_the_test_one():
    cmds = _commands()
    assert len(cmds) >= 2
    main, tests = cmds[0], cmds[1]
    assert "pip install -e ." in main and "damper " in main and "cases/" in main
    assert "pytest" in tests
    ci = open(os.path.join(ROOT, ".ci", "run"), encoding="utf-8").read()
    # CI runs the same install + test command after creating its own virtual environment
    tail = tests.split("&& ", 2)[-1]
    assert tail in ci, tail


def test_readme_demo_case_exists():
    main = _commands()[0]
    case = re.search(r"(cases/\S+\.yaml)", main).group(1)
    assert os.path.exists(os.path.join(ROOT, case))
