"""End-to-end design runs shared by the tests of one test run (built once, then only read).

Several test files used to design the same demo case end to end with the same command line,
each into its own directory. A shared run is built the first time a test asks for it and read
by every later test, in this process and in the other pytest-xdist workers: the runs live under
the test run's common temporary directory and a lock file per run (``fcntl.flock``) makes a
second worker wait for the first one's run instead of designing the case again.

A shared run is read-only by contract: a test that must change a run (rebuild its report, run
``--force`` into it) copies it first (:meth:`SharedRun.copy_to`). The ``shared_run`` fixture
(tests/conftest.py) checks at the end of the session that no shared run it handed out was
changed (names, sizes and modification times of every file).

Where tests ran nearly the same command, they now read one run: ``design --no-plots`` of each
demo (which writes a superset of what ``--no-report``, ``--no-responses`` or ``--no-robustness``
wrote, with the same bytes in each file those wrote: tests/test_run_hashes.py checks the hashes
against the golden ones), and the report run of the first demo with figures. The run directory
is given relative to its parent (``--out run``) so that a test can repeat the same command byte
for byte in a directory of its own (tests/test_determinism.py).
"""

from __future__ import annotations

import contextlib
import fcntl
import hashlib
import io
import json
import os
import shutil
import subprocess
import sys
from dataclasses import dataclass, field
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
CASES = ROOT / "cases"
#: The options of the demo runs shared by test_run_hashes, test_verdict, test_every_command,
#: test_determinism and test_cli: everything but the figures (responses, robustness, failures
#: and report included).
NO_PLOTS = ("--no-plots",)
#: The demo run with figures and report read by test_report and test_figure_formats (the
#: damping_target policy: see test_report.demo_run; ``--figures svg,png`` is the default set).
REPORT_OPTIONS = ("--policy", "damping_target", "--target-damping", "0.7", "--figures", "svg,png")
RUN_NAME = "run"


def case_path(case_name: str) -> Path:
    """The demo case file ``cases/<case_name>.yaml`` (a name with or without ``.yaml``)."""
    name = case_name if case_name.endswith(".yaml") else case_name + ".yaml"
    return CASES / name


def design_argv(case_name: str, options=NO_PLOTS, out: str = RUN_NAME) -> list:
    """The command line of a shared design run (``--out`` relative to the current directory)."""
    return ["design", str(case_path(case_name)), "--out", out, *options]


@contextlib.contextmanager
def _cwd(path):
    old = os.getcwd()
    os.chdir(path)
    try:
        yield
    finally:
        os.chdir(old)


def run_main(argv, cwd=None):
    """``damper.cli.main(argv)`` with its output captured: (exit code, stdout, stderr)."""
    from damper.cli import main

    out, err = io.StringIO(), io.StringIO()
    with _cwd(cwd or os.getcwd()), contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main([str(a) for a in argv])
    return code, out.getvalue(), err.getvalue()


def snapshot(path: Path) -> dict:
    """{relative path: (size, mtime_ns)} of every file under ``path`` (to see a change)."""
    got = {}
    for base, _, names in os.walk(path):
        for name in names:
            st = os.stat(os.path.join(base, name))
            got[os.path.relpath(os.path.join(base, name), path)] = (st.st_size, st.st_mtime_ns)
    return got


@dataclass(frozen=True)
class SharedRun:
    """One finished design run: its directory, exit code and terminal output.

    Parameters
    ----------
    path : Path
        The run directory (read it, never write into it; copy it with :meth:`copy_to`).
    code : int
        The exit code of ``damper design``.
    stdout, stderr : str
        What the command printed.
    argv : tuple
        The command line (``--out`` relative to ``path.parent``).
    """

    path: Path
    code: int
    stdout: str
    stderr: str
    argv: tuple
    _docs: dict = field(default_factory=dict, compare=False, repr=False)

    def json(self, name: str) -> dict:
        """The JSON document ``name`` of the run (parsed once; do not modify it), or None."""
        if name not in self._docs:
            p = self.path / name
            self._docs[name] = json.loads(p.read_text(encoding="utf-8")) if p.exists() else None
        return self._docs[name]

    def copy_to(self, dest) -> Path:
        """A private copy of the run directory at ``dest`` (for a test that changes it)."""
        shutil.copytree(self.path, dest)
        return Path(dest)


