"""Command line: parses arguments and calls the library.

Each sub-command lives in :mod:`damper.commands` as a module with
``register(subparsers)`` (argument definitions, no heavy imports) and
``run(args, argv) -> int``. Heavy imports (numpy, scipy, matplotlib,
python-control) happen inside ``run`` so that ``damper --help`` stays fast.
"""

from __future__ import annotations

import argparse
import importlib
import sys

CAUTION_SHORT = (
    "Preliminary engineering analysis only: validate by simulation, ground and flight test; "
    "the applicable airworthiness rules and qualified engineers decide."
)

#: Sub-command modules, in the order ``--help`` lists them.
COMMAND_MODULES = (
    "damper.commands.design",
    "damper.commands.assess",
    "damper.commands.sweep",
    "damper.commands.respond",
    "damper.commands.robust",
    "damper.commands.report",
    "damper.commands.compare",
)


def _parser():
    p = argparse.ArgumentParser(
        prog="damper",
        description="Design and check pitch-rate dampers (pitch stability augmentation) from a YAML case file.",
        epilog="Exit status: 0 every requirement met, 3 some requirement not met, 2 bad input or output "
        "location, 1 a bug in damper, 130/143 interrupted. " + CAUTION_SHORT,
    )
    p.add_argument("--version", action="store_true", help="print the version and exit")
    p.add_argument("--debug", action="store_true", help="show a traceback on errors")
    sub = p.add_subparsers(dest="command", metavar="COMMAND")
    runners = {}
    for name in COMMAND_MODULES:
        module = importlib.import_module(name)
        command = module.register(sub)
        runners[command] = module.run
    return p, runners


def _value_options(parser):
    """Option strings (of the parser and its sub-commands) that take one value."""
    out = set()
    for action in parser._actions:  # argparse keeps no public list of them
        if action.option_strings and action.nargs is None:
            out.update(action.option_strings)
        if isinstance(action, argparse._SubParsersAction):
            for sub in action.choices.values():
                out |= _value_options(sub)
    return out


def _join_negative_numbers(parser, argv):
    """``--gain -1e-3`` as ``--gain=-1e-3``: argparse takes a value that starts with '-' and is not
    a plain decimal (an exponent, 'inf') for an option and stops with 'expected one argument'."""
    takes_value = _value_options(parser)
    out = []
    for tok in argv:
        if out and out[-1] in takes_value and tok.startswith("-") and len(tok) > 1:
            try:
                float(tok)
            except ValueError:
                pass
            else:
                out[-1] = f"{out[-1]}={tok}"
                continue
        out.append(tok)
    return out


def main(argv=None) -> int:
    """Run the command line; returns the exit code (docs/verdict.md).

    0 every requirement met, 3 some requirement not met (the analysis succeeded), 2 bad input
    or output location, 1 internal error, 130 after SIGINT (Ctrl-C), 143 after SIGTERM.
    """
    argv = sys.argv[1:] if argv is None else list(argv)
    parser, runners = _parser()
    args = parser.parse_args(_join_negative_numbers(parser, argv))
    if args.version:
        from . import __version__

        print(f"damper {__version__}")
        return 0
    if not args.command:
        parser.print_help()
        return 0
    with _signals():
        return _run(runners[args.command], args, argv)


def _note(exc):
    """The run directory's note on an exception (an incomplete run left behind), if any."""
    note = getattr(exc, "damper_note", None)
    if note:
        print(note, file=sys.stderr)


def _run(runner, args, argv) -> int:
    from .errors import Interrupted

    try:
        return _call(runner, args, argv)
    except KeyboardInterrupt as exc:
        print("damper: interrupted", file=sys.stderr)
        _note(exc)
        return 130
    except Interrupted as exc:
        print("damper: terminated", file=sys.stderr)
        _note(exc)
        return 128 + exc.signal_number
    except BrokenPipeError:  # output piped into e.g. `head`
        import os

        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return 0
    except Exception as exc:  # noqa: BLE001 - the user sees one line, --debug shows all
        from .errors import DamperError

        if args.debug:
            raise
        if isinstance(exc, DamperError):
            print(f"damper: error: {exc}", file=sys.stderr)
            _note(exc)
            return 2
        print(
            f"damper: internal error: {type(exc).__name__}: {exc} (run with --debug for the traceback)",
            file=sys.stderr,
        )
        _note(exc)
        return 1
    finally:
        from .output.progress import reset

        reset()  # a command's progress reporter ends with it (main is also called in-process)


def _call(runner, args, argv):
    """Run a command; on any exception end a progress bar's line first, so the message starts its own."""
    try:
        return runner(args, argv)
    except BaseException:
        from .output.progress import current

        current().end_line()
        raise


class _signals:
    """SIGTERM raises :class:`~damper.errors.Interrupted` (as SIGINT raises KeyboardInterrupt), so every
    command ends the same way: workers stopped, the run directory left consistent, exit 143. SIGXFSZ
    is ignored, so a file-size limit is an error on the write (exit 2) rather than a crash.
    Handlers are restored on exit (``main`` is also called in-process by tests)."""

    def __enter__(self):
        import signal

        self.saved = {}

        def terminated(signum, frame):
            from .errors import Interrupted

            raise Interrupted(signum)

        for name, handler in (("SIGTERM", terminated), ("SIGXFSZ", signal.SIG_IGN)):
            sig = getattr(signal, name, None)
            if sig is None:
                continue
            try:
                self.saved[sig] = signal.signal(sig, handler)
            except (ValueError, OSError):  # not the main thread
                pass
        return self

    def __exit__(self, *exc):
        import signal

        for sig, handler in self.saved.items():
            signal.signal(sig, handler)
        return False


def warn_case(case):
    """Print a case's physics warnings on standard error."""
    for w in case.warnings:
        print(f"damper: warning: {w}", file=sys.stderr)
