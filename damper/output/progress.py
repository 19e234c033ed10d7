"""Progress of long work on standard error: a bar on a terminal, a stage log otherwise.

A command configures the process's reporter once (:func:`configure`, ``--quiet`` makes it
silent); the stages of the work report through :func:`current` (output-layer code) or get
the reporter as a ``progress(done, total, stage)`` callback (the analysis layer, e.g.
:func:`damper.analysis.robustness.robustness`). Nothing is ever written to standard
output, so ``--json`` output stays clean.

- On a terminal: one line per stage redrawn in place (``\\r``), ``stage [####....] 120/2000
  conditions 3 s``, ended with a newline when the stage is done.
- Otherwise (a pipe, a log file, CI): ``damper: search 0/2000 conditions`` when a stage
  starts, at most one line per :data:`LOG_INTERVAL` seconds while it runs, and
  ``damper: search 2000/2000 conditions (12.3 s)`` when it ends.
- Without :func:`configure` (the library used from Python) the reporter is silent.
"""

from __future__ import annotations

import sys
import time

__all__ = ["LOG_INTERVAL", "PARTS", "Reporter", "Stage", "add_quiet_option", "configure", "current", "reset"]

#: Least time between two log lines of one running stage, s.
LOG_INTERVAL = 10.0
#: Least time between two redraws of a terminal bar, s.
BAR_INTERVAL = 0.1
#: Width of the terminal bar, characters.
BAR_WIDTH = 24


def add_quiet_option(parser) -> None:
    """The ``--quiet`` option of a sub-command."""
    parser.add_argument("--quiet", action="store_true", help="no progress on standard error (warnings and errors still)")


class Stage:
    """One stage of the work (created by :meth:`Reporter.stage`).

    Parameters
    ----------
    reporter : Reporter
    name : str
        ``search``, ``schedule``, ``responses``, ``robustness``, ``figures``, ``report`` ...
    total : int or None
        Units of work in the stage (None: not known in advance).
    unit : str
        What is counted (``conditions``, ``samples``, ``rounds`` ...).
    """

    def __init__(self, reporter, name, total=None, unit=""):
        self.reporter, self.name, self.total, self.unit = reporter, name, total, unit
        self.done = 0
        self.start = time.monotonic()
        self.closed = False
        reporter._show(self, force=True)

    def update(self, done, total=None, unit=None) -> None:
        """`done` units finished (of `total` when given: it may change, e.g. a part of a stage)."""
        if self.closed:
            return
        self.done = done
        if total is not None:
            self.total = total
        if unit is not None:
            self.unit = unit
        self.reporter._show(self)

    def finish(self) -> None:
        """The stage is done: the bar ends its line, the log gets its last line with the elapsed time."""
        if self.closed:
            return
        if self.total is not None:
            self.done = max(self.done, self.total)
        self.reporter._show(self, force=True, last=True)
        self.closed = True

    def __enter__(self):
        return self

    def __exit__(self, exc_type, exc, tb):
        if exc_type is None:
            self.finish()
        else:
            self.reporter._abandon(self)
        return False


