"""Where the blocks of a robustness study are evaluated: here, on threads, in local processes or on Dask.

A *runner* evaluates tasks ``fn(study, *args)`` (``fn`` a module-level function, `study`
the one :class:`Study` of the run) and hands back futures; the caller keeps a bounded
number of them in flight (:attr:`window`) and consumes the results in submission order,
so the merged result never depends on which runner, how many workers or which worker
took which task (docs/cluster.md).

* :class:`Inline`: in the calling thread (one worker).
* :class:`Threads`: a thread pool (numpy releases the GIL in its kernels; small studies).
* :class:`Processes`: local processes started with ``spawn`` (safe beside threads), the
  study sent once to each when it starts. A worker ignores Ctrl-C and dies with this
  process (:mod:`damper.childproc`); after an error or an interrupt
  :meth:`Processes.close` ends the workers at once.
* :class:`Dask`: a ``dask.distributed`` scheduler at an address (``--cluster``); the study
  is scattered to every worker once. dask is imported only here and only then
  (:func:`connect`).
"""

from __future__ import annotations

import collections
import os
from dataclasses import dataclass

import numpy as np

#: Tasks in flight per worker.
TASKS_PER_WORKER = 2


@dataclass(frozen=True)
class Study:
    """What every task of a robustness study needs (sent once to each worker).

    Attributes
    ----------
    case : damper.case.Case
    axes : damper.analysis.uncertainty.Axes
    gains : ndarray, shape (n_conditions,)
        Nominal pitch-rate gain K per condition, s.
    spec : damper.analysis.uncertainty.UncertaintySpec
    """

    case: object
    axes: object
    gains: np.ndarray
    spec: object


class _Translated:
    """A future whose failures of the machinery (not of the analysis) become one-line errors."""

    def __init__(self, future, translate):
        self._future = future
        self._translate = translate

    def result(self):
        try:
            return self._future.result()
        except Exception as exc:  # noqa: BLE001 - translated, or raised as it is
            message = self._translate(exc)
            if message is None:
                raise
        from ..errors import DamperError

        raise DamperError(message)

    def cancel(self):
        return self._future.cancel()


def _process_failure(exc):
    from concurrent.futures.process import BrokenProcessPool

    if isinstance(exc, BrokenProcessPool):
        return ("a worker process of the robustness study ended abruptly (killed, or out of memory?); "
                "rerun with fewer --workers or --workers 1 (a script calling damper keeps its own work under "
                "if __name__ == '__main__')")
    return None


def _dask_failure(exc):
    if isinstance(exc, ImportError):
        return (f"a Dask worker cannot run damper ({type(exc).__name__}: {exc}); install the same damper "
                "version on every worker machine (docs/cluster.md)")
    return None


class _Done:
    """A finished result with the interface of a future."""

    def __init__(self, value):
        self._value = value

    def result(self):
        return self._value

    def cancel(self):
        return False


class Inline:
    """Evaluates each task in the calling thread when its result is asked for."""

    workers = 1
    kind = "in this process"

    def __init__(self, study: Study):
        self.study = study
        self.window = 1

    def submit(self, fn, *args):
        return _Done(fn(self.study, *args))

    def close(self, finished: bool) -> None:
        pass


class Threads(Inline):
    """A pool of `workers` threads in this process."""

    kind = "threads"

    def __init__(self, study: Study, workers: int):
        from concurrent.futures import ThreadPoolExecutor

        super().__init__(study)
        self.workers = workers
        self.window = TASKS_PER_WORKER * workers
        self._pool = ThreadPoolExecutor(workers)

    def submit(self, fn, *args):
        return self._pool.submit(fn, self.study, *args)

    def close(self, finished: bool) -> None:
        """Wait for the running tasks when `finished`; else cancel what is queued and do not wait."""
        self._pool.shutdown(wait=finished, cancel_futures=not finished)


#: The study of a worker process (set by :func:`_process_start`).
_STUDY = None


def _process_start(parent_pid: int, study: Study) -> None:
    """Initializer of a worker process: ignore Ctrl-C, die with the parent, keep the study."""
    import signal

    from ..childproc import die_with_parent

    signal.signal(signal.SIGINT, signal.SIG_IGN)
    die_with_parent(parent_pid)
    global _STUDY
    _STUDY = study


def _in_process(fn, *args):
    return fn(_STUDY, *args)


