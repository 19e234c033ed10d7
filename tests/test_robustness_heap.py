"""A process evaluating robustness blocks keeps its heap's top (damper.analysis.robustness_heap):
arrays of megabytes made and freed again and again reuse the same pages instead of being
faulted in afresh each time. Counted as the process's minor page faults (getrusage), in
fresh processes, with the setting and without it. The child turns transparent huge pages off
for itself (prctl PR_SET_THP_DISABLE, which covers every huge-page size) and runs without
malloc tunables, so that the count is that of 4 KB pages whatever the host's huge-page
settings (with 32 kB pages always on, for one, the same pattern faults about 22,000 times
without the setting and 220 with it).

Without the setting the count also depends on where the process's earlier allocations put
the heap's top: glibc's default gives the memory back on some layouts (about 172,600 faults
here) and keeps it on others (about 17,300), and the environment alone (the checkout's path
in PYTHONPATH, a test runner's variables) moves the layout. So the child first makes a few
small objects whose number and size are set by a layout index, and the test looks, on up to
eight layouts, for one where the default gives the memory back; the setting must then keep
it on that same layout. With the setting the count was 1,758-1,759 on every layout tried."""

import os
import platform
import subprocess
import sys

import pytest

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))

_CHURN = """
import ctypes, resource, sys
libc = ctypes.CDLL(None)
libc.prctl(41, 1, 0, 0, 0)  # PR_SET_THP_DISABLE: this process uses 4 KB pages
print("huge-pages-off", libc.prctl(42, 0, 0, 0, 0))  # PR_GET_THP_DISABLE: 1 when that took
import numpy as np
from damper.analysis import robustness_heap as H
layout = int(sys.argv[2])
junk = [bytes(1000 + 37 * layout) for _ in range(7 * layout)]  # where the heap's top lies
H.HEAP_PAD = int(sys.argv[1])
H.keep_heap()
H.keep_heap()  # a second call changes nothing
small = [np.ones(100) for _ in range(2000)]  # the heap grows (as a block's small arrays make it)
f0 = resource.getrusage(resource.RUSAGE_SELF).ru_minflt
for _ in range(100):  # a block's pattern: arrays of 2.4 MB made and freed
    a = np.ones((300, 1000)); b = a * 2.0; c = b + a; del a, b, c
print(resource.getrusage(resource.RUSAGE_SELF).ru_minflt - f0)
"""


def _env():
    env = {k: v for k, v in os.environ.items() if not k.startswith(("GLIBC_TUNABLES", "MALLOC_"))}
    return {**env, "PYTHONPATH": ROOT}


def _faults(pad, layout):
    out = subprocess.run([sys.executable, "-c", _CHURN, str(pad), str(layout)], cwd=ROOT, capture_output=True, text=True,
                         check=True, env=_env())
    words = out.stdout.split()
    if words[:2] != ["huge-pages-off", "1"]:
        pytest.skip("this host does not let a process turn transparent huge pages off (prctl): "
                    "the fault count would depend on its huge-page settings")
    return int(words[-1])


@pytest.mark.skipif(not sys.platform.startswith("linux") or platform.libc_ver()[0] != "glibc",
                    reason="the setting is glibc's (M_TOP_PAD)")
def test_kept_heap_top_reuses_freed_pages():
    # Source: glibc's mallopt(3): M_TOP_PAD is the memory kept at the heap's top when it is
    # trimmed and added when it grows; each 2.4 MB array faults in its ~590 pages when the
    # memory was given back (300 arrays: ~175,000 faults), and almost none when it is kept.
    counts = []
    for layout in range(8):
        counts.append(_faults(0, layout))
        if counts[-1] > 100_000:
            break
    else:
        pytest.fail(f"glibc's default kept the freed memory on all eight layouts (faults: {counts}): "
                    "the pattern no longer shows what the setting is for")
    with_pad = _faults(64 << 20, layout)
    assert with_pad < counts[-1] / 10, (layout, counts, with_pad)
