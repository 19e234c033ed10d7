"""A tool that stops when asked (issue 17, item 3), through real processes and signals.

Exit codes: 130 after SIGINT, 143 after SIGTERM (docs/errors.md; 128 + the signal number is
common practice for shells). "No process left" is checked by a marker in the environment
that every child inherits: after the command ends, no process may still carry it. Time-outs
are generous (30 s) and only guard against a hang; how fast damper stops is measured in
tests/benchmarks/bench_engine.py.
"""

import json
import os
import signal
import subprocess
import sys
import time
import uuid

import pytest

from damper.cli import main

from .conftest import ROOT
from .test_run_directory import ONE

UNCERTAIN = os.path.join(ROOT, "cases", "utility_single_uncertain.yaml")
DEMO = os.path.join(ROOT, "cases", "utility_single_aft_cg.yaml")
TIMEOUT = 30.0

pytestmark = pytest.mark.skipif(not os.path.isdir("/proc/self"), reason="needs /proc to find left-over processes")


def _default_sigint():
    """A shell starts background jobs with Ctrl-C ignored and children inherit it; a terminal's Ctrl-C is the case here."""
    signal.signal(signal.SIGINT, signal.SIG_DFL)


@pytest.fixture
def started():
    """Start damper processes; any still running when the test ends (it failed) is killed with its children."""
    procs = []

    def start(args, marker):
        env = dict(os.environ, DAMPER_TEST_MARKER=marker)
        proc = subprocess.Popen([sys.executable, "-m", "damper", *args], cwd=ROOT, env=env,
                                stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                                preexec_fn=_default_sigint)
        procs.append((proc, marker))
        return proc

    yield start
    for proc, marker in procs:
        if proc.poll() is None:
            proc.kill()
            proc.communicate()
        for pid in _carrying(marker):
            try:
                os.kill(pid, signal.SIGKILL)
            except OSError:
                pass


def _carrying(marker):
    """Pids of live processes whose environment holds the marker (zombies have none)."""
    needle = f"DAMPER_TEST_MARKER={marker}".encode()
    out = []
    for pid in os.listdir("/proc"):
        if not pid.isdigit():
            continue
        try:
            with open(f"/proc/{pid}/environ", "rb") as fh:
                if needle in fh.read().split(b"\0"):
                    out.append(int(pid))
        except OSError:
            continue
    return out


def _none_left(marker):
    deadline = time.monotonic() + TIMEOUT
    while _carrying(marker) and time.monotonic() < deadline:
        time.sleep(0.1)
    return _carrying(marker)


def _wait_for(predicate, what):
    deadline = time.monotonic() + TIMEOUT
    while not predicate():
        if time.monotonic() > deadline:
            raise AssertionError(f"never saw {what}")
        time.sleep(0.05)


def _figures(out):
    plots = out / "plots"
    return plots.is_dir() and any(n.endswith((".png", ".svg")) for n in os.listdir(plots))


def test_sigint_stops_robust_with_two_workers_and_a_large_study(tmp_path, started):
    # issue 17, problem 3: with two workers and 300,000 samples the exit came 202 s after SIGINT
    marker = uuid.uuid4().hex
    out = tmp_path / "run"
    proc = started(["robust", UNCERTAIN, "--gain", "0.3", "--samples", "3000000", "--workers", "2", "--out", str(out),
                    "--quiet"],
                  marker)
    _wait_for(lambda: (out / ".damper-journal").exists(), "the run start")
    time.sleep(1.5)  # inside the Monte Carlo (the study takes minutes)
    proc.send_signal(signal.SIGINT)
    _, err = proc.communicate(timeout=TIMEOUT)
    assert proc.returncode == 130, err
    assert err.strip().splitlines()[0] == "damper: interrupted" and "Traceback" not in err
    assert _none_left(marker) == []
    assert not out.exists()  # nothing was written: no run at all


def test_sigterm_during_the_figures_leaves_an_incomplete_run_that_force_replaces(tmp_path, started):
    marker = uuid.uuid4().hex
    out = tmp_path / "run"
    proc = started(["design", DEMO, "--out", str(out), "--quiet"], marker)
    _wait_for(lambda: _figures(out), "a figure")
    proc.send_signal(signal.SIGTERM)
    _, err = proc.communicate(timeout=TIMEOUT)
    assert proc.returncode == 143, err
    assert err.startswith("damper: terminated\n") and "incomplete run" in err and "Traceback" not in err
    assert _none_left(marker) == []
    assert (out / ".damper-journal").exists() and not (out / "manifest.json").exists()
    case = tmp_path / "one.yaml"
    case.write_text(ONE, encoding="utf-8")
    assert main(["design", str(case), "--out", str(out), "--force", "--no-plots", "--no-responses"]) == 0
    manifest = json.loads((out / "manifest.json").read_text())
    assert manifest["complete"] and not (out / "plots").exists()


def test_kill_9_of_design_during_its_figures_leaves_no_process(tmp_path, started):
    # issue 17, problem 4: the plot worker outlived its parent and kept writing plots
    marker = uuid.uuid4().hex
    out = tmp_path / "run"
    proc = started(["design", DEMO, "--out", str(out)], marker)
    _wait_for(lambda: _figures(out), "a figure")
    assert len(_carrying(marker)) >= 2  # the command and its plot worker (and multiprocessing's helper)
    proc.kill()
    proc.communicate(timeout=TIMEOUT)
    assert proc.returncode == -signal.SIGKILL
    assert _none_left(marker) == []
    before = sorted(os.listdir(out / "plots"))
    time.sleep(1.0)
    assert sorted(os.listdir(out / "plots")) == before  # nobody writes into the run any more
