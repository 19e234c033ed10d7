"""Command line: parses arguments and calls the library. Heavy imports happen inside commands."""

from __future__ import annotations

import argparse
import sys

CAUTION_SHORT = (
    "Preliminary engineering analysis only: validate by simulation, ground and flight test; "
    "the applicable airworthiness rules and qualified engineers decide."
)


def _parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(
        prog="damper",
        description="Design and check pitch-rate dampers (pitch stability augmentation) from a YAML case file.",
        epilog=CAUTION_SHORT,
    )
    p.add_argument("--version", action="store_true", help="print the version and exit")
    p.add_argument("--debug", action="store_true", help="show a traceback on errors")
    sub = p.add_subparsers(dest="command", metavar="COMMAND")

    a = sub.add_parser("assess", help="measure the loop with a given gain at every condition")
    a.add_argument("case", help="case file (YAML)")
    a.add_argument("--gain", required=True, type=float, metavar="K", help="pitch-rate gain K in seconds (deg per deg/s)")
    a.add_argument("--json", action="store_true", help="print the results as JSON on standard output")
    return p


def main(argv=None) -> int:
    argv = sys.argv[1:] if argv is None else list(argv)
    parser = _parser()
    args = parser.parse_args(argv)
    if args.version:
        from . import __version__

        print(f"damper {__version__}")
        return 0
    if not args.command:
        parser.print_help()
        return 0
    try:
        return _COMMANDS[args.command](args, argv)
    except Exception as exc:  # noqa: BLE001 - the user sees one line, --debug shows all
        from .errors import DamperError

        if args.debug:
            raise
        if isinstance(exc, DamperError):
            print(f"damper: error: {exc}", file=sys.stderr)
            return 2
        print(f"damper: internal error: {type(exc).__name__}: {exc} (run with --debug for details)", file=sys.stderr)
        return 1


def _warn(case):
    for w in case.warnings:
        print(f"damper: warning: {w}", file=sys.stderr)


def _cmd_assess(args, argv) -> int:
    import math

    from .analysis.assess import assess
    from .case import load_case
    from .errors import DamperError
    from .output.jsonout import assess_document, dumps
    from .output.text import assess_table

    if not math.isfinite(args.gain):
        raise DamperError(f"--gain = {args.gain}: must be a finite number of seconds")
    case = load_case(args.case)
    _warn(case)
    result = assess(case, args.gain)
    doc = assess_document(case, result, command=" ".join(["damper", *argv]))
    if args.json:
        sys.stdout.write(dumps(doc))
    else:
        print(f"{case.title}: loop with K = {args.gain:g} s")
        print(assess_table(doc))
        print(CAUTION_SHORT)
    return 0


_COMMANDS = {"assess": _cmd_assess}
