"""``damper assess CASE --gain K``: measure the loop with a given gain at every condition."""

from __future__ import annotations

import sys

from ..output.progress import add_quiet_option, configure

NAME = "assess"


def register(sub) -> str:
    a = sub.add_parser(NAME, help="measure the loop with a given gain at every condition")
    a.add_argument("case", help="case file (YAML)")
    a.add_argument("--gain", required=True, type=float, metavar="K", help="pitch-rate gain K in seconds (deg per deg/s)")
    a.add_argument("--json", action="store_true", help="print the results as JSON on standard output")
    add_quiet_option(a)
    return NAME


def run(args, argv) -> int:
    import math

    from ..analysis.assess import assess
    from ..analysis.schedule_points import design_points_case
    from ..case import load_case
    from ..cli import CAUTION_SHORT, warn_case
    from ..errors import DamperError
    from ..analysis.verdicts import assess_verdict
    from ..output.jsonout import assess_document, dumps, with_verdict
    from ..output.text import assess_table

    if not math.isfinite(args.gain):
        raise DamperError(f"--gain = {args.gain}: must be a finite number of seconds")
    case = load_case(args.case)
    warn_case(case)
    envelope = not case.conditions
    case = design_points_case(case)
    with configure(args.quiet).stage("assess", len(case.conditions), "conditions"):
        result = assess(case, args.gain)
    verdict = assess_verdict(case.names, result, f"K = {args.gain:g} s")
    doc = with_verdict(assess_document(case, result, command=" ".join(["damper", *argv])), verdict)
    if args.json:
        sys.stdout.write(dumps(doc))
    else:
        print(f"{case.title}: loop with K = {args.gain:g} s")
        if envelope:
            print(f"(no conditions in the case: evaluated at the {len(case.conditions)} envelope design points "
                  "that damper design starts its schedule from)")
        from ..output.understood import echo_for, with_level_legend

        print(echo_for(case))
        print(with_level_legend(assess_table(doc), case))
        print("\n".join(verdict.lines()))
        print(CAUTION_SHORT)
    return verdict.exit_status()