class Processes(Inline):
    """`workers` local processes (``spawn``), each holding the study.

    Raises OSError (or ImportError, NotImplementedError) when processes cannot be started.
    """

    kind = "processes"

    def __init__(self, study: Study, workers: int):
        import multiprocessing
        from concurrent.futures import ProcessPoolExecutor

        super().__init__(study)
        self.workers = workers
        self.window = TASKS_PER_WORKER * workers
        self._pool = ProcessPoolExecutor(max_workers=workers, mp_context=multiprocessing.get_context("spawn"),
                                         initializer=_process_start, initargs=(os.getpid(), study))

    def submit(self, fn, *args):
        return _Translated(self._pool.submit(_in_process, fn, *args), _process_failure)

    def close(self, finished: bool) -> None:
        """Wait for the workers to exit when `finished`; else end them at once (an error or an interrupt)."""
        if finished:
            self._pool.shutdown(wait=True)
            return
        from ..childproc import end_pool_now

        end_pool_now(self._pool)


def connect(address: str):
    """A ``dask.distributed`` client of the scheduler at `address`.

    The time allowed to connect is dask's ``distributed.comm.timeouts.connect`` setting
    (environment ``DASK_DISTRIBUTED__COMM__TIMEOUTS__CONNECT``, e.g. ``10s``).

    Raises
    ------
    DamperError
        When dask.distributed is not installed or the scheduler cannot be reached.
    """
    from ..errors import DamperError

    try:
        from distributed import Client
    except ImportError:
        raise DamperError("--cluster needs dask.distributed, which is not installed: "
                          "pip install 'damper[cluster]'") from None
    try:
        return Client(address, set_as_default=False)
    except Exception as exc:  # noqa: BLE001 - unreachable, refused, or something else answers there
        why = f"{type(exc).__name__}: {str(exc).splitlines()[0] if str(exc) else 'no answer'}"
    _forget_failed_client()
    raise DamperError(f"--cluster {address}: cannot reach a Dask scheduler there ({why})")


def _forget_failed_client() -> None:
    """Collect the half-made client of a failed connection now, quietly (its ``__del__`` would
    otherwise print a traceback when the interpreter exits)."""
    import gc
    import sys

    hook = sys.unraisablehook
    sys.unraisablehook = lambda unraisable: None
    try:
        gc.collect()
    finally:
        sys.unraisablehook = hook


def check_cluster(address) -> None:
    """Fail early (DamperError) when `address` is given and no scheduler answers there."""
    if address is not None:
        connect(address).close()


class cluster_client:
    """``with cluster_client(address) as client``: a connected client (None without an address), closed at the end."""

    def __init__(self, address):
        self.client = None if address is None else connect(address)

    def __enter__(self):
        return self.client

    def __exit__(self, *exc):
        if self.client is not None:
            self.client.close()
        return False


class Dask(Inline):
    """The workers of a ``dask.distributed`` scheduler at `address` (or a connected client)."""

    kind = "Dask workers"

    def __init__(self, study: Study, cluster):
        super().__init__(study)
        self._own = isinstance(cluster, str)
        self._client = connect(cluster) if self._own else cluster
        self.workers = max(1, sum(self._client.nthreads().values()))
        self.window = TASKS_PER_WORKER * self.workers
        self._study = self._client.scatter(study, broadcast=True, hash=False)
        self._futures = collections.deque()

    def submit(self, fn, *args):
        future = self._client.submit(fn, self._study, *args, pure=False)
        self._futures.append(future)
        while self._futures and self._futures[0].done():
            self._futures.popleft()
        return _Translated(future, _dask_failure)

    def close(self, finished: bool) -> None:
        """Cancel what has not finished (after an error or an interrupt), release the study, disconnect."""
        try:
            if not finished and self._futures:
                self._client.cancel(list(self._futures))
            self._client.cancel([self._study])
        finally:
            if self._own:
                self._client.close()


def runner(study: Study, workers: int, *, processes: bool, cluster=None):
    """The runner of a study: Dask with `cluster`, else processes or threads for several workers, else inline."""
    if cluster is not None:
        return Dask(study, cluster)
    if workers <= 1:
        return Inline(study)
    if processes:
        try:
            return Processes(study, workers)
        except (OSError, ImportError, NotImplementedError, ValueError):
            pass  # no processes here: threads give the same result
    return Threads(study, workers)


def in_order(run, fn, items):
    """``fn(study, *item)`` for every item on `run`, results in order; at most ``run.window`` not consumed."""
    pending = collections.deque()
    try:
        for item in items:
            pending.append(run.submit(fn, *item))
            if len(pending) >= run.window:
                yield pending.popleft().result()
        while pending:
            yield pending.popleft().result()
    finally:  # an interrupt or an error: what has not started never will
        for f in pending:
            f.cancel()


__all__ = ["Dask", "Inline", "Processes", "Study", "TASKS_PER_WORKER", "Threads", "check_cluster", "cluster_client", "connect",
           "in_order", "runner"]
