"""Peak memory and how fast damper stops (issue 17), measured on real processes.

    python tests/benchmarks/bench_limits.py            # everything (about 10 minutes)
    python tests/benchmarks/bench_limits.py --quick    # smaller sizes (about 2 minutes)

* peak memory (largest resident set of the process tree, from ``wait4``) of ``damper design``
  on invented cases of 100, 400 and 2,000 conditions, and of a 1,000,000-sample robustness
  study at one condition (two threads);
* seconds from SIGINT / SIGTERM to the exit of ``damper robust`` with two threads and
  3,000,000 samples, and of ``damper design`` while it draws its figures, and from kill -9
  of ``damper design`` until no process of it is left.

Called by bench_engine.py at the end of a full run. Not collected by pytest.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import tempfile
import time
import uuid

import numpy as np

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
DEMO = os.path.join(ROOT, "cases", "utility_single_aft_cg.yaml")
UNCERTAIN = os.path.join(ROOT, "cases", "utility_single_uncertain.yaml")


def many_conditions(n, path, seed=3):
    """An invented case of `n` conditions: the demo's aircraft and loop, random speeds, altitudes and Cm_alpha."""
    rng = np.random.default_rng(seed)
    with open(DEMO, encoding="utf-8") as fh:
        text = fh.read()
    head, tail = text[: text.index("conditions:")], text[text.index("loop:"):]
    lines = ["conditions:"]
    for i in range(n):
        lines.append(
            f'  - name: c{i:05d}\n    airspeed: "{rng.uniform(80, 190):.1f} kt"\n    altitude: "{rng.uniform(0, 25000):.0f} ft"\n'
            f"    coefficients: {{CL_alpha: 5.2, CD: 0.04, CL_delta: 0.40, Cm_alpha: {rng.uniform(-1.1, -0.2):.3f}, "
            "Cm_alpha_dot: -3.4, Cm_q: -8.0, Cm_delta: -1.2}"
        )
    with open(path, "w", encoding="utf-8") as fh:
        fh.write(head + "\n".join(lines) + "\n\n" + tail)
    return path


def one_uncertain_condition(path):
    """The uncertain demo reduced to its first condition."""
    import yaml

    with open(UNCERTAIN, encoding="utf-8") as fh:
        doc = yaml.safe_load(fh)
    doc["conditions"] = doc["conditions"][:1]
    with open(path, "w", encoding="utf-8") as fh:
        yaml.safe_dump(doc, fh, sort_keys=False)
    return path


def peak(argv):
    """(seconds, peak resident set in MB) of ``damper ARGV`` (the largest process of its tree)."""
    t = time.perf_counter()
    proc = subprocess.Popen([sys.executable, "-m", "damper", *argv], cwd=ROOT, stdout=subprocess.DEVNULL,
                            stderr=subprocess.PIPE)
    _, status, usage = os.wait4(proc.pid, 0)
    proc.returncode = os.waitstatus_to_exitcode(status)
    err = proc.stderr.read().decode()
    if proc.returncode not in (0, 3):  # 3: a requirement not met, a result like any other
        raise RuntimeError(f"damper {' '.join(argv)} failed ({proc.returncode}): {err[-400:]}")
    return time.perf_counter() - t, usage.ru_maxrss / 1024.0


def _carrying(marker):
    needle = f"DAMPER_BENCH_MARKER={marker}".encode()
    out = []
    for pid in os.listdir("/proc"):
        if pid.isdigit():
            try:
                with open(f"/proc/{pid}/environ", "rb") as fh:
                    if needle in fh.read().split(b"\0"):
                        out.append(int(pid))
            except OSError:
                pass
    return out


def _default_sigint():
    """A shell starts background jobs with Ctrl-C ignored, and a child inherits that: undo it."""
    signal.signal(signal.SIGINT, signal.SIG_DFL)


def stop_time(argv, ready, sig):
    """Seconds from `sig` to the last process of ``damper ARGV`` gone; `ready()` says when to send it."""
    marker = uuid.uuid4().hex
    proc = subprocess.Popen([sys.executable, "-m", "damper", *argv], cwd=ROOT, stdout=subprocess.DEVNULL,
                            stderr=subprocess.DEVNULL, env=dict(os.environ, DAMPER_BENCH_MARKER=marker),
                            preexec_fn=_default_sigint)
    deadline = time.monotonic() + 120
    while not ready() and time.monotonic() < deadline:
        time.sleep(0.02)
    t = time.perf_counter()
    proc.send_signal(sig)
    try:
        proc.wait(timeout=120)
    except subprocess.TimeoutExpired:
        proc.kill()
        proc.wait()
        return float("inf"), "killed after 120 s"
    while _carrying(marker):
        time.sleep(0.01)
    return time.perf_counter() - t, proc.returncode


def main(quick=False):
    print(f"damper limits benchmark, {time.strftime('%Y-%m-%d')}, {os.cpu_count()} cores")
    with tempfile.TemporaryDirectory() as tmp:
        for n in (100, 400) if quick else (100, 400, 2000):
            case = many_conditions(n, os.path.join(tmp, f"c{n}.yaml"))
            t, mb = peak(["design", case, "--out", os.path.join(tmp, f"d{n}")])
            t2, mb2 = peak(["design", case, "--out", os.path.join(tmp, f"s{n}"), "--no-plots", "--no-responses",
                            "--no-report"])
            print(f"damper design, {n} conditions: whole run {t:.0f} s, peak {mb:.0f} MB; search only "
                  f"{t2:.0f} s, peak {mb2:.0f} MB")
        one = one_uncertain_condition(os.path.join(tmp, "one.yaml"))
        for samples in (100_000,) if quick else (100_000, 1_000_000):
            t, mb = peak(["robust", one, "--gain", "0.3", "--samples", str(samples), "--workers", "2", "--quiet",
                          "--out", os.path.join(tmp, f"r{samples}")])
            print(f"damper robust, {samples} samples at one condition, two worker processes: {t:.0f} s, peak {mb:.0f} MB")
        out = os.path.join(tmp, "stop-robust")
        for sig in (signal.SIGINT, signal.SIGTERM):
            dt, rc = stop_time(["robust", UNCERTAIN, "--gain", "0.3", "--samples", "3000000", "--workers", "2",
                                "--quiet", "--out", out + sig.name],
                               lambda o=out + sig.name: _after(os.path.exists(os.path.join(o, ".damper-journal")), 2.0),
                               sig)
            print(f"damper robust, 3,000,000 samples, two worker processes: exit {rc} {dt:.2f} s after {sig.name}")
        for sig in (signal.SIGINT, signal.SIGKILL):
            d = os.path.join(tmp, "stop-design" + sig.name)
            dt, rc = stop_time(["design", DEMO, "--out", d],
                               lambda d=d: os.path.isdir(os.path.join(d, "plots")) and os.listdir(os.path.join(d, "plots")),
                               sig)
            print(f"damper design during its figures: exit {rc}, every process gone {dt:.2f} s after {sig.name}")


_READY = {}


def _after(condition, delay):
    """True `delay` seconds after `condition` first became true (so the signal lands mid-study)."""
    key = id(_READY)
    if not condition:
        return False
    first = _READY.setdefault(key, time.monotonic())
    if time.monotonic() - first >= delay:
        _READY.clear()
        return True
    return False


if __name__ == "__main__":
    main(quick="--quick" in sys.argv)
