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
)


def _parser():
    p = argparse.ArgumentParser(
        prog="damper",
        description="Design and check pitch-rate dampers (pitch stability augmentation) from a YAML case file.",
        epilog=CAUTION_SHORT,
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
    """Run the command line; returns the exit code (0 ok, 2 bad input, 1 internal error)."""
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
    try:
        return runners[args.command](args, argv)
    except KeyboardInterrupt:
        print("damper: interrupted", file=sys.stderr)
        return 130
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
            return 2
        print(
            f"damper: internal error: {type(exc).__name__}: {exc} (run with --debug for the traceback)",
            file=sys.stderr,
        )
        return 1


def warn_case(case):
    """Print a case's physics warnings on standard error."""
    for w in case.warnings:
        print(f"damper: warning: {w}", file=sys.stderr)
