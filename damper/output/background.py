"""Render plots in a background process while the analysis goes on.

Drawing a figure is CPU-bound Python inside matplotlib, which is not thread-safe, so a
thread does not help; a separate process does. ``damper design`` hands each plot job to
one worker process as soon as its data exist (the gain search's figures while the time
responses and the robustness study run) and collects the jobs before it writes the
report. When the caller reaches :meth:`PlotJobs.finish` it takes back the jobs the worker
has not started and draws them itself, so neither side idles at the end.

Every job writes its files atomically and returns their paths; files are the same
whoever draws them. The worker is started with the ``spawn`` method (safe beside the
analysis's threads) as soon as the queue is made, and warms up at once (imports matplotlib
and the figure modules, draws one small figure in the run's formats), so that its start-up
runs beside the analysis instead of delaying the first figure. If the worker cannot start or dies, the jobs are drawn in this
process instead. ``DAMPER_PLOT_WORKERS=0`` in the environment (or ``workers=0``)
draws everything in this process, in order.

The worker never outlives this process: it ignores Ctrl-C (this process ends it, see
:meth:`PlotJobs.close`), asks the kernel to kill it when its parent dies (Linux
``PR_SET_PDEATHSIG``) and watches its parent's pid as well (any POSIX system), so even
after ``kill -9`` of this process it stops within a fraction of a second. Its files are
journaled in the run directory like this process's (the part of the run each job
belongs to is the one active when it was submitted).
"""

from __future__ import annotations

import os

__all__ = ["PlotJobs", "run_jobs"]

def _worker_start(parent_pid, run, formats=None):
    """Initializer of the plot worker: ignore Ctrl-C, die with the parent, journal into `run`,
    write the parent's figure formats."""
    import signal

    signal.signal(signal.SIGINT, signal.SIG_IGN)
    from ..childproc import die_with_parent

    die_with_parent(parent_pid)
    if formats is not None:
        from .style import set_formats

        set_formats(formats)
    if run is not None:
        from .journal import activate

        activate(*run)


def _warm_up() -> list:
    """Pay the plot worker's one-off costs before the first job: imports (matplotlib, its SVG and
    Agg backends, the figure modules) and the font and text caches of one small figure drawn in
    this process's formats under the house settings. Writes nothing; returns no paths."""
    import io

    import matplotlib

    import importlib

    from . import style

    for name in ("design", "responses"):  # imported here, off the critical path
        importlib.import_module(f"{__package__}.figures.{name}")

    with matplotlib.rc_context(style._RC):
        fig = style.new_figure(2.0, 1.5)
        ax = fig.add_subplot()
        ax.plot([1.0, 10.0], [0.0, 1.0], label="0.5")
        style._log_x(ax)
        ax.set_xlabel("gain K (s)")
        ax.legend()
        fig.suptitle("warm-up")
        for fmt in style.formats():
            fig.savefig(io.BytesIO(), format=fmt, dpi=style.DPI)
    del fig, ax
    import gc

    gc.collect()
    gc.freeze()  # what lives now (modules, caches) lives to the end: no collection traverses it again
    return []


def drawn(fn, *args) -> list:
    """Run the plot job ``fn(*args)`` with the garbage collector paused and collect its garbage
    once after it; the written paths.

    A matplotlib figure is a web of reference cycles (tens of thousands of objects): with the
    collector running, the young ones are traversed again at every collection while the
    figure is made, and every live object of the process at each full collection. Collected
    once, after the figure, only its own objects are traversed (the figures' CPU about 0.8x).
    """
    import gc

    if not gc.isenabled():  # paused by a caller: it collects
        return list(fn(*args))
    gc.disable()
    try:
        return list(fn(*args))
    finally:
        gc.enable()
        gc.collect(0)  # everything made while paused is in the youngest generation


def run_jobs(jobs) -> list:
    """Run jobs ``(fn, args)`` in order, each as :func:`drawn`; every written path, in order."""
    paths = []
    for fn, args in jobs:
        paths += drawn(fn, *args)
    return paths


def _env_workers(default: int = 1) -> int:
    text = os.environ.get("DAMPER_PLOT_WORKERS", "").strip()
    if not text:
        return default
    try:
        return max(0, int(text))
    except ValueError:
        return default


