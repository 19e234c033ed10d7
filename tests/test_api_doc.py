"""docs/api.md runs: every ```python block, in order, in one namespace, from the repository root
(common practice: documentation examples executed as tests so they cannot rot). The blocks
check themselves against independent references (python-control's poles of the exported
loop; the search's own measures at its chosen gains)."""

from __future__ import annotations

import io
import os
import re
from contextlib import redirect_stdout

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
DOC = os.path.join(ROOT, "docs", "api.md")


def code_blocks(text):
    """The bodies of the ```python fenced blocks of a Markdown text, in order."""
    return re.findall(r"^```python\n(.*?)^```", text, flags=re.S | re.M)


def test_code_blocks_are_found():
    blocks = code_blocks("x\n```python\na = 1\n```\n```text\nno\n```\n```python\nb = 2\n```\n")
    assert blocks == ["a = 1\n", "b = 2\n"]


def test_api_doc_examples_run(monkeypatch):
    text = open(DOC, encoding="utf-8").read()
    blocks = code_blocks(text)
    assert len(blocks) >= 5, "load, design, assess, python-control, responses"
    monkeypatch.chdir(ROOT)
    namespace = {"__name__": "api_doc"}
    out = io.StringIO()
    with redirect_stdout(out):
        for k, block in enumerate(blocks):
            exec(compile(block, f"docs/api.md block {k + 1}", "exec"), namespace)  # noqa: S102 - our own docs
    printed = out.getvalue()
    case = namespace["case"]
    assert case.title in printed
    # Source: every name the example reads exists with the documented meaning and shape
    n = len(case.conditions)
    assert namespace["zeta"].shape == (n,) and namespace["chosen"].shape == (n,)
    assert namespace["slack"].shape == (len(case.requirements.criteria), n)
    # Source: python-control's ss() of a loop with the case's states (order 2 airframe + hardware + Pade)
    assert namespace["closed"].nstates == len(namespace["mine"])


def test_entry_points_are_importable_from_damper_lazily():
    import subprocess
    import sys

    code = ("import sys, damper; assert 'numpy' not in sys.modules, 'import damper loaded numpy'; "
            "f = damper.assess; assert 'numpy' in sys.modules; "
            "from damper.analysis.assess import assess; assert f is assess; "
            "assert set(damper.API) <= set(dir(damper)); "
            "[getattr(damper, n) for n in damper.API]; "
            "\n"
            "try:\n    damper.no_such_thing\nexcept AttributeError as e:\n    assert 'no_such_thing' in str(e)\n"
            "else:\n    raise SystemExit('no AttributeError')")
    env = dict(os.environ, PYTHONPATH=ROOT)
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=env, cwd=ROOT, timeout=120)
    assert proc.returncode == 0, proc.stderr


def test_package_docstring_examples_run_as_doctests(monkeypatch):
    import doctest

    import damper

    monkeypatch.chdir(ROOT)
    failed, attempted = doctest.testmod(damper, verbose=False, report=True)
    assert attempted >= 6 and failed == 0
