"""A worker process that never outlives the process that started it.

Shared by the plot worker and the robustness study's local processes: a worker asks the
kernel to kill it when its parent dies (Linux ``PR_SET_PDEATHSIG``) and watches its
parent's pid as well (any POSIX system), so even after ``kill -9`` of the parent it stops
within a fraction of a second.
"""

from __future__ import annotations

import os

#: How often a worker checks that its parent is alive, s.
PARENT_CHECK_INTERVAL = 0.2


def die_with_parent(parent_pid: int) -> None:
    """End this (worker) process as soon as the process `parent_pid` is gone."""
    import sys
    import threading
    import time

    if sys.platform.startswith("linux"):
        try:
            import ctypes
            import signal

            libc = ctypes.CDLL(None, use_errno=True)
            libc.prctl(1, int(signal.SIGKILL), 0, 0, 0)  # PR_SET_PDEATHSIG = 1
        except (OSError, AttributeError):
            pass
    if os.getppid() != parent_pid:  # the parent died before the request above took effect
        os._exit(1)

    def watch():
        while True:
            time.sleep(PARENT_CHECK_INTERVAL)
            if os.getppid() != parent_pid:
                os._exit(1)

    threading.Thread(target=watch, name="damper-parent-watch", daemon=True).start()


def end_pool_now(pool) -> None:
    """End the worker processes of a ``ProcessPoolExecutor`` at once (after an error or an
    interrupt): queued tasks are cancelled and running ones stopped, which ``shutdown()``
    alone would let finish."""
    processes = list((getattr(pool, "_processes", None) or {}).values())
    pool.shutdown(wait=False, cancel_futures=True)
    for p in processes:
        try:
            p.terminate()
        except (OSError, AttributeError, ValueError):
            pass
    for p in processes:
        try:
            p.join(timeout=10)
        except (OSError, AttributeError, ValueError, AssertionError):
            pass


__all__ = ["PARENT_CHECK_INTERVAL", "die_with_parent", "end_pool_now"]
