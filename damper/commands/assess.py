"""``damper assess CASE (--gain K | --design RUN_DIR | --schedule FILE)``: measure the loop at given gains."""

from __future__ import annotations

import sys

from ..output.progress import add_quiet_option, configure

NAME = "assess"


def register(sub) -> str:
    from .gain_source import add_gain_options

    a = sub.add_parser(NAME, help="measure the loop at every condition with a given gain, a design's chosen gains "
                       "or a schedule's gains")
    a.add_argument("case", help="case file (YAML)")
    add_gain_options(a)
    a.add_argument("--json", action="store_true", help="print the results as JSON on standard output")
    add_quiet_option(a)
    return NAME


def run(args, argv) -> int:
    from ..analysis.assess import assess
    from ..analysis.schedule_points import design_points_case
    from ..case import load_case
    from ..cli import CAUTION_SHORT, warn_case
    from ..analysis.verdicts import assess_verdict
    from ..output.documents.jsonout import assess_document, dumps, with_verdict
    from ..output.documents.text import assess_table
    from .gain_source import check_gain, resolve_gains

    check_gain(args.gain)
    case = load_case(args.case)
    warn_case(case)
    envelope = not case.conditions
    case = design_points_case(case)
    gains = resolve_gains(case, args)
    with configure(args.quiet).stage("assess", len(case.conditions), "conditions"):
        result = assess(case, gains.values)
    doc = assess_document(case, result, command=" ".join(["damper", *argv]))
    doc["gain_source"] = {"kind": gains.kind, "text": gains.text}
    from ..analysis.pipeline import turbulence_stage

    turbulence = turbulence_stage(case, gains.values)
    extra = ()
    if turbulence is not None:
        from ..output.documents.turbulence import add_turbulence

        add_turbulence(doc, turbulence.study, turbulence.checks)
        extra = turbulence.misses
    verdict = assess_verdict(case.names, result, gains.text, extra=extra)
    doc = with_verdict(doc, verdict)
    for note in gains.notes:
        print(f"damper: note: {note}", file=sys.stderr)
    if args.json:
        sys.stdout.write(dumps(doc))
    else:
        print(f"{case.title}: loop with {gains.text}")
        if envelope:
            print(f"(no conditions in the case: evaluated at the {len(case.conditions)} envelope design points "
                  "that damper design starts its schedule from)")
        from ..output.documents.understood import echo_for, with_level_legend

        print(echo_for(case))
        print(with_level_legend(assess_table(doc), case))
        if turbulence is not None:
            from ..output.documents.turbulence import turbulence_table

            print(f"continuous turbulence (Dryden, vertical; covariance analysis, delay as "
                  f"{turbulence.study.closed_loop.delay_model}); rates: expected excursions per second beyond the limit, "
                  "either sign (Rice)")
            print(turbulence_table(doc))
        print("\n".join(verdict.lines()))
        print(CAUTION_SHORT)
    return verdict.exit_status()