class PlotJobs:
    """A queue of plot jobs drawn by a worker process (or in this process).

    Parameters
    ----------
    enabled : bool
        False: no worker is started and every job runs at once when submitted.
    workers : int, optional
        Worker processes (default: ``DAMPER_PLOT_WORKERS`` or 1; 0 draws in this process).

    Each job is ``fn(*args)`` with `fn` a module-level function (it is sent to the worker
    by reference) returning a list of written paths.
    """

    def __init__(self, enabled: bool = True, workers: int | None = None):
        n = _env_workers() if workers is None else max(0, int(workers))
        self._pool = None
        if enabled and n > 0:
            try:
                import multiprocessing
                from concurrent.futures import ProcessPoolExecutor

                from .style import formats
                from .journal import active

                run = active()
                self._pool = ProcessPoolExecutor(
                    max_workers=n, mp_context=multiprocessing.get_context("spawn"), initializer=_worker_start,
                    initargs=(os.getpid(), None if run is None else run[:2], formats()),
                )
                # the pool starts its process at the first submission: start it now, warming up
                self._pool.submit(_warm_up)
            except (OSError, ImportError, NotImplementedError, ValueError, RuntimeError):
                self._pool = None
        self._jobs = []  # [fn, args, future or None, paths or None]

    @property
    def in_background(self) -> bool:
        """True when a worker process draws the jobs."""
        return self._pool is not None

    def submit(self, fn, *args) -> int:
        """Queue ``fn(*args)`` (run at once when there is no worker); returns the job's number.

        The job's files belong to the part of the run active now, wherever it is drawn.
        """
        from .journal import active, in_part

        if fn is not run_jobs:  # a group's jobs are each drawn so
            fn, args = drawn, (fn, *args)
        run = active()
        if run is not None:
            fn, args = in_part, (run[2], fn, *args)
        if self._pool is None:
            self._jobs.append([None, None, None, list(fn(*args))])
            return len(self._jobs) - 1
        from concurrent.futures.process import BrokenProcessPool

        self._forget_done()
        try:
            future = self._pool.submit(fn, *args)
        except (BrokenProcessPool, RuntimeError):  # the worker died: draw here from now on
            self._shutdown()
            self._jobs.append([None, None, None, list(fn(*args))])
            return len(self._jobs) - 1
        self._jobs.append([fn, args, future, None])
        return len(self._jobs) - 1

    def _forget_done(self):
        """Keep the paths of finished jobs and drop their arguments (memory: only pending jobs hold data)."""
        for job in self._jobs:
            future = job[2]
            if future is not None and future.done() and not future.cancelled() and future.exception() is None:
                job[0], job[1], job[2], job[3] = None, None, None, list(future.result())

    def submit_group(self, jobs) -> int:
        """Queue a list of jobs ``(fn, args)`` as one (their data are sent once); returns its number."""
        return self.submit(run_jobs, list(jobs))

    def paths(self, number) -> list:
        """Paths written by job `number` (after :meth:`finish`)."""
        out = self._jobs[number][3]
        if out is None:
            raise RuntimeError("plot job not finished; call finish() first")
        return list(out)

    def finish(self) -> list:
        """Wait for every job (drawing the unstarted ones here); the written paths, in submission order."""
        from .progress import current

        stage = current().stage("figures", len(self._jobs), "plot jobs") if self._jobs else None

        def tick():
            if stage is not None:
                stage.update(sum(j[3] is not None or (j[2] is not None and j[2].done()) for j in self._jobs))

        # take back not-yet-started jobs one at a time from the end of the queue and draw
        # them here, while the worker goes on from the front
        while True:
            for job in reversed(self._jobs):
                if job[2] is not None and job[2].cancel():
                    job[2], job[3] = None, list(job[0](*job[1]))
                    tick()
                    break
            else:
                break
        for job in self._jobs:
            fn, args, future, paths = job
            if future is None:
                continue
            try:
                job[3] = list(future.result())
            except Exception as exc:
                from concurrent.futures.process import BrokenProcessPool

                if not isinstance(exc, BrokenProcessPool):
                    raise
                job[3] = list(fn(*args))  # the worker died: draw it here
            job[2] = None
            tick()
        # every job is done: the worker exits on its own while this process goes on (its
        # interpreter's teardown is no part of the run; the pool's thread joins it at exit)
        self._shutdown(wait=False)
        if stage is not None:
            stage.finish()
        out = []
        for job in self._jobs:
            out += job[3]
        return out

    def _shutdown(self, wait=True):
        if self._pool is not None:
            self._pool.shutdown(wait=wait, cancel_futures=True)
            self._pool = None

    def close(self) -> None:
        """End the worker at once, queued and running jobs alike (after an error or an interrupt)."""
        if self._pool is not None:
            from ..childproc import end_pool_now

            end_pool_now(self._pool)
            self._pool = None

    def __enter__(self):
        return self

    def __exit__(self, exc_type, exc, tb):
        self.close()
        return False