class Reporter:
    """Where progress goes: a terminal bar, a log, or nowhere.

    Parameters
    ----------
    stream : file, optional
        Default: standard error.
    enabled : bool
        False: silent.
    terminal : bool, optional
        Draw a bar (default: whether `stream` is a terminal).

    Calling the reporter as ``reporter(done, total, stage)`` reports a stage of the analysis
    layer: the parts of :func:`damper.analysis.robustness.robustness` (``samples``,
    ``corners``, ``worst-case search``) as the ``robustness`` stage, the rounds of
    :func:`damper.analysis.schedule.design_schedule` as the ``schedule`` stage.
    """

    def __init__(self, stream=None, enabled=True, terminal=None):
        self.stream = stream if stream is not None else sys.stderr
        self.enabled = bool(enabled)
        if terminal is None:
            try:
                terminal = self.stream.isatty()
            except (AttributeError, ValueError, OSError):
                terminal = False
        self.terminal = terminal
        self._open = None  # the stage whose bar is on the current line
        self._last = {}  # stage id -> time of its last line
        self._called = None  # the stage reported through __call__

    def stage(self, name, total=None, unit="") -> Stage:
        """Start a stage (a context manager: leaving it finishes the stage)."""
        return Stage(self, name, total, unit)

    def __call__(self, done, total, stage):
        """``progress(done, total, stage)`` of the analysis layer (see :data:`PARTS`); done >= total ends it."""
        name, unit = PARTS.get(stage, (stage, ""))
        s = self._called
        if s is None or s.closed or (s.name, s.unit) != (name, unit):
            if s is not None:
                s.finish()
            s = self._called = Stage(self, name, total, unit)
        s.update(done, total)
        if total is not None and done >= total:
            s.finish()

    # -- drawing --------------------------------------------------------------------------
    def _count(self, s, last=False) -> str:
        if not s.unit:  # a stage without a count: started, done
            return "done" if last else "..."
        if s.total is None:
            return f"{s.done} {s.unit}" if s.done else "..."
        return f"{s.done}/{s.total} {s.unit}"

    def _show(self, s, force=False, last=False) -> None:
        if not self.enabled:
            return
        now = time.monotonic()
        key = id(s)
        interval = BAR_INTERVAL if self.terminal else LOG_INTERVAL
        if not force and now - self._last.get(key, -1e9) < interval:
            return
        self._last[key] = now
        elapsed = now - s.start
        try:
            if self.terminal:
                self._bar(s, elapsed, last)
            else:
                tail = f" ({elapsed:.1f} s)" if last else ""
                self.stream.write(f"damper: {s.name} {self._count(s, last)}{tail}\n")
            self.stream.flush()
        except (OSError, ValueError):  # standard error closed: progress is not worth an error
            self.enabled = False

    def _bar(self, s, elapsed, last):
        if self._open is not None and self._open is not s:
            self.stream.write("\n")
        if s.total:
            frac = min(1.0, s.done / s.total)
            bar = "[" + "#" * int(round(frac * BAR_WIDTH)) + "." * (BAR_WIDTH - int(round(frac * BAR_WIDTH))) + "] "
        else:
            bar = ""
        self.stream.write(f"\r{s.name:<12} {bar}{self._count(s, last)}  {elapsed:.0f} s\x1b[K")
        if last:
            self.stream.write("\n")
            self._open = None
        else:
            self._open = s

    def end_line(self) -> None:
        """End a bar's line left open (before an error or interrupt message)."""
        if self._open is not None:
            self._abandon(self._open)

    def _abandon(self, s) -> None:
        """A stage left by an exception: end the bar's line so the error starts on its own."""
        s.closed = True
        if self.enabled and self.terminal and self._open is s:
            try:
                self.stream.write("\n")
                self.stream.flush()
            except (OSError, ValueError):
                pass
            self._open = None


#: Stage names of the analysis layer's ``progress(done, total, stage)`` calls: (stage shown, unit).
PARTS = {
    "samples": ("robustness", "samples"),
    "corners": ("robustness", "corners"),
    "worst-case search": ("robustness", "worst-case iterations"),
    "schedule": ("schedule", "rounds"),
}

_SILENT = Reporter(enabled=False, terminal=False)
_current = _SILENT


def configure(quiet=False, stream=None, terminal=None) -> Reporter:
    """Set the process's reporter for a command (``quiet``: silent) and return it."""
    global _current
    _current = Reporter(stream=stream, enabled=not quiet, terminal=terminal)
    return _current


def current() -> Reporter:
    """The process's reporter (silent unless a command configured one)."""
    return _current


def reset() -> None:
    """Back to the silent reporter (after a command)."""
    global _current
    _current = _SILENT