def case_stem(case_name: str) -> str:
    """The demo's name without ``.yaml``: ``"x"`` and ``"x.yaml"`` name the same shared run."""
    return case_path(case_name).stem


def _key(case_name: str, options) -> str:
    stem = case_stem(case_name)  # one key whether the caller wrote the name with .yaml or not
    digest = hashlib.sha256("\0".join([stem, *options]).encode()).hexdigest()[:10]
    return f"{stem}-{digest}"


def _built_once(base: Path, key: str, build) -> SharedRun:
    """The run ``<base>/<key>``: built by ``build(where)`` (which returns the record: exit
    code, stdout, stderr, argv) in the first caller of any process, under a lock file; read
    from its ``done.json`` by every later caller."""
    where = Path(base) / key
    done = where / "done.json"
    Path(base).mkdir(parents=True, exist_ok=True)
    with open(Path(base) / (key + ".lock"), "w") as lock:
        fcntl.flock(lock, fcntl.LOCK_EX)
        if not done.exists():
            shutil.rmtree(where, ignore_errors=True)
            where.mkdir()
            tmp = where / "done.json.tmp"
            tmp.write_text(json.dumps(build(where)), encoding="utf-8")
            os.replace(tmp, done)
        record = json.loads(done.read_text(encoding="utf-8"))
    return SharedRun(where / RUN_NAME, record["code"], record["stdout"], record["stderr"], tuple(record["argv"]))


def shared_design(base: Path, case_name: str, options=NO_PLOTS) -> SharedRun:
    """The shared run of ``damper design cases/<case_name>.yaml --out run <options>`` under ``base``.

    Built by the first caller (any process) and read by the others; ``base`` is a directory
    common to every pytest-xdist worker of the test run.
    """
    options = tuple(options)

    def build(where):
        argv = design_argv(case_stem(case_name), options)
        code, out, err = run_main(argv, cwd=where)
        return {"code": code, "stdout": out, "stderr": err, "argv": argv}

    return _built_once(base, _key(case_name, options), build)


def _with_root_on_path() -> dict:
    """The environment with this checkout first on PYTHONPATH (the subprocess runs elsewhere)."""
    old = os.environ.get("PYTHONPATH")
    return {**os.environ, "PYTHONPATH": str(ROOT) + (os.pathsep + old if old else "")}


def shared_process_design(base: Path, name: str, text: str, options=()) -> SharedRun:
    """The shared run of the case ``text`` (written to ``<name>.yaml``) designed by the real
    executable: ``python -m damper design <name>.yaml --out run <options>`` in a subprocess, its
    standard error a pipe. tests/test_progress.py reads its stage log; tests/test_run_directory.py
    reads (or copies) the run directory of the same command that it used to run in process.

    Built by the first caller (any process) and read by the others, like :func:`shared_design`.
    """
    options = tuple(options)
    digest = hashlib.sha256("\0".join([text, *options]).encode()).hexdigest()[:10]

    def build(where):
        (where / f"{name}.yaml").write_text(text, encoding="utf-8")
        argv = ["design", f"{name}.yaml", "--out", RUN_NAME, *options]
        proc = subprocess.run([sys.executable, "-m", "damper", *argv], cwd=where, capture_output=True,
                              text=True, timeout=600, env=_with_root_on_path())
        return {"code": proc.returncode, "stdout": proc.stdout, "stderr": proc.stderr, "argv": argv}

    return _built_once(base, f"text-{name}-{digest}", build)
